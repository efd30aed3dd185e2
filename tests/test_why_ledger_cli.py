"""`nbledger why` as a ledger: colour that can be switched off, records, redaction, messages by id, bad input."""

from __future__ import annotations

import json
import re

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from clirun import nbledger
from explain.present.drawing import NEUTRAL, PALETTE

COLOUR_WORDS = [f.name for f in PALETTE] + [NEUTRAL.name, "darker", "bold", "faint", "colour", "color"]
ROWS = [
    ("m1", "pay the parcel fee now at the link", "scam"),
    ("m2", "your parcel fee is unpaid pay today", "scam"),
    ("m3", "depot fee pay at the link", "scam"),
    ("m4", "thanks for the drill back today", "ok"),
    ("m5", "tea at the workshop at four", "ok"),
    ("m6", "can I borrow your ladder thanks", "ok"),
    ("m7", "window cleaning offer call now", "advert"),
    ("m8", "solar panels offer for flats", "advert"),
    ("m4", "a second message that reuses the id m4 about solar offers", "advert"),
]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from explain.cli import run

    folder = tmp_path_factory.mktemp("ledger")
    data = folder / "train.csv"
    data.write_text("id,text,label\n" + "".join(f"{i},{t},{l}\n" for i, t, l in ROWS))
    model = folder / "m.skops"
    assert run(["train", str(data), "--text-col", "text", "--label-col", "label",
                "--out", str(model), "--normal-class", "ok"]) == 0
    return model, data


def _plain(result):
    assert result.code == 0, result.err
    assert "\x1b" not in result.out
    legend = next(line for line in result.out.splitlines() if "credit, toward" in line or "debit, toward" in line)
    assert not any(word in legend for word in COLOUR_WORDS), legend


def test_non_terminal_output_has_no_colour(demo, capsys, monkeypatch):
    monkeypatch.delenv("NO_COLOR", raising=False)
    monkeypatch.delenv("FORCE_COLOR", raising=False)
    _plain(nbledger(capsys, "why", demo[0], "pay the parcel fee at the depot"))


def test_no_color_wins_over_a_terminal(demo, capsys, monkeypatch):
    monkeypatch.setenv("FORCE_COLOR", "1")  # rich then treats the output as a terminal
    coloured = nbledger(capsys, "why", demo[0], "pay the parcel fee at the depot")
    assert "\x1b[" in coloured.out  # the control: on a terminal there is colour ...
    monkeypatch.setenv("NO_COLOR", "1")
    _plain(nbledger(capsys, "why", demo[0], "pay the parcel fee at the depot"))  # ... and NO_COLOR removes it
    monkeypatch.delenv("NO_COLOR")
    _plain(nbledger(capsys, "why", demo[0], "pay the parcel fee", "--color", "never"))


def test_color_always_names_the_class_colours(demo, capsys, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    result = nbledger(capsys, "why", demo[0], "pay the parcel fee", "--color", "always")
    assert result.code == 0 and "\x1b[" in result.out
    assert "▲ credit, toward scam" in result.out


def test_records_carry_fingerprint_id_threshold_and_date(demo, capsys, tmp_path, monkeypatch):
    model, data = demo
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1780000000")  # 2026-05-28T20:26:40Z (computed with datetime)
    sha = __import__("hashlib").sha256(model.read_bytes()).hexdigest()
    card = json.loads(model.with_name("m.card.json").read_text())
    for suffix in (".txt", ".json"):
        out = tmp_path / f"record{suffix}"
        result = nbledger(capsys, "why", model, "--data", data, "--id", "m2", "--threshold", "0.9", "--out", out)
        assert result.code == 0, result.err
        assert result.out == ""
        written = out.read_text()
        for needle in (sha, card["model"]["fingerprint"], card["created"], "m2", "2026-05-28T20:26:40Z", "0.9"):
            assert needle in written, (suffix, needle)
    doc = json.loads((tmp_path / "record.json").read_text())
    assert doc["message_id"] == "m2" and doc["threshold"] == 0.9 and doc["date"] == "2026-05-28T20:26:40Z"
    assert doc["card_date"] == card["created"] and doc["model"]["sha256"] == sha
    assert doc["model"]["fingerprint"] == card["model"]["fingerprint"]


def test_several_ids_into_one_output(demo, capsys, tmp_path):
    model, data = demo
    ids = tmp_path / "ids.txt"
    ids.write_text("# wanted\nm1\n\nm7\n")
    result = nbledger(capsys, "why", model, "--data", data, "--ids", ids, "--format", "json")
    assert result.code == 0, result.err
    doc = json.loads(result.out)
    assert doc["schema"] == "nbledger.why-set/3"
    assert [m["message_id"] for m in doc["messages"]] == ["m1", "m7"]
    text = nbledger(capsys, "why", model, "--data", data, "--ids", ids, "--out", tmp_path / "both.txt")
    assert text.code == 0
    assert (tmp_path / "both.txt").read_text().count("LEDGER OF ONE DECISION") == 2


def test_duplicate_ids_explain_the_first_and_warn(demo, capsys):
    result = nbledger(capsys, "why", demo[0], "--data", demo[1], "--id", "m4", "--format", "json")
    assert result.code == 0
    assert "warning: id 'm4' occurs 2 times" in result.err and "explaining the first" in result.err
    tokens = {e["token"] for e in json.loads(result.out)["ledger"]["entries"]}
    assert "drill" in tokens and "solar" not in tokens


@pytest.mark.parametrize(
    "args,expected",
    [
        (["--data", "{data}", "--id", "m99"], "no message with id 'm99' in train.csv"),
        (["--data", "{data}", "--id", "m1", "--id-col", "ref"], "has no column 'ref'"),
        (["hello", "--out", "record.docx"], "'record.docx' has an unknown suffix; records are written as .txt, .json"),
        (["--data", "{data}"], "--data needs --id ID or --ids FILE"),
        (["--id", "m1"], "give it with --data"),
        (["hello", "--color", "sometimes"], "--color must be auto, always or never"),
    ],
)
def test_bad_input_is_one_line(demo, capsys, tmp_path, args, expected):
    model, data = demo
    args = [a.replace("{data}", str(data)) for a in args]
    line = nbledger(capsys, "why", model, *args).one_error_line()
    assert expected in line
    if "m99" in expected:
        assert "8 distinct ids" in line
    assert not (tmp_path / "record.docx").exists()


NAMES = ["warden", "harbourmaster", "quayside.rota", "sail-loft"]


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    name=st.sampled_from(NAMES),
    domain=st.sampled_from(["example.org", "example.net", "example.com"]),
    digits=st.integers(0, 99),
    spacer=st.sampled_from(["-", " ", "."]),
    where=st.integers(0, 6),
)
def test_redaction_hides_planted_addresses_and_numbers(demo, capsys, tmp_path_factory, name, domain, digits, spacer, where):
    address, phone = f"{name}@{domain}", f"555{spacer}01{digits:02d}"
    words = "pay the parcel fee now at the link today".split()
    words.insert(where, f"write to {address} or ring {phone},")
    message = " ".join(words)
    out = tmp_path_factory.mktemp("red") / "r.json"
    for args in (["--format", "json"], [], ["--out", out]):
        result = nbledger(capsys, "why", demo[0], message, "--redact", *args)
        assert result.code == 0, result.err
        shown = result.out + (out.read_text() if args and args[0] == "--out" else "")
        for secret in (address, phone):
            assert secret not in shown, (secret, args)
        for piece in (name, "555", f"01{digits:02d}"):  # pieces the vectorizer may have made of them, as words
            assert not re.search(rf"(?<![\w.]){re.escape(piece)}(?![\w])", shown), (piece, args)
        assert "[e-mail 1]" in shown or "e-mail" in shown


def test_html_fragment_lays_out_an_escaped_ledger(demo):
    import jinja2

    from explain.analysis.ledger import ledger_of
    from explain.model.loading import load_model
    from explain.present.ledger_html import TEMPLATE, ledger_context

    model = load_model(demo[0])
    ledger = ledger_of(
        model, "<script>alert(1)</script> pay the p\u0430rcel fee to warden@example.org", message_id="m<1>"
    )
    env = jinja2.Environment(loader=jinja2.FileSystemLoader("templates"), autoescape=True, undefined=jinja2.StrictUndefined)
    html = env.get_template(TEMPLATE).render(lv=ledger_context(ledger, "personal", date="2026-05-28T20:26:40Z"))
    assert "<html" not in html and "<script>" not in html and "&lt;script&gt;" in html and "m&lt;1&gt;" in html
    assert "warden@example.org" not in html and "[e-mail 1]" in html
    assert model.sha256 in html and "closing balance" in html
    assert 'class="nbl-disguised" title="looks like parcel">p\u0430rcel</span>' in html
    # Every entry row carries its direction as a mark, so grey print keeps it.
    assert html.count('<span class="nbl-mk">▲</span>') + html.count('<span class="nbl-mk">▼</span>') >= len(ledger.entries)
    withheld = env.get_template(TEMPLATE).render(lv=ledger_context(ledger, "bodies"))
    assert "alert(1)" not in withheld and "Message text withheld" in withheld


def test_sixteen_colours_show_strength_by_weight_not_by_brightness(demo):
    """On 16 colours the palette's light shades would turn bright and read stronger: weight shows strength."""
    import io

    from rich.console import Console

    from explain.analysis.ledger import ledger_of
    from explain.model.loading import load_model
    from explain.present.drawing import class_colours
    from explain.present.ledger_terminal import _word, colour_mode, render

    ledger = ledger_of(load_model(demo[0]), "pay the parcel fee at the depot today")
    buffer = io.StringIO()
    console = Console(file=buffer, force_terminal=True, color_system="standard", width=80)
    assert colour_mode(console) == "weights"
    render(ledger, console)
    out = buffer.getvalue()
    assert "\x1b[38;2" not in out and "\x1b[48" not in out  # no truecolor, no background shades
    assert "bold is stronger" in " ".join(out.split()) and "darker" not in out
    families = class_colours(ledger.classes, ledger.normal_class)
    largest = max(abs(e.per_occurrence) for e in ledger.entries)
    styles = {e.token: str(_word(e, largest, "weights", families).spans[-1].style) for e in ledger.entries}
    strongest = max(ledger.entries, key=lambda e: abs(e.per_occurrence))
    weakest = min(ledger.entries, key=lambda e: abs(e.per_occurrence))
    assert "bold" in styles[strongest.token] and "dim" in styles[weakest.token]


def test_support_counts_training_messages_when_data_is_the_cards_training_file(demo, capsys):
    model, data = demo
    doc = json.loads(nbledger(capsys, "why", model, "--data", data, "--id", "m1", "--format", "json").out)
    ledger = doc["ledger"]
    assert ledger["support_kind"] == "documents" and "training data of the model card" in ledger["support_source"]
    fee = next(e for e in ledger["entries"] if e["token"] == "fee")
    # Counted by hand in ROWS: messages holding "fee" per class.
    expected = {c: sum(1 for _, t, l in ROWS if l == c and "fee" in t.split()) for c in ("advert", "ok", "scam")}
    assert fee["support"] == expected


def test_watchlist_terms_are_flagged_beside_their_entries(demo, capsys, tmp_path):
    terms = tmp_path / "watch.txt"
    terms.write_text("# words a fairness review looks at\nLadder\n")
    doc = json.loads(nbledger(capsys, "why", demo[0], "can I borrow your ladder", "--watchlist", terms,
                              "--format", "json").out)
    flags = {e["token"]: e["flags"] for e in doc["ledger"]["entries"]}
    assert "watchlist" in flags["ladder"] and "watchlist" not in flags["borrow"]


def test_closing_odds_name_the_side_the_balance_favours_even_when_a_threshold_overrules_it(demo, capsys):
    # A balance above 0 favours the flagged side; a threshold line above it still lets the message through.
    model, _ = demo
    r = nbledger(capsys, "why", model, "pay the parcel fee", "--threshold", "0.999999", "--format", "json")
    doc = json.loads(r.out)
    assert doc["ledger"]["closing"] > 0 and doc["decision"] == "ok"
    r = nbledger(capsys, "why", model, "pay the parcel fee", "--threshold", "0.999999", "--color", "never")
    closing = next(line for line in r.out.splitlines() if line.startswith("closing balance"))
    assert closing.rstrip().endswith(f"for {doc['ledger']['credit_side']}"), closing
