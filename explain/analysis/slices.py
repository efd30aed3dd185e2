"""Error rates per slice of the messages, and the slices that stand out.

A slice is a set of messages that share something: a value of a column, a
month or week of a date column, a range of message lengths, or a watchlist
term. For each slice the false-alarm rate (normal messages flagged, among the
slice's normal messages) and the miss rate (messages of a flagged class let
through, among the slice's flagged-class messages) carry Wilson intervals.

Whether a slice's false-alarm rate differs from that of the other messages
is tested with Fisher's exact test (two-sided) on the 2x2 table (slice or
rest) x (false alarm or not), through :func:`scipy.stats.fisher_exact`
(Fisher 1922, "On the interpretation of chi-square from contingency tables",
JRSS 85(1)). With many slices some differ by chance, so the p-values of all
slices tested together are adjusted by the Benjamini-Hochberg procedure
(Benjamini & Hochberg 1995, "Controlling the false discovery rate", JRSS B
57(1)) with :func:`scipy.stats.false_discovery_control`; a slice *differs*
when its adjusted p-value is below ``alpha``.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from explain.analysis.rates import Rate, rate_of
from explain.errors import NbledgerError

#: Message lengths in characters: a slice per range [edge, next edge).
LENGTH_EDGES = (0, 50, 100, 200, 400)
#: A column with more distinct values than this is not a slicing column.
MAX_SLICES = 60
#: How many of the slices that differ most are named even when none passes the test.
SHOWN_CLOSEST = 3
PERIODS = ("month", "week")
TEST = (
    "Fisher's exact test of each slice's false-alarm rate against the rest (two-sided, scipy.stats.fisher_exact); "
    "p-values adjusted for the number of slices by Benjamini-Hochberg (scipy.stats.false_discovery_control)"
)


@dataclass(frozen=True, eq=False)
class SliceGroup:
    """A way of cutting the messages: slice names and a membership matrix of shape (S, n)."""

    name: str
    slices: tuple[str, ...]
    members: np.ndarray


@dataclass(frozen=True)
class Slice:
    """The error rates of one slice, and its false-alarm rate against the other messages.

    ``p_value`` is Fisher's exact test of the slice against the rest (NaN when
    either side holds no normal message), ``adjusted_p_value`` after the
    Benjamini-Hochberg adjustment.
    """

    group: str
    name: str
    n_messages: int
    false_alarm_rate: Rate
    miss_rate: Rate
    rest_false_alarm_rate: Rate
    p_value: float
    adjusted_p_value: float


@dataclass(frozen=True)
class SliceReport:
    """Every slice, by group; the slices that differ, most significant first.

    ``most_different`` holds the :data:`SHOWN_CLOSEST` tested slices with the
    smallest adjusted p-values, whether or not they pass ``alpha``.
    """

    test: str
    alpha: float
    overall_false_alarm_rate: Rate
    slices: tuple[Slice, ...]
    differing: tuple[Slice, ...]
    most_different: tuple[Slice, ...] = ()


def by_values(values, column: str) -> SliceGroup:
    """A slice per distinct value of a column (missing values become ``(none)``)."""
    values = np.asarray(["(none)" if v is None or str(v).strip() == "" else str(v) for v in values], dtype=object)
    names = np.unique(values)
    if len(names) > MAX_SLICES:
        raise NbledgerError(
            f"column {column!r} has {len(names)} distinct values, more than {MAX_SLICES} slices; "
            f"for a date column add :month or :week"
        )
    return SliceGroup(column, tuple(str(n) for n in names), values[None, :] == names[:, None])


def by_period(values, column: str, period: str) -> SliceGroup:
    """A slice per calendar month (``2026-03``) or ISO week (``2026-W09``) of a date column, in UTC."""
    import pandas as pd

    if period not in PERIODS:
        raise NbledgerError(f"a date column is sliced by {' or '.join(PERIODS)}, got {period!r}")
    raw = pd.Series([None if v is None or str(v).strip() == "" else str(v) for v in values], dtype=object)
    dates = pd.to_datetime(raw, utc=True, errors="coerce", format="mixed")
    bad = np.flatnonzero(dates.isna().to_numpy() & raw.notna().to_numpy())
    if len(bad):
        raise NbledgerError(
            f"column {column!r}: {len(bad)} values are not dates (first at data row {bad[0] + 1}: {raw[bad[0]]!r})"
        )
    if period == "month":
        labels = dates.dt.strftime("%Y-%m")
    else:
        iso = dates.dt.isocalendar()
        labels = iso.year.astype(str) + "-W" + iso.week.astype(str).str.zfill(2)
    labels = labels.where(dates.notna(), "(none)").to_numpy(dtype=object)
    return by_values(labels, f"{column} by {period}")


def by_length(texts) -> SliceGroup:
    """A slice per range of message length in characters (:data:`LENGTH_EDGES`)."""
    lengths = np.fromiter((len(t) for t in texts), dtype=np.int64)
    which = np.searchsorted(LENGTH_EDGES, lengths, side="right") - 1
    names = [f"{lo}-{hi - 1} characters" for lo, hi in zip(LENGTH_EDGES, LENGTH_EDGES[1:])]
    names.append(f"{LENGTH_EDGES[-1]}+ characters")
    return SliceGroup("message length", tuple(names), which[None, :] == np.arange(len(names))[:, None])


def by_terms(texts, terms) -> SliceGroup:
    """A slice per watchlist term: the messages holding it as a whole word, in any letter case."""
    members = np.array(
        [[re.search(rf"(?<!\w){re.escape(t)}(?!\w)", text, re.IGNORECASE) is not None for text in texts] for t in terms],
        dtype=bool,
    ).reshape(len(terms), len(texts))
    return SliceGroup("watchlist term", tuple(terms), members)


def slice_report(
    groups, truth_flagged: np.ndarray, decided_flagged: np.ndarray, confidence: float, alpha: float = 0.05
) -> SliceReport:
    """Rates per slice and the test of each against the rest.

    ``truth_flagged``/``decided_flagged`` are bool arrays (n,): a message
    belongs to a flagged class / was flagged. Empty slices are left out.
    """
    from scipy.stats import false_discovery_control, fisher_exact

    normal = ~truth_flagged
    false_alarm = normal & decided_flagged
    missed = truth_flagged & ~decided_flagged
    rows = []
    for group in groups:
        for name, member in zip(group.slices, np.asarray(group.members, dtype=bool)):
            if not member.any():
                continue
            fa_in, n_in = int((false_alarm & member).sum()), int((normal & member).sum())
            fa_out, n_out = int((false_alarm & ~member).sum()), int((normal & ~member).sum())
            p = float("nan")
            if n_in and n_out:
                p = float(fisher_exact([[fa_in, n_in - fa_in], [fa_out, n_out - fa_out]]).pvalue)
            rows.append((group.name, name, int(member.sum()), rate_of(fa_in, n_in, confidence),
                         rate_of(int((missed & member).sum()), int((truth_flagged & member).sum()), confidence),
                         rate_of(fa_out, n_out, confidence), p))
    p_values = np.array([r[-1] for r in rows], dtype=float)
    adjusted = np.full(len(rows), np.nan)
    tested = np.isfinite(p_values)
    if tested.any():
        adjusted[tested] = false_discovery_control(p_values[tested], method="bh")
    slices = tuple(Slice(*row, float(a)) for row, a in zip(rows, adjusted))
    ranked = sorted(
        (s for s in slices if np.isfinite(s.adjusted_p_value)), key=lambda s: (s.adjusted_p_value, s.p_value, s.group, s.name)
    )
    differing = tuple(s for s in ranked if s.adjusted_p_value < alpha)
    overall = rate_of(int(false_alarm.sum()), int(normal.sum()), confidence)
    return SliceReport(TEST, alpha, overall, slices, differing, tuple(ranked[:SHOWN_CLOSEST]))


def parse_slice_spec(spec: str) -> tuple[str, str | None]:
    """``"sent_at:month"`` -> ``("sent_at", "month")``; ``"house"`` -> ``("house", None)``."""
    column, sep, period = spec.rpartition(":")
    if sep and period in PERIODS and column:
        return column, period
    return spec, None
