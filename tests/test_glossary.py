"""Every JSON key is snake_case and every term on the vocab and train screens is in docs/glossary.md.

The glossary is read by :mod:`glossary` (tests/glossary.py); the assessment's
screens are checked the same way in their own tests.
"""

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
    import contextlib

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
    c = review.contrasts[0]
    tables = [present._token_table(review, c, c.top(lens, 5, side), side, width >= present.WIDE_TERMINAL)
              for side in ("for", "against")]
    tables.append(present._watchlist(review))
    for table in tables:
        for column in table.columns:
            heading = str(column.header).split("\n")[0]
            assert glossary.is_term(heading), heading
    for name in FLAG_LABELS.values():
        assert glossary.is_term(name), name
    for title in LENS_TITLES.values():
        assert glossary.is_term(title.partition(" (")[0]), title
    text = _render(review, width)
    flags = re.search(r"^flags: (.*?)(?=\n\s|\Z)", text, re.M | re.S).group(1)
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
