"""Appeals overturned per 10,000 flagged messages, from the desk's database into the report."""

from __future__ import annotations

import json

import pytest

from clirun import nbledger
from desk_support import train_filter
from explain.analysis.appeals import appeals_of
from explain.runs.desk.store import open_store


def row(mid, outcome, flagged=True, sha="a" * 64):
    return {"message_id": mid, "outcome": outcome, "flagged": flagged, "model_sha256": sha}


def test_each_message_counts_once_by_its_newest_review_under_the_model():
    rows = [
        row("m1", "upheld"), row("m1", "overturned"),  # corrected: counts as overturned
        row("m2", "overturned"), row("m2", "upheld"),  # corrected back: upheld
        row("m3", "escalated"),  # not decided
        row("m4", "overturned", flagged=False),  # a pass overturned: not in the rate
        row("m5", "overturned", sha="b" * 64),  # another model file
        *[row(f"u{i}", "upheld") for i in range(7)],
    ]
    appeals = appeals_of(rows, "a" * 64, "test")
    assert (appeals.overturned, appeals.decided, appeals.escalated) == (1, 9, 1)
    assert (appeals.passed_overturned, appeals.other_models) == (1, 1)
    # Source: statsmodels' proportion_confint(method="wilson"), an independent implementation.
    from statsmodels.stats.proportion import proportion_confint

    low, high = proportion_confint(1, 9, alpha=0.05, method="wilson")
    assert appeals.value == pytest.approx(10_000 / 9, rel=1e-12)
    assert appeals.low == pytest.approx(10_000 * low, rel=1e-9)
    assert appeals.high == pytest.approx(10_000 * high, rel=1e-9)


def test_no_decided_appeal_has_no_rate():
    appeals = appeals_of([row("m1", "escalated")], "a" * 64, "test")
    assert appeals.value is None and appeals.decided == 0 and appeals.escalated == 1


def test_report_reviews_puts_the_rate_in_the_json_twin_and_the_summary(tmp_path, capsys):
    import hashlib

    _, model = train_filter(tmp_path)
    sha = hashlib.sha256(model.read_bytes()).hexdigest()
    db = tmp_path / "reviews.sqlite"
    store = open_store(db)
    base = {"reviewer": "r", "role": "reviewer", "reason": "", "note": "", "decision": "scam", "model_sha256": sha,
            "rule": "argmax", "text": "t", "ledger": "{}"}
    for i, outcome in enumerate(["overturned", "upheld", "upheld", "upheld"]):
        store.add({**base, "message_id": f"m{i}", "outcome": outcome, "flagged": True})
    store.close()
    out = tmp_path / "r.pdf"
    result = nbledger(capsys, "report", model, "--out", out, "--json", tmp_path / "r.json", "--html", tmp_path / "r.html",
                      "--reviews", db, "--normal-class", "ok")
    assert result.code == 0, result.err
    appeals = json.loads((tmp_path / "r.json").read_text())["appeals"]
    assert appeals["overturned_per_10000"]["value"] == pytest.approx(2500.0)
    assert (appeals["overturned_per_10000"]["numerator"], appeals["overturned_per_10000"]["denominator"]) == (1, 4)
    assert "Appeals decided at the review desk" in (tmp_path / "r.html").read_text()
    missing = nbledger(capsys, "report", model, "--out", tmp_path / "s.pdf", "--reviews", tmp_path / "none.sqlite")
    assert "no review database at" in missing.one_error_line()


def test_compare_reviews_gives_each_model_its_own_rate(tmp_path, capsys):
    import hashlib

    (tmp_path / "old").mkdir()
    _, old = train_filter(tmp_path / "old", ("ok", "scam"), 800)
    _, new = train_filter(tmp_path, ("ok", "scam"), 1500)
    shas = [hashlib.sha256(p.read_bytes()).hexdigest() for p in (old, new)]
    db = tmp_path / "reviews.sqlite"
    store = open_store(db)
    base = {"reviewer": "r", "role": "reviewer", "reason": "", "note": "", "decision": "scam",
            "rule": "argmax", "text": "t", "ledger": "{}", "flagged": True}
    for i, outcome in enumerate(["overturned", "upheld"]):
        store.add({**base, "message_id": f"o{i}", "outcome": outcome, "model_sha256": shas[0]})
    store.add({**base, "message_id": "n0", "outcome": "upheld", "model_sha256": shas[1]})
    store.close()
    result = nbledger(capsys, "compare", old, new, "--reviews", db, "--format", "json", "--normal-class", "ok")
    assert result.code == 0, result.err
    appeals = json.loads(result.out)["appeals"]
    assert appeals["old"]["overturned_per_10000"]["value"] == pytest.approx(5000.0)
    assert appeals["new"]["overturned_per_10000"]["value"] == pytest.approx(0.0)
    text = nbledger(capsys, "compare", old, new, "--reviews", db, "--normal-class", "ok")
    from explain.present.numbers import per_10000_text
    from statsmodels.stats.proportion import proportion_confint

    low, high = proportion_confint(1, 2, alpha=0.05, method="wilson")  # independent Wilson interval
    assert f"appeals (old): {per_10000_text(5000, 10_000 * low, 10_000 * high)} overturned per 10,000" in " ".join(text.out.split())
