"""How well a score ranks abuse above normal messages, and what each threshold does.

ROC and precision-recall curves with the AUC (DeLong's interval) and average
precision; the operating points chosen by a target false-positive rate, a
target recall or the costs of the two errors. Thresholds act on the flag
log-odds ``log P(not normal) - log P(normal)``: a message is flagged when its
log-odds is at least the threshold. Every threshold is a float on that scale,
kept exactly (an operating point chosen on the data has the score of one of its
messages as threshold), so that typing it back (``--threshold-log-odds``)
gives the same counts.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import expit

from explain.analysis.rates import (
    PER_MESSAGES, CountsAtDecision, Projection, counts_at_decision, frozen, project_to_base_rate,
)
from explain.analysis.stats import AucEstimate, delong_auc

DEFAULT_TARGET_FPR = (0.001, 0.005, 0.01)
DEFAULT_TARGET_RECALL = (0.90, 0.95, 0.99)


@dataclass(frozen=True, eq=False)
class RankingQuality:
    """How well a score ranks ``positive`` messages above the rest.

    The curves run from the highest threshold down. ``roc_*`` starts at
    (0, 0) with threshold +inf; points in the middle of straight stretches are
    left out (the curve drawn through the rest is the same). ``pr_*`` has one
    point per threshold at which the flagged set changes, again without the
    middle of runs of equal recall. A message is flagged when its score is at
    least the threshold. ``average_precision`` is
    ``sum_i (R_i - R_{i-1}) P_i`` over all thresholds (no interpolation).
    """

    positive: str
    n_positive: int
    n_negative: int
    auc: AucEstimate
    roc_false_alarm_rate: np.ndarray
    roc_recall: np.ndarray
    roc_thresholds: np.ndarray
    pr_precision: np.ndarray
    pr_recall: np.ndarray
    pr_thresholds: np.ndarray
    average_precision: float


@dataclass(frozen=True, kw_only=True)
class ThresholdFigures(CountsAtDecision):
    """What flagging every message with log-odds ``>= threshold_log_odds`` does on the data.

    ``false_alarms_per_10k``, ``missed_per_10k`` and ``flagged_per_10k`` are the expected false
    alarms, missed messages and flagged messages among 10,000 messages with the data's base rate
    (``10000 * FP / N``, ``10000 * FN / N`` and ``10000 * (TP + FP) / N``). ``expected_cost`` is
    ``(cost_fp * FP + cost_fn * FN) / N`` per message when costs were given.
    ``projection`` carries the figures to traffic with another share of
    abuse when one was given (:class:`~explain.analysis.rates.Projection`).
    ``threshold_log_odds`` is exact: ``--threshold-log-odds`` with this float
    (its ``repr``) flags the same messages.
    """

    threshold_log_odds: float
    threshold_probability: float
    false_alarms_per_10k: float
    missed_per_10k: float
    flagged_per_10k: float
    expected_cost: float | None
    projection: Projection | None = None


@dataclass(frozen=True)
class FigureSettings:
    """What every operating point is computed with: costs, interval level, projected base rate."""

    costs: tuple[float, float] | None
    confidence: float
    base_rate: float | None = None


@dataclass(frozen=True)
class OperatingPoint:
    """A threshold chosen by a rule.

    ``kind`` is ``"in use"`` (the decision the figures above were made
    with), ``"fpr"`` (lowest threshold with false-positive rate
    ``<= target``), ``"recall"`` (highest threshold with recall ``>= target``),
    ``"least cost"`` (least expected cost on the data) or ``"cost if
    calibrated"`` (the threshold ``log(cost_fp / cost_fn)`` that would cost
    least if the probabilities were calibrated). When a target cannot be met,
    ``met`` is False, ``note`` says why and ``figures`` is None.
    """

    kind: str
    target: float | None
    met: bool
    note: str | None
    figures: ThresholdFigures | None



@dataclass(frozen=True)
class Sweep:
    """Counts at every distinct threshold, from +inf (nothing flagged) down.

    ``tp[i]``/``fp[i]``: positives/negatives with score ``>= thresholds[i]``.
    """

    thresholds: np.ndarray
    tp: np.ndarray
    fp: np.ndarray
    n_positive: int
    n_negative: int


def sweep(scores: np.ndarray, positive: np.ndarray) -> Sweep:
    order = np.argsort(-scores, kind="stable")
    ordered = scores[order]
    hits = positive[order]
    last_of_run = np.flatnonzero(np.append(ordered[1:] != ordered[:-1], True))
    tp = np.cumsum(hits)[last_of_run]
    fp = (last_of_run + 1) - tp
    return Sweep(
        thresholds=np.concatenate([[np.inf], ordered[last_of_run]]),
        tp=np.concatenate([[0], tp]),
        fp=np.concatenate([[0], fp]),
        n_positive=int(positive.sum()),
        n_negative=int((~positive).sum()),
    )


def _corners(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Indices of a polyline's points that are not inside a straight stretch."""
    if len(x) <= 2:
        return np.arange(len(x))
    dx1, dy1 = x[1:-1] - x[:-2], y[1:-1] - y[:-2]
    dx2, dy2 = x[2:] - x[1:-1], y[2:] - y[1:-1]
    bend = dx1 * dy2 != dy1 * dx2
    return np.flatnonzero(np.concatenate([[True], bend, [True]]))


def ranking_quality(positive_name: str, scores: np.ndarray, positive: np.ndarray, confidence: float) -> RankingQuality:
    sw = sweep(scores, positive)
    # integer counts make the straight-stretch test exact
    keep = _corners(sw.fp, sw.tp)
    precision = sw.tp[1:] / (sw.tp[1:] + sw.fp[1:])
    recall = sw.tp[1:] / sw.n_positive
    steps = np.diff(sw.tp)
    # a run of equal recall is a vertical drop in precision: its ends draw it
    pr_keep = np.flatnonzero((steps > 0) | (np.append(steps[1:], 1) > 0))
    return RankingQuality(
        positive=positive_name,
        n_positive=sw.n_positive,
        n_negative=sw.n_negative,
        auc=delong_auc(scores, positive, confidence),
        roc_false_alarm_rate=frozen(sw.fp[keep] / sw.n_negative),
        roc_recall=frozen(sw.tp[keep] / sw.n_positive),
        roc_thresholds=frozen(sw.thresholds[keep]),
        pr_precision=frozen(precision[pr_keep]),
        pr_recall=frozen(recall[pr_keep]),
        pr_thresholds=frozen(sw.thresholds[1:][pr_keep]),
        average_precision=float(np.sum(steps / sw.n_positive * precision)),
    )


def threshold_figures(threshold: float, tp: int, fp: int, n_pos: int, n_neg: int, how: FigureSettings) -> ThresholdFigures:
    """The figures of flagging at ``threshold`` (log-odds), given the counts it flags."""
    fn, tn = n_pos - tp, n_neg - fp
    n = n_pos + n_neg
    costs, confidence = how.costs, how.confidence
    cost = None if costs is None else (costs[0] * fp + costs[1] * fn) / n
    counts = counts_at_decision(tp, fp, fn, tn, confidence)
    projection = None
    if how.base_rate is not None and n_pos and n_neg:
        projection = project_to_base_rate(counts["recall"], counts["false_alarm_rate"], how.base_rate)
    return ThresholdFigures(
        **counts,
        threshold_log_odds=float(threshold),
        threshold_probability=float(expit(threshold)),
        false_alarms_per_10k=PER_MESSAGES * fp / n,
        missed_per_10k=PER_MESSAGES * fn / n,
        flagged_per_10k=PER_MESSAGES * (tp + fp) / n,
        expected_cost=cost,
        projection=projection,
    )


def _at(sw: Sweep, i: int, how: FigureSettings) -> ThresholdFigures:
    return threshold_figures(sw.thresholds[i], sw.tp[i], sw.fp[i], sw.n_positive, sw.n_negative, how)


def percent(x: float) -> str:
    return f"{100 * x:g} %"


def fpr_point(sw: Sweep, target: float, how: FigureSettings) -> OperatingPoint:
    if sw.n_negative == 0:
        return OperatingPoint("fpr", target, False, "no normal messages in the data: the false-alarm rate is undefined", None)
    i = int(np.flatnonzero(sw.fp / sw.n_negative <= target)[-1])
    if i == 0:
        return OperatingPoint(
            "fpr",
            target,
            False,
            f"no threshold keeps the false-alarm rate at or below {percent(target)} and flags anything",
            None,
        )
    return OperatingPoint("fpr", target, True, None, _at(sw, i, how))


def recall_point(sw: Sweep, target: float, how: FigureSettings) -> OperatingPoint:
    if sw.n_positive == 0:
        return OperatingPoint("recall", target, False, "no flagged messages in the data: recall is undefined", None)
    reached = np.flatnonzero(sw.tp / sw.n_positive >= target)
    if len(reached) == 0:
        return OperatingPoint("recall", target, False, f"no threshold reaches a recall of {percent(target)}", None)
    return OperatingPoint("recall", target, True, None, _at(sw, int(reached[0]), how))


def cost_points(sw: Sweep, how: FigureSettings) -> tuple[OperatingPoint, ...]:
    cost_fp, cost_fn = how.costs
    expected = cost_fp * sw.fp + cost_fn * (sw.n_positive - sw.tp)
    best = int(np.argmin(expected))
    # Bayes decision rule: flag when P(flag) * cost_fn >= P(normal) * cost_fp
    calibrated = float(np.log(cost_fp) - np.log(cost_fn))
    i = int(np.searchsorted(-sw.thresholds, -calibrated, side="right")) - 1
    at_calibrated = threshold_figures(calibrated, sw.tp[i], sw.fp[i], sw.n_positive, sw.n_negative, how)
    return (
        OperatingPoint("least cost", None, True, None, _at(sw, best, how)),
        OperatingPoint("cost if calibrated", None, True, None, at_calibrated),
    )
