"""Appeals decided at the review desk, as a rate: overturned per 10,000 flagged messages reviewed.

Each message counts once, by its newest review made under the model in question (the model file's
SHA-256): a flagged message whose review is ``overturned`` counts in the numerator, ``upheld`` or
``overturned`` in the denominator; ``escalated`` ones are not decided yet and are counted apart, as
are reviews made under other model files. The interval is Wilson's score interval (Wilson 1927),
:func:`explain.analysis.stats.wilson_interval`.
"""

from __future__ import annotations

from dataclasses import dataclass

from explain.analysis.stats import wilson_interval

SCALE = 10_000


@dataclass(frozen=True)
class Appeals:
    """Overturned per 10,000 flagged messages reviewed (``value``, Wilson ``low`` and ``high``).

    ``overturned`` of ``decided`` flagged messages (newest review upheld or overturned);
    ``escalated``: flagged messages whose newest review passes them on; ``passed_overturned``:
    messages let through whose decision was overturned (not in the rate); ``other_models``: messages
    reviewed only under other model files; ``source``: the review database, without its password.
    """

    overturned: int
    decided: int
    value: float | None
    low: float | None
    high: float | None
    escalated: int
    passed_overturned: int
    other_models: int
    source: str
    confidence: float = 0.95


def appeals_of(reviews: list[dict], model_sha256: str, source: str, confidence: float = 0.95) -> Appeals:
    """The appeal rate of the model with ``model_sha256`` from review rows (oldest first, as the store gives them)."""
    newest: dict[str, dict] = {}
    others: set[str] = set()
    for row in reviews:
        if row["model_sha256"] == model_sha256:
            newest[row["message_id"]] = row
        else:
            others.add(row["message_id"])
    flagged = [r for r in newest.values() if r["flagged"]]
    decided = [r for r in flagged if r["outcome"] in ("upheld", "overturned")]
    overturned = sum(r["outcome"] == "overturned" for r in decided)
    value = low = high = None
    if decided:
        lo, hi = wilson_interval(overturned, len(decided), confidence)
        value, low, high = SCALE * overturned / len(decided), SCALE * float(lo), SCALE * float(hi)
    return Appeals(
        overturned=overturned,
        decided=len(decided),
        value=value,
        low=low,
        high=high,
        escalated=sum(r["outcome"] == "escalated" for r in flagged),
        passed_overturned=sum(r["outcome"] == "overturned" and not r["flagged"] for r in newest.values()),
        other_models=len(others - set(newest)),
        source=source,
        confidence=confidence,
    )


def appeals_json(appeals: Appeals | None) -> dict | None:
    """The JSON form: the rate as an interval object with its counts."""
    if appeals is None:
        return None
    return {
        "overturned_per_10000": {"value": appeals.value, "low": appeals.low, "high": appeals.high,
                                 "numerator": appeals.overturned, "denominator": appeals.decided},
        "confidence": appeals.confidence,
        "escalated": appeals.escalated,
        "passed_overturned": appeals.passed_overturned,
        "other_models": appeals.other_models,
        "source": appeals.source,
    }
