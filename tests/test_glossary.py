"""Every JSON key is snake_case and every term on the vocab and train screens is in docs/glossary.md.

The glossary is read by :mod:`glossary` (tests/glossary.py); the assessment's
screens are checked the same way in their own tests.
"""

import contextlib
import io
import json
import re
from pathlib import Path

import pandas as pd
import pytest
from rich.console import Console

import glossary
from explain.analysis.risk import FLAG_LABELS, read_watchlist
from explain.analysis.vocab import LENS_TITLES, LENSES, review_vocabulary
from explain.cli import run
from explain.model.loading import load_model
from explain.present import vocab as present

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_corpus" / "messages.csv"


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("glossary")
    pd.read_csv(DEMO, dtype=str, keep_default_na=False).iloc[:1500].to_csv(folder / "train.csv", index=False)
    (folder / "watch.txt").write_text("harbour\nroma\n", encoding="utf-8")
    return folder


def cli(capsys, *args):
    capsys.readouterr()
    code = run([*map(str, args)])
    out, err = capsys.readouterr()
    assert code == 0, err
    return out


@pytest.fixture(scope="module")
def trained(files):
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert run(["train", str(files / "train.csv"), "--text-col", "text", "--label-col", "label",
                    "--normal-class", "ok", "--holdout", "0.2", "--seed", "3", "--out", str(files / "m.skops")]) == 0
    return files / "m.skops"


def test_the_glossary_reads_and_defines_each_term_once():
    terms = [t.partition(" (")[0].lower() for t, *_ in glossary.rows()]
    assert len(terms) == len(set(terms)), sorted(t for t in terms if terms.count(t) > 1)
    for must in ("normal class", "flagged", "false alarm", "missed", "evidence", "support", "margin", "p(flag)",
                 "comparison", "watchlist-strong", "stopword", "thin", "mixed-script"):
        assert glossary.is_term(must), must
    assert not glossary.is_term("contrast") and not glossary.is_key("contrast")
    assert "interval in round brackets" in glossary.GLOSSARY.read_text(encoding="utf-8")


def test_every_json_key_is_snake_case(files, trained, capsys):
    documents = {
        "vocab": json.loads(cli(capsys, "vocab", trained, "--watchlist", files / "watch.txt", "--data",
                                files / "train.csv", "--text-col", "text", "--label-col", "label", "--format", "json")),
        "why": json.loads(cli(capsys, "why", trained, "Pay the berth fee at http://fee.example.net today",
                              "--format", "json")),
        "assess": json.loads(cli(capsys, "assess", trained, files / "train.csv", "--text-col", "text",
                                 "--label-col", "label", "--format", "json")),
        "train card": json.loads(trained.with_name("m.card.json").read_text(encoding="utf-8")),
    }
    for name, document in documents.items():
        assert len(glossary.json_keys(document)) > 10, name  # the walk found the document's keys
        assert glossary.not_snake_case(document) == [], name
    # the check can fail: the old key would be caught
    assert glossary.not_snake_case({"flags": {"mixed-script": 1}}) == ["/flags/mixed-script"]


def test_csv_columns_are_glossary_keys(trained, capsys):
    columns = cli(capsys, "vocab", trained, "--format", "csv").splitlines()[0].split(",")
    assert "comparison" in columns and "contrast" not in columns
    assert [c for c in columns if not glossary.is_key(c)] == []


def _review(trained, files, lens="zscore"):
    model = load_model(trained)
    return review_vocabulary(model.view, lens=lens, top=5, watchlist=read_watchlist(files / "watch.txt"))


@pytest.mark.parametrize("width", [80, 120, 160])
@pytest.mark.parametrize("lens", LENSES)
def test_vocab_screen_terms_are_in_the_glossary(trained, files, width, lens):
    review = _review(trained, files, lens)
    c = review.comparisons[0]
    tables = [present._token_table(review, c, c.top(lens, 5, side), side, width >= present.WIDE_TERMINAL)
              for side in ("for", "against")]
    tables += [present._watchlist(review, c) for c in review.comparisons]
    for table in tables:
        for column in table.columns:
            heading = str(column.header).split("\n")[0]
            assert glossary.is_term(heading), heading
    for name in FLAG_LABELS.values():
        assert glossary.is_term(name), name
    for title in LENS_TITLES.values():
        assert glossary.is_term(title.partition(" (")[0]), title
    text = _render(review, width)
    flags = re.search(r"^flags: (.*?)(?=\n  strongest|\n\S|\n?\Z)", text, re.M | re.S).group(1)  # folded lines indented
    pairs = " ".join(flags.split()).split(", ")
    assert len(pairs) == len(FLAG_LABELS)
    for pair in pairs:
        name, count = pair.split("=")
        assert glossary.is_term(name) and count.replace(",", "").isdigit(), pair


def _render(review, width):
    buffer = io.StringIO()
    present.render(review, Console(file=buffer, width=width, no_color=True, highlight=False))
    return buffer.getvalue()


def test_train_screen_terms_are_in_the_glossary(files, capsys):
    out = cli(capsys, "train", files / "train.csv", "--text-col", "text", "--label-col", "label",
              "--variant", "bernoulli", "--ngrams", "1-2", "--holdout", "0.25", "--out", files / "b.skops")
    labelled = [line.split(":", 1) for line in out.splitlines() if re.match(r"^[a-z][a-z -]*:", line)]
    assert {label for label, _ in labelled} == {"rows trained on", "features", "hold-out"}
    for label, rest in labelled:
        assert glossary.is_term(label), label
    features = dict(labelled)["features"]
    kind, _, ngrams = features.strip().partition(" of ")
    definitions = {t.partition(" (")[0]: d for t, _, d, _ in glossary.rows()}
    assert f'"{kind}"' in definitions["features"] and kind == "presence (0/1)"
    assert f'"{ngrams.split(";")[0]}"' in definitions["n-grams"]
    metrics = next(line for line in out.splitlines() if line.startswith("  "))
    for name in re.findall(r"([A-Za-z][A-Za-z0-9 ]*?) [0-9]", metrics):
        assert glossary.is_term(name.strip(", ")), name


def test_every_glossary_entry_has_a_definition_and_snake_case_keys():
    for term, keys, definition, _ in glossary.rows():
        assert term and len(definition) > 20, term
        for key in re.findall(r"`([^`]+)`", keys):
            assert glossary.SNAKE_CASE.fullmatch(re.sub(r"<[^>]+>", "x", key)), (term, key)


# --- the ledger screen, the report's headings and its JSON twin ------------------------------------

# Headings that name what a row is about, not a figure: they need no glossary entry.
PLAIN_HEADINGS = frozenset({
    "#", "class", "message", "tokens", "figure", "formula", "source", "chosen by", "strongest examples",
    "behind false alarms", "behind misses", "true \\ decided",
})
# Keys the glossary retired: an output that still writes one has drifted from it.
RETIRED_KEYS = frozenset({
    "false_positive_rate", "roc_true_positive_rate", "brier", "ece", "decided", "running_balance",
    "closing_balance", "disguised_word",
})


def heading_is_term(heading: str, classes) -> bool:
    """A column heading reads as a glossary term once class names, arrows and units are set aside."""
    text = " ".join(re.sub(r"[▲▼≥]|/ 10,000| \(.*?\)", " ", heading).split())
    # a class name, or "flagged" for several flagged classes together, names a side of the ledger
    sides = " ".join(w for w in text.split() if w not in {*classes, "flagged"} and not re.fullmatch(r"[\w-]+(/[\w-]+)+", w))
    return any(
        not t or t.lower() in PLAIN_HEADINGS or glossary.is_term(t) or (t.endswith("s") and glossary.is_term(t[:-1]))
        for t in (text, sides)
    )


def test_the_heading_check_can_fail():
    assert heading_is_term("support scam", {"scam"}) and heading_is_term("false alarms / 10,000", set())
    assert not heading_is_term("P(not ok)", {"ok"}) and not heading_is_term("score", set())


def test_ledger_screen_says_p_flag_and_uses_glossary_headings(trained):
    from explain.analysis.ledger import ledger_of
    from explain.present.ledger_terminal import render as render_ledger

    model = load_model(trained)
    text = "Your parcel came to Customs House by mistake, pay the fee at http://fee.example.net today"
    for threshold in (None, 0.5):
        ledger = ledger_of(model, text, threshold, message_id="tc-" + "9" * 40)
        console = Console(width=80, no_color=True, record=True, file=io.StringIO())
        render_ledger(ledger, console, date="2026-01-01T00:00:00Z")
        screen = console.export_text()
        assert max(map(len, screen.splitlines())) <= 80
        assert "LEDGER OF ONE DECISION\n" in screen  # the head line is stacked, one fact a line
        # P(flag) is the one name; the normal class is said once, beside it
        assert screen.count("P(not ") == screen.count("P(flag) = P(not ") <= 1
        assert "P(flag)" in screen or threshold is None
        header = next(line for line in screen.splitlines() if line.lstrip().startswith("#"))
        for heading in header.split():
            assert heading_is_term(heading, model.classes), heading


def test_report_headings_and_json_twin_keys_follow_the_glossary(trained, files, tmp_path, capsys):
    pdf, html, twin = tmp_path / "r.pdf", tmp_path / "r.html", tmp_path / "r.json"
    cli(capsys, "report", trained, "--data", files / "train.csv", "--threshold-log-odds", "0.25",
        "--base-rate", "2%", "--out", pdf, "--html", html, "--json", twin)
    page = html.read_text(encoding="utf-8")
    model = load_model(trained)
    headings = []
    for head in re.findall(r"<thead>(.*?)</thead>", page, re.S):
        headings += [re.sub(r"<[^>]+>", " ", h) for h in re.findall(r"<th[^>]*>(.*?)</th>", head, re.S)]
    assert len(headings) > 20
    for heading in headings:
        assert heading_is_term(" ".join(heading.split()), model.classes), heading
    assert "P(not " not in page.replace("P(flag) = P(not ", "")
    document = json.loads(twin.read_text(encoding="utf-8"))
    keys = {key for _, key in glossary.json_keys(document)}
    assert keys & RETIRED_KEYS == set()
    for key in ("false_alarm_rate", "brier_score", "expected_calibration_error", "decided_class", "flag_probability",
                "threshold_log_odds", "base_rate", "projection", "balance_after", "closing", "disguised"):
        assert key in keys and glossary.is_key(key), key
    why = json.loads(cli(capsys, "why", trained, "Pay the berth fee at http://fee.example.net today", "--format", "json"))
    assert {key for _, key in glossary.json_keys(why)} & RETIRED_KEYS == set()
