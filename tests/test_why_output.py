"""What `nbledger why` shows: the documented JSON and a readable terminal account."""

from __future__ import annotations

import json
import math

import pytest

from clirun import nbledger
from explain.present.ledger_json import SCHEMA
from explain.present.token_display import shown

DOCUMENTED_KEYS = {
    "schema", "model", "classes", "predicted", "runner_up", "probabilities", "log_odds", "baseline",
    "baseline_prior", "baseline_absence", "threshold", "normal_class", "flag_probability", "decision",
    "tokens", "spans_note", "unknown_tokens", "flip_set", "flip_exact", "flip_method", "flip_decision",
    "flip_reason", "feature_kind", "variant", "email",
}
# nbledger.why/2 and /3 only add keys beside those of nbledger.why/1 (/3: text_view, and ledger.versus ...).
ADDED_KEYS = {"message_id", "date", "card_date", "redacted", "circulation", "ledger", "collisions", "text_view"}
MESSAGE = "Your parcel is at the depot: pay the fee at http://parcel-fee.example.net/x today, thanks"


@pytest.fixture(scope="module")
def model(tmp_path_factory):
    from explain.cli import run

    folder = tmp_path_factory.mktemp("why")
    data = folder / "train.csv"
    rows = [("pay the parcel fee now http link", "scam"), ("your parcel fee is unpaid pay today", "scam"),
            ("depot fee pay at the link", "scam"), ("thanks for the drill back today", "ok"),
            ("tea at the workshop at four", "ok"), ("can I borrow your ladder thanks", "ok"),
            ("window cleaning offer call now", "advert"), ("solar panels offer for flats", "advert")]
    data.write_text("text,label\n" + "".join(f"{t},{l}\n" for t, l in rows))
    code = run(["train", str(data), "--text-col", "text", "--label-col", "label",
                "--out", str(folder / "m.skops"), "--normal-class", "ok"])
    assert code == 0
    return folder / "m.skops"


def test_json_carries_the_documented_keys_and_adds_up(model, capsys):
    result = nbledger(capsys, "why", model, MESSAGE, "--format", "json", "--threshold", "0.5")
    assert result.code == 0, result.err
    doc = json.loads(result.out)
    assert set(doc) == DOCUMENTED_KEYS | ADDED_KEYS and doc["schema"] == SCHEMA == "nbledger.why/3"
    ledger = doc["ledger"]
    assert math.isclose(ledger["opening"] + sum(e["amount"] for e in ledger["entries"]), ledger["closing"], rel_tol=1e-9)
    assert ledger["credit_side"] == "flagged" and ledger["debit_class"] == "ok" and not ledger["exact"]
    assert ledger["versus"] == "flag-log-odds" and ledger["beat"] is None and doc["text_view"] == "raw"
    assert math.isclose(doc["baseline"] + sum(t["evidence"] for t in doc["tokens"]), doc["log_odds"], rel_tol=1e-9)
    assert math.isclose(sum(doc["probabilities"].values()), 1.0, rel_tol=1e-12)
    assert doc["normal_class"] == "ok" and doc["decision"] == doc["predicted"] == "scam"
    for t in doc["tokens"]:
        for start, end in t["spans"]:
            assert MESSAGE[start:end].lower() == t["token"]
    assert {u["token"] for u in doc["unknown_tokens"]} >= {"example", "net"}
    # A threshold over two flagged classes (advert, scam) sums probabilities: greedy, and said so.
    assert not doc["flip_exact"] and doc["flip_method"] == "greedy" and doc["flip_decision"] == "ok"
    argmax = json.loads(nbledger(capsys, "why", model, MESSAGE, "--format", "json").out)
    assert argmax["flip_exact"] and argmax["flip_method"] == "exact" and argmax["threshold"] is None


def test_terminal_account(model, capsys):
    result = nbledger(capsys, "why", model, MESSAGE, "--top", "3")
    assert result.code == 0
    out = " ".join(result.out.split())  # the console wraps long lines
    assert out.startswith("LEDGER OF ONE DECISION") and "decision scam" in out
    assert "opening: priors" in out and "closing balance" in out and "rule: the most probable class" in out
    assert "▲ credit, toward scam" in out
    assert "not in the vocabulary (no effect)" in out
    assert "would change the decision to" in out and "no smaller set does" in out


def test_tokens_with_edge_spaces_are_told_apart():
    assert shown("ns. ") == "ns.␣" and shown(" dep") == "␣dep"
    assert shown("parcel fee") == "parcel fee"  # a word bigram's inner space is plain
    assert shown("a\nb") == "a\\nb"
