"""Counting what the filter decided: confusion matrices, rates with intervals, base rates.

Every proportion is a :class:`Rate` with its Wilson score interval (see
:mod:`explain.analysis.stats`). :func:`project_to_base_rate` carries the
measured recall and false-positive rate to traffic with another share of
abuse (Bayes' rule).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from explain.analysis.stats import wilson_interval

#: Expected errors are stated per this many messages.
PER_MESSAGES = 10_000


def frozen(values, dtype=None) -> np.ndarray:
    out = np.array(values, dtype=dtype)
    out.setflags(write=False)
    return out


@dataclass(frozen=True)
class Rate:
    """A proportion ``numerator / denominator`` with its Wilson interval.

    ``value``, ``low`` and ``high`` are NaN when the denominator is 0. For F1
    the interval is the Wilson interval of the Jaccard index
    ``J = TP / (TP + FP + FN)`` (a proportion of the messages that are
    positive in truth or in decision) carried through the increasing map
    ``F1 = 2J / (1 + J)``; ``numerator / denominator`` is then ``2TP / (2TP + FP + FN)``.
    """

    value: float
    low: float
    high: float
    numerator: int
    denominator: int


def rate_of(k: int, n: int, confidence: float) -> Rate:
    lo, hi = wilson_interval(k, n, confidence)
    value = k / n if n else float("nan")
    return Rate(float(value), float(lo), float(hi), int(k), int(n))


def f1_rate_of(tp: int, fp: int, fn: int, confidence: float) -> Rate:
    lo, hi = wilson_interval(tp, tp + fp + fn, confidence)
    den = 2 * tp + fp + fn
    value = 2 * tp / den if den else float("nan")
    return Rate(float(value), float(2 * lo / (1 + lo)), float(2 * hi / (1 + hi)), 2 * int(tp), int(den))


@dataclass(frozen=True, kw_only=True)
class CountsAtDecision:
    """The four counts of one decision against the truth, and the three rates every table shows of them."""

    tp: int
    fp: int
    fn: int
    tn: int
    precision: Rate
    recall: Rate
    false_alarm_rate: Rate


def counts_at_decision(tp: int, fp: int, fn: int, tn: int, confidence: float) -> dict:
    """The fields of :class:`CountsAtDecision`: counts as ints, precision, recall and FPR with Wilson intervals."""
    return {
        "tp": int(tp), "fp": int(fp), "fn": int(fn), "tn": int(tn),
        "precision": rate_of(tp, tp + fp, confidence),
        "recall": rate_of(tp, tp + fn, confidence),
        "false_alarm_rate": rate_of(fp, fp + tn, confidence),
    }


@dataclass(frozen=True, kw_only=True)
class BinaryMetrics(CountsAtDecision):
    """One class (or "flagged") against the rest, at the decision in use."""

    positive: str
    specificity: Rate
    f1: Rate
    accuracy: Rate


def binary_metrics(positive: str, tp: int, fp: int, fn: int, tn: int, confidence: float) -> BinaryMetrics:
    """Precision, recall (sensitivity), specificity, FPR, F1 and accuracy with intervals."""
    return BinaryMetrics(
        positive=positive,
        specificity=rate_of(tn, tn + fp, confidence),
        f1=f1_rate_of(tp, fp, fn, confidence),
        accuracy=rate_of(tp + tn, tp + fp + fn + tn, confidence),
        **counts_at_decision(tp, fp, fn, tn, confidence),
    )


@dataclass(frozen=True, eq=False)
class ConfusionMatrix:
    """Rows are the true classes, columns the decided ones (scikit-learn's layout).

    ``row_rates`` divides each row by its total (NaN for a class absent from the data).
    """

    labels: tuple[str, ...]
    counts: np.ndarray
    row_rates: np.ndarray


def confusion_of(labels: tuple[str, ...], truth: np.ndarray, decided: np.ndarray) -> ConfusionMatrix:
    k = len(labels)
    counts = np.bincount(truth * k + decided, minlength=k * k).reshape(k, k)
    totals = counts.sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        rates = counts / totals
    return ConfusionMatrix(labels, frozen(counts), frozen(rates))


@dataclass(frozen=True, eq=False)
class BaseRates:
    """How often each class occurs in the data (``shares``), and abuse overall (``flagged``)."""

    n_messages: int
    classes: tuple[str, ...]
    counts: np.ndarray
    shares: tuple[Rate, ...]
    flagged: Rate | None


@dataclass(frozen=True)
class Estimate:
    """A projected figure and the ends of its interval."""

    value: float
    low: float
    high: float


@dataclass(frozen=True)
class Projection:
    """What a threshold would do in traffic where ``base_rate`` of messages belong to a flagged class.

    A projection, not a measurement: it assumes that recall ``r`` and
    false-positive rate ``f`` measured on the data hold in that traffic, and
    applies Bayes' rule with the prevalence ``p = base_rate``:

    - ``precision = p r / (p r + (1 - p) f)``
    - ``false_alarms_per_10k = 10000 (1 - p) f``
    - ``missed_per_10k = 10000 p (1 - r)``
    - ``flagged_per_10k = 10000 (p r + (1 - p) f)``

    Intervals: each formula is monotone in ``r`` and in ``f``, so the Wilson
    ends of the measured rates are put through it. A figure of one rate keeps
    that rate's level; precision and flagged, which use both, hold whenever
    both rate intervals hold, that is with at least ``1 - 2 (1 - confidence)``
    (Bonferroni's inequality).
    """

    base_rate: float
    precision: Estimate
    false_alarms_per_10k: Estimate
    missed_per_10k: Estimate
    flagged_per_10k: Estimate


def project_to_base_rate(recall: Rate, false_alarm_rate: Rate, base_rate: float) -> Projection:
    """Bayes' rule on measured rates for a share ``base_rate`` of abuse (see :class:`Projection`).

    Examples
    --------
    A screening test with recall 90 % and false-positive rate 9 % at a
    prevalence of 1 % flags 98 of every 1,000, of whom 9 are truly positive
    (the worked example of Gigerenzer et al. 2007, "Helping doctors and
    patients make sense of health statistics", Psychological Science in the
    Public Interest 8(2)):

    >>> p = project_to_base_rate(Rate(0.9, 0.9, 0.9, 9, 10), Rate(0.09, 0.09, 0.09, 89, 990), 0.01)
    >>> round(p.precision.value, 3), round(p.flagged_per_10k.value)
    (0.092, 981)
    """
    p = float(base_rate)

    def precision(r, f):
        flagged = p * r + (1 - p) * f
        return p * r / flagged if flagged > 0 else float("nan")

    r, f = recall, false_alarm_rate
    scale = PER_MESSAGES
    return Projection(
        base_rate=p,
        precision=Estimate(precision(r.value, f.value), precision(r.low, f.high), precision(r.high, f.low)),
        false_alarms_per_10k=Estimate(scale * (1 - p) * f.value, scale * (1 - p) * f.low, scale * (1 - p) * f.high),
        missed_per_10k=Estimate(scale * p * (1 - r.value), scale * p * (1 - r.high), scale * p * (1 - r.low)),
        flagged_per_10k=Estimate(
            scale * (p * r.value + (1 - p) * f.value),
            scale * (p * r.low + (1 - p) * f.low),
            scale * (p * r.high + (1 - p) * f.high),
        ),
    )
