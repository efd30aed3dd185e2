"""Reading a :class:`explain.analysis.batch.BatchEvidence`'s top tokens of one message, for tests."""

from __future__ import annotations


def top_tokens(batch, i: int, side: str = "for") -> list[tuple[str, float]]:
    """(token, entry) pairs of message ``i`` on one side (``"for"`` or ``"against"``), strongest first."""
    cols = batch.top_for[i] if side == "for" else batch.top_against[i]
    vals = batch.top_for_evidence[i] if side == "for" else batch.top_against_evidence[i]
    return [(str(batch.tokens[c]), float(v)) for c, v in zip(cols, vals) if c >= 0]
