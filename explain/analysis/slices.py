"""Error rates per slice of the messages, and the slices that stand out.

A slice is a set of messages that share something: a value of a column, a
month or week of a date column, a range of message lengths, or a watchlist
term. For each slice two error rates carry Wilson intervals: the false-alarm
rate (normal messages flagged, among the slice's normal-class messages) and
the miss rate (messages of a flagged class let through, among the slice's
flagged-class messages).

Each rate of each slice is tested against the same rate of the other
messages with Fisher's exact test (two-sided) on the 2x2 table (slice or
rest) x (error or not), through :func:`scipy.stats.fisher_exact` (Fisher
1922, "On the interpretation of chi-square from contingency tables", JRSS
85(1)). With many tests some differ by chance, so the p-values of all tests
of the table (both rates of every slice, one family) are adjusted together by
the Benjamini-Hochberg procedure (Benjamini & Hochberg 1995, "Controlling the
false discovery rate", JRSS B 57(1)) with
:func:`scipy.stats.false_discovery_control`; a rate of a slice *differs* when
its adjusted p-value is below ``alpha``, and the slice's verdict says which
rate differs and in which direction.
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
    "Fisher's exact test of each slice's false-alarm rate and miss rate against the same rate of the other "
    "messages (two-sided, scipy.stats.fisher_exact); the p-values of all tests of the table adjusted together "
    "by Benjamini-Hochberg (scipy.stats.false_discovery_control)"
)
#: A rate test's outcome: the slice's rate is above or below the rest's (adjusted p < alpha), neither, or
#: the rate could not be tested (no message of its class in the slice or in the rest).
OUTCOMES = ("higher", "lower", "no difference", "untested")


@dataclass(frozen=True, eq=False)
class SliceGroup:
    """A way of cutting the messages: slice names and a membership matrix of shape (S, n)."""

    name: str
    slices: tuple[str, ...]
    members: np.ndarray


@dataclass(frozen=True)
class RateTest:
    """One error rate of a slice against the same rate of the other messages.

    ``rate`` is the slice's, ``rest`` the other messages'; ``p_value`` is
    Fisher's exact test of the 2x2 table ``[[errors in, others in], [errors
    out, others out]]`` (NaN when the slice or the rest holds no message of
    the rate's class), ``adjusted_p_value`` after the Benjamini-Hochberg
    adjustment over every test of the table; ``outcome`` is one of
    :data:`OUTCOMES`.
    """

    rate: Rate
    rest: Rate
    p_value: float
    adjusted_p_value: float
    outcome: str

    @property
    def differs(self) -> bool:
        return self.outcome in ("higher", "lower")


@dataclass(frozen=True)
class Slice:
    """The two error rates of one slice, each tested against the other messages.

    ``verdict`` names what differs, e.g. ``"miss rate higher"``,
    ``"false-alarm rate lower, miss rate higher"``, ``"no difference"`` or
    ``"untested"`` (neither rate could be tested).
    """

    group: str
    name: str
    n_messages: int
    false_alarm_test: RateTest
    miss_test: RateTest
    verdict: str

    @property
    def false_alarm_rate(self) -> Rate:
        return self.false_alarm_test.rate

    @property
    def miss_rate(self) -> Rate:
        return self.miss_test.rate

    @property
    def differs(self) -> bool:
        return self.false_alarm_test.differs or self.miss_test.differs

    @property
    def smallest_adjusted_p_value(self) -> float:
        values = [t.adjusted_p_value for t in (self.false_alarm_test, self.miss_test) if np.isfinite(t.adjusted_p_value)]
        return min(values) if values else float("nan")


@dataclass(frozen=True)
class SliceReport:
    """Every slice, by group; the slices where a rate differs, most significant first.

    ``most_different`` holds the :data:`SHOWN_CLOSEST` tested slices with the
    smallest adjusted p-value (of either rate), whether or not they pass
    ``alpha``. ``n_tests`` counts the tests adjusted together.
    """

    test: str
    alpha: float
    overall_false_alarm_rate: Rate
    overall_miss_rate: Rate
    n_tests: int
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


def _fisher(errors: np.ndarray, population: np.ndarray, member: np.ndarray) -> tuple[int, int, int, int, float]:
    """Errors and population inside and outside the slice, and Fisher's two-sided p (NaN if a side is empty)."""
    from scipy.stats import fisher_exact

    k_in, n_in = int((errors & member).sum()), int((population & member).sum())
    k_out, n_out = int((errors & ~member).sum()), int((population & ~member).sum())
    p = float("nan")
    if n_in and n_out:
        p = float(fisher_exact([[k_in, n_in - k_in], [k_out, n_out - k_out]]).pvalue)
    return k_in, n_in, k_out, n_out, p


def _outcome(rate: Rate, rest: Rate, adjusted: float, alpha: float) -> str:
    if not np.isfinite(adjusted):
        return "untested"
    if adjusted >= alpha:
        return "no difference"
    return "higher" if rate.value > rest.value else "lower"


def _verdict(fa: RateTest, miss: RateTest) -> str:
    """What differs in a slice, in words: ``"miss rate higher"``, ``"no difference"`` ..."""
    parts = [f"{name} {t.outcome}" for name, t in (("false-alarm rate", fa), ("miss rate", miss)) if t.differs]
    if parts:
        return ", ".join(parts)
    if fa.outcome == miss.outcome == "untested":
        return "untested"
    return "no difference"


def slice_report(
    groups, truth_flagged: np.ndarray, decided_flagged: np.ndarray, confidence: float, alpha: float = 0.05
) -> SliceReport:
    """Both error rates per slice and the test of each against the rest.

    ``truth_flagged``/``decided_flagged`` are bool arrays (n,): a message
    belongs to a flagged class / was flagged. Empty slices are left out. The
    p-values of every test (two per slice) form one Benjamini-Hochberg family.
    """
    from scipy.stats import false_discovery_control

    normal = ~truth_flagged
    errors = ((normal & decided_flagged, normal), (truth_flagged & ~decided_flagged, truth_flagged))
    rows = []
    for group in groups:
        for name, member in zip(group.slices, np.asarray(group.members, dtype=bool)):
            if member.any():
                rows.append((group.name, name, int(member.sum()), [_fisher(e, pop, member) for e, pop in errors]))
    p_values = np.array([t[-1] for *_, tests in rows for t in tests], dtype=float)
    adjusted = np.full(len(p_values), np.nan)
    tested = np.isfinite(p_values)
    if tested.any():
        adjusted[tested] = false_discovery_control(p_values[tested], method="bh")
    slices = []
    for i, (group, name, n, tests) in enumerate(rows):
        made = []
        for (k_in, n_in, k_out, n_out, p), adj in zip(tests, adjusted[2 * i: 2 * i + 2]):
            rate, rest = rate_of(k_in, n_in, confidence), rate_of(k_out, n_out, confidence)
            made.append(RateTest(rate, rest, p, float(adj), _outcome(rate, rest, float(adj), alpha)))
        slices.append(Slice(group, name, n, made[0], made[1], _verdict(*made)))
    ranked = sorted(
        (s for s in slices if np.isfinite(s.smallest_adjusted_p_value)),
        key=lambda s: (s.smallest_adjusted_p_value, s.group, s.name),
    )
    return SliceReport(
        TEST, alpha,
        rate_of(int(errors[0][0].sum()), int(normal.sum()), confidence),
        rate_of(int(errors[1][0].sum()), int(truth_flagged.sum()), confidence),
        int(tested.sum()), tuple(slices), tuple(s for s in ranked if s.differs), tuple(ranked[:SHOWN_CLOSEST]),
    )


def parse_slice_spec(spec: str) -> tuple[str, str | None]:
    """``"sent_at:month"`` -> ``("sent_at", "month")``; ``"house"`` -> ``("house", None)``."""
    column, sep, period = spec.rpartition(":")
    if sep and period in PERIODS and column:
        return column, period
    return spec, None
