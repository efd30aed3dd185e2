"""``nbledger compare`` from the command line: outputs, redaction and bad input (issue 9)."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

from explain.cli import run
from tests.clirun import nbledger

DEMO = Path(__file__).resolve().parents[1] / "demo_corpus" / "messages.csv"


@pytest.fixture(scope="module")
def models(tmp_path_factory):
    """Old: words, first 1500 rows; new: entity tokens, first 3000 rows; two-class: scam vs ok only."""
    folder = tmp_path_factory.mktemp("compare")
    frame = pd.read_csv(DEMO, dtype=str, keep_default_na=False)
    frame.iloc[:1500].to_csv(folder / "early.csv", index=False)
    frame.iloc[:3000].to_csv(folder / "later.csv", index=False)
    frame.iloc[3000:3600].to_csv(folder / "test.csv", index=False)
    frame[frame.label != "advert"].iloc[:1500].to_csv(folder / "two.csv", index=False)
    common = ["--text-col", "text", "--label-col", "label", "--normal-class", "ok"]
    for data, name, extra in (("early", "old", []), ("later", "new", ["--tokens", "entities"]), ("two", "two", [])):
        assert run(["train", str(folder / f"{data}.csv"), *common, *extra, "--out", str(folder / f"{name}.skops")]) == 0
    return folder


def test_terminal_json_and_report(models, capsys):
    f = models
    shown = nbledger(capsys, "compare", f / "old.skops", f / "new.skops", "--data", f / "test.csv", "--show", "3")
    assert shown.code == 0, shown.err
    assert "McNemar's test (1947)" in shown.out and "cut text into tokens differently" in shown.out
    doc = json.loads(nbledger(capsys, "compare", f / "old.skops", f / "new.skops", "--data", f / "test.csv",
                              "--format", "json").out)
    d = doc["decisions"]
    assert doc["schema"] == "nbledger.compare/1" and d["messages"] == 600
    assert sum(c["messages"] for c in d["changes"]) == d["changed"] == len(d["shown"]) or len(d["shown"]) == 20
    # Redaction by default: the entity model's whole e-mail addresses, URLs and numbers never appear.
    text = json.dumps(doc)
    assert "example.org" not in text and "example.net" not in text and "555-01" not in text
    assert any(t.startswith("[") for t in doc["vocabulary"]["added"])
    plain = json.loads(nbledger(capsys, "compare", f / "old.skops", f / "new.skops", "--redact", "none",
                                "--format", "json").out)
    assert any("example." in t for t in plain["vocabulary"]["added"])
    for suffix in ("html", "pdf"):
        out = f / f"c.{suffix}"
        assert nbledger(capsys, "compare", f / "old.skops", f / "new.skops", "--data", f / "test.csv",
                        "--out", out).code == 0
        assert out.stat().st_size > 1000
    assert "example.org" not in (f / "c.html").read_text(encoding="utf-8")
    # its pages: none under a third full but the cover and a section's last page (the changed messages'
    # ledgers flow on; a rule that started each pair on a page of its own left pages nearly empty)
    from page_layout import check_pages

    fills = check_pages((f / "c.html").read_text(encoding="utf-8"), headings=False)
    assert len(fills) >= 5


def test_same_file_twice_says_so(models, capsys):
    f = models
    doc = json.loads(nbledger(capsys, "compare", f / "old.skops", f / "old.skops", "--data", f / "test.csv",
                              "--format", "json").out)
    assert doc["same_file"] and doc["decisions"]["changed"] == 0
    assert any("same" in n for n in doc["notes"])
    assert doc["vocabulary"]["added"] == doc["vocabulary"]["removed"] == []


def test_different_class_sets_compare_what_can_be(models, capsys):
    f = models
    doc = json.loads(nbledger(capsys, "compare", f / "two.skops", f / "old.skops", "--data", f / "test.csv",
                              "--format", "json").out)
    assert any("only the new has advert" in n for n in doc["notes"])
    assert [k["target"] for k in doc["vocabulary"]["comparisons"]] == ["scam"]
    assert {p["class"]: p["old_share"] for p in doc["vocabulary"]["priors"]}["advert"] is None
    assert doc["decisions"]["mcnemar"] is not None


@pytest.mark.parametrize("args, says", [
    (["--normal-class", "advert"], "not a class of the old model"),
    (["--format", "yaml"], "--format"),
    (["--out", "x.txt"], "--out must end in"),
    (["--redact", "bodies"], "--redact"),
])
def test_bad_input_is_one_line(models, capsys, args, says):
    f = models
    outcome = nbledger(capsys, "compare", f / "two.skops", f / "old.skops", *args)
    assert says in outcome.one_error_line()


def test_the_balance_of_each_changed_message_is_why_s_own(models, capsys):
    # compare shows each changed message with the ledger `why` gives it under each model: the same closing
    # balance, the same sign (issue 21), for ok decisions as for flagged ones
    f = models
    doc = json.loads(nbledger(capsys, "compare", f / "old.skops", f / "new.skops", "--data", f / "test.csv",
                              "--redact", "none", "--show", "6", "--format", "json").out)
    texts = pd.read_csv(f / "test.csv", dtype=str, keep_default_na=False).text.tolist()
    decisions = set()
    for m in doc["decisions"]["shown"]:
        for side, model in (("old", "old.skops"), ("new", "new.skops")):
            why = json.loads(nbledger(capsys, "why", f / model, texts[m["row"] - 1], "--format", "json").out)
            assert m[side]["closing"] == pytest.approx(why["ledger"]["closing"], abs=1e-12), (m["row"], side)
            decisions.add(m[f"{side}_decision"])
    assert "ok" in decisions and len(decisions) > 1


def test_id_col_and_keyed_pseudonyms_name_the_changed_messages(models, capsys, tmp_path):
    """--id-col names the ids of the changed messages; one holding an address is its HMAC-SHA-256 pseudonym
    (RFC 2104) under --id-key-file, the same in two runs; a bad key file is one error line."""
    from explain.analysis.redaction import pseudonym

    f = models
    frame = pd.read_csv(f / "test.csv", dtype=str, keep_default_na=False)
    frame["msgid"] = [f"<{i}@mail.example.org>" if n % 2 else f"ref-{i}" for n, i in enumerate(frame.id)]
    frame.to_csv(tmp_path / "ided.csv", index=False)
    (tmp_path / "org.key").write_bytes(b"tideway commons secret 2026")
    args = ["compare", f / "old.skops", f / "new.skops", "--data", tmp_path / "ided.csv", "--id-col", "msgid",
            "--format", "json"]
    runs = [nbledger(capsys, *args, "--id-key-file", tmp_path / "org.key") for _ in range(2)]
    assert all(r.code == 0 for r in runs), runs[0].err
    shown = [[m["id"] for m in json.loads(r.out)["decisions"]["shown"]] for r in runs]
    assert shown[0] == shown[1] and shown[0]
    expected = {pseudonym(b"tideway commons secret 2026", m) if "@" in m else m for m in frame.msgid}
    assert set(shown[0]) <= expected and "mail.example.org" not in runs[0].out
    (tmp_path / "empty.key").write_bytes(b"")
    bad = nbledger(capsys, *args, "--id-key-file", tmp_path / "empty.key")
    assert bad.code == 2 and "id key file" in bad.one_error_line()
