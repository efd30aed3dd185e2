"""How well a filter works on labelled messages: one result that carries every figure.

The assessment answers an auditor's questions on the data it is given:

- how often each class occurs (base rates), and what the filter decided for
  each (confusion matrices, per class and *flagged versus normal*), with
  precision, recall, specificity, false-positive rate, F1 and accuracy, each
  with a Wilson score interval (see :mod:`explain.analysis.stats`);
- how well its score ranks abuse above normal traffic: ROC curve and AUC with
  DeLong's interval, precision-recall curve and average precision (one class
  against the rest for more than two classes);
- which thresholds meet a target false-positive rate or recall, what each
  costs in false alarms and missed abuse per 10,000 messages, and, given the
  costs of the two errors, which threshold costs least;
- whether its probabilities can be taken at face value (calibration);
- what its mistakes look like and which tokens drive them.

Thresholds act on the probability that a message is *not normal*. The score
is the flag log-odds ``log P(not normal) - log P(normal)`` from
:class:`explain.analysis.batch.BatchEvidence`: naive Bayes probabilities pile up at 0
and 1 where many messages round to exactly 1.0, while their log-odds stay
distinct, so every ranking and threshold here works on the log-odds. A
message is flagged at threshold ``tau`` when its log-odds is at least ``tau``
(probability ``expit(tau)``).

Counting conventions follow scikit-learn (``confusion_matrix``,
``precision_recall_fscore_support``, ``roc_auc_score``,
``average_precision_score``, ``brier_score_loss``, ``calibration_curve``), and
the tests check them against it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.special import expit

from explain.analysis.batch import BatchEvidence, batch_evidence, evidence_matrix, top_k_per_row
from explain.model.decision import DecisionRule
from explain.errors import NbledgerError
from explain.model.model_view import ModelView
from explain.analysis.stats import AucEstimate, delong_auc, wilson_interval

DEFAULT_TARGET_FPR = (0.001, 0.005, 0.01)
DEFAULT_TARGET_RECALL = (0.90, 0.95, 0.99)
#: Expected errors are stated per this many messages.
PER_MESSAGES = 10_000
#: Bins of the score histogram; its range covers the middle 99 % of scores.
SCORE_BINS = 40
SCORE_RANGE_PERCENTILES = (0.5, 99.5)
QUANTILE_LEVELS = (0.0, 0.05, 0.25, 0.5, 0.75, 0.95, 1.0)
FLAGGED = "flagged"


def _frozen(values, dtype=None) -> np.ndarray:
    out = np.array(values, dtype=dtype)
    out.setflags(write=False)
    return out


# --- result objects ----------------------------------------------------------


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


def _rate(k: int, n: int, confidence: float) -> Rate:
    lo, hi = wilson_interval(k, n, confidence)
    value = k / n if n else float("nan")
    return Rate(float(value), float(lo), float(hi), int(k), int(n))


def _f1_rate(tp: int, fp: int, fn: int, confidence: float) -> Rate:
    lo, hi = wilson_interval(tp, tp + fp + fn, confidence)
    den = 2 * tp + fp + fn
    value = 2 * tp / den if den else float("nan")
    return Rate(float(value), float(2 * lo / (1 + lo)), float(2 * hi / (1 + hi)), 2 * int(tp), int(den))


@dataclass(frozen=True)
class BinaryMetrics:
    """One class (or "flagged") against the rest, at the decision in use."""

    positive: str
    tp: int
    fp: int
    fn: int
    tn: int
    precision: Rate
    recall: Rate
    specificity: Rate
    false_positive_rate: Rate
    f1: Rate
    accuracy: Rate


def binary_metrics(positive: str, tp: int, fp: int, fn: int, tn: int, confidence: float) -> BinaryMetrics:
    """Precision, recall (sensitivity), specificity, FPR, F1 and accuracy with intervals."""
    return BinaryMetrics(
        positive=positive,
        tp=int(tp),
        fp=int(fp),
        fn=int(fn),
        tn=int(tn),
        precision=_rate(tp, tp + fp, confidence),
        recall=_rate(tp, tp + fn, confidence),
        specificity=_rate(tn, tn + fp, confidence),
        false_positive_rate=_rate(fp, fp + tn, confidence),
        f1=_f1_rate(tp, fp, fn, confidence),
        accuracy=_rate(tp + tn, tp + fp + fn + tn, confidence),
    )


@dataclass(frozen=True, eq=False)
class ConfusionMatrix:
    """Rows are the true classes, columns the decided ones (scikit-learn's layout).

    ``row_rates`` divides each row by its total (NaN for a class absent from the data).
    """

    labels: tuple[str, ...]
    counts: np.ndarray
    row_rates: np.ndarray


def _confusion(labels: tuple[str, ...], truth: np.ndarray, decided: np.ndarray) -> ConfusionMatrix:
    k = len(labels)
    counts = np.bincount(truth * k + decided, minlength=k * k).reshape(k, k)
    totals = counts.sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        rates = counts / totals
    return ConfusionMatrix(labels, _frozen(counts), _frozen(rates))


@dataclass(frozen=True, eq=False)
class BaseRates:
    """How often each class occurs in the data (``shares``), and abuse overall (``flagged``)."""

    n_messages: int
    classes: tuple[str, ...]
    counts: np.ndarray
    shares: tuple[Rate, ...]
    flagged: Rate | None


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
    roc_false_positive_rate: np.ndarray
    roc_true_positive_rate: np.ndarray
    roc_thresholds: np.ndarray
    pr_precision: np.ndarray
    pr_recall: np.ndarray
    pr_thresholds: np.ndarray
    average_precision: float


@dataclass(frozen=True)
class ThresholdFigures:
    """What flagging every message with log-odds ``>= threshold_log_odds`` does on the data.

    ``false_alarms_per_10k`` and ``missed_per_10k`` are the expected false
    alarms and missed abuse among 10,000 messages with the data's base rate
    (``10000 * FP / N`` and ``10000 * FN / N``). ``expected_cost`` is
    ``(cost_fp * FP + cost_fn * FN) / N`` per message when costs were given.
    """

    threshold_log_odds: float
    threshold_probability: float
    tp: int
    fp: int
    fn: int
    tn: int
    precision: Rate
    recall: Rate
    false_positive_rate: Rate
    false_alarms_per_10k: float
    missed_per_10k: float
    expected_cost: float | None


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


@dataclass(frozen=True, eq=False)
class Calibration:
    """Reliability of the probability of *not normal*, in equal-count bins.

    Messages are sorted by log-odds (not by rounded probability, so that the
    many messages at probability 1.0 still split into bins) and cut into
    ``n_bins`` groups whose sizes differ by at most one.
    ``observed`` is the share of truly flagged messages per bin with Wilson
    intervals in ``observed_low``/``observed_high``. Brier score: mean squared
    difference between probability and truth (Brier 1950, Monthly Weather
    Review 78(1)). Expected calibration error: ``sum_b (n_b / N)
    |observed_b - mean_predicted_b|`` (Naeini, Cooper & Hauskrecht 2015,
    AAAI, "Obtaining well calibrated probabilities using Bayesian binning").
    """

    n_bins: int
    counts: np.ndarray
    mean_predicted: np.ndarray
    observed: np.ndarray
    observed_low: np.ndarray
    observed_high: np.ndarray
    log_odds_low: np.ndarray
    log_odds_high: np.ndarray
    brier_score: float
    expected_calibration_error: float


@dataclass(frozen=True, eq=False)
class ScoreDistribution:
    """Flag log-odds per true class: a shared histogram and quantiles.

    ``edges`` span the middle 99 % of all scores; scores outside are counted
    in the end bins and also in ``below``/``above``. ``quantiles[c, q]`` is
    the ``quantile_levels[q]`` quantile of class ``c`` (NaN when absent).
    """

    classes: tuple[str, ...]
    edges: np.ndarray
    counts: np.ndarray
    below: np.ndarray
    above: np.ndarray
    quantile_levels: np.ndarray
    quantiles: np.ndarray
    threshold_log_odds: float


@dataclass(frozen=True)
class TokenPush:
    """A token's evidence toward flagging (positive) or toward normal (negative)."""

    token: str
    evidence: float


@dataclass(frozen=True)
class ReviewedMessage:
    """One message under review, with its evidence summary.

    ``margin`` is how far the decision was from going the other way, on the
    log-odds scale: ``flag_log_odds - logit(threshold)`` for a threshold, or
    ``jll[flag_class] - jll[normal]`` for argmax; positive means flagged.
    Token evidence compares ``flag_class`` (the most probable flagged class)
    with the normal class: ``x_j * (W[flag_class, j] - W[normal, j])``.
    """

    index: int
    id: str
    true_class: str
    decided_class: str
    flag_class: str
    flag_probability: float
    flag_log_odds: float
    margin: float
    toward_flag: tuple[TokenPush, ...]
    toward_normal: tuple[TokenPush, ...]


@dataclass(frozen=True)
class ErrorDriver:
    """A token that pushed errors the wrong way, summed over the errors.

    ``evidence`` is the token's summed evidence toward the wrong decision,
    ``pushed`` the number of errors it pushed that way, ``tipped`` the number
    in which its evidence alone was larger than the margin. With two classes
    and count or presence features, tipping means that removing the token
    alone would have avoided the error; with TF-IDF features (a removal
    re-weighs the whole message) or several flagged classes it is an
    approximation of that.
    """

    token: str
    evidence: float
    pushed: int
    tipped: int


@dataclass(frozen=True)
class ErrorReview:
    """False alarms and missed abuse, the most confident first; borderline messages; drivers."""

    n_false_alarms: int
    n_missed: int
    false_alarms: tuple[ReviewedMessage, ...]
    missed: tuple[ReviewedMessage, ...]
    borderline: tuple[ReviewedMessage, ...]
    false_alarm_drivers: tuple[ErrorDriver, ...]
    missed_drivers: tuple[ErrorDriver, ...]


@dataclass(frozen=True, eq=False)
class Assessment:
    """Every figure of one assessment; presenters read it, never recompute.

    Parts that the data or the model cannot support are None, with the reason
    in ``notes`` (for example, the AUC without both normal and flagged
    messages, or operating points without a normal class).
    """

    classes: tuple[str, ...]
    normal_class: str | None
    decision: str
    threshold: float | None
    threshold_log_odds: float | None
    confidence: float
    costs: tuple[float, float] | None
    base_rates: BaseRates
    confusion: ConfusionMatrix
    accuracy: Rate
    class_metrics: tuple[BinaryMetrics, ...]
    flag_confusion: ConfusionMatrix | None
    flag_metrics: BinaryMetrics | None
    flag_ranking: RankingQuality | None
    class_ranking: tuple[RankingQuality | None, ...]
    operating_points: tuple[OperatingPoint, ...]
    calibration: Calibration | None
    scores: ScoreDistribution | None
    errors: ErrorReview | None
    notes: tuple[str, ...]


# --- thresholds --------------------------------------------------------------


@dataclass(frozen=True)
class _Sweep:
    """Counts at every distinct threshold, from +inf (nothing flagged) down.

    ``tp[i]``/``fp[i]``: positives/negatives with score ``>= thresholds[i]``.
    """

    thresholds: np.ndarray
    tp: np.ndarray
    fp: np.ndarray
    n_positive: int
    n_negative: int


def _sweep(scores: np.ndarray, positive: np.ndarray) -> _Sweep:
    order = np.argsort(-scores, kind="stable")
    ordered = scores[order]
    hits = positive[order]
    last_of_run = np.flatnonzero(np.append(ordered[1:] != ordered[:-1], True))
    tp = np.cumsum(hits)[last_of_run]
    fp = (last_of_run + 1) - tp
    return _Sweep(
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


def _ranking(positive_name: str, scores: np.ndarray, positive: np.ndarray, confidence: float) -> RankingQuality:
    sw = _sweep(scores, positive)
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
        roc_false_positive_rate=_frozen(sw.fp[keep] / sw.n_negative),
        roc_true_positive_rate=_frozen(sw.tp[keep] / sw.n_positive),
        roc_thresholds=_frozen(sw.thresholds[keep]),
        pr_precision=_frozen(precision[pr_keep]),
        pr_recall=_frozen(recall[pr_keep]),
        pr_thresholds=_frozen(sw.thresholds[1:][pr_keep]),
        average_precision=float(np.sum(steps / sw.n_positive * precision)),
    )


def _figures(
    threshold: float, tp: int, fp: int, n_pos: int, n_neg: int, costs, confidence: float
) -> ThresholdFigures:
    fn, tn = n_pos - tp, n_neg - fp
    n = n_pos + n_neg
    cost = None if costs is None else (costs[0] * fp + costs[1] * fn) / n
    return ThresholdFigures(
        threshold_log_odds=float(threshold),
        threshold_probability=float(expit(threshold)),
        tp=int(tp),
        fp=int(fp),
        fn=int(fn),
        tn=int(tn),
        precision=_rate(tp, tp + fp, confidence),
        recall=_rate(tp, n_pos, confidence),
        false_positive_rate=_rate(fp, n_neg, confidence),
        false_alarms_per_10k=PER_MESSAGES * fp / n,
        missed_per_10k=PER_MESSAGES * fn / n,
        expected_cost=cost,
    )


def _at(sw: _Sweep, i: int, costs, confidence: float) -> ThresholdFigures:
    return _figures(sw.thresholds[i], sw.tp[i], sw.fp[i], sw.n_positive, sw.n_negative, costs, confidence)


def _percent(x: float) -> str:
    return f"{100 * x:g} %"


def _fpr_point(sw: _Sweep, target: float, costs, confidence: float) -> OperatingPoint:
    if sw.n_negative == 0:
        return OperatingPoint("fpr", target, False, "no normal messages in the data: the false-positive rate is undefined", None)
    i = int(np.flatnonzero(sw.fp / sw.n_negative <= target)[-1])
    if i == 0:
        return OperatingPoint(
            "fpr",
            target,
            False,
            f"no threshold keeps the false-positive rate at or below {_percent(target)} and flags anything",
            None,
        )
    return OperatingPoint("fpr", target, True, None, _at(sw, i, costs, confidence))


def _recall_point(sw: _Sweep, target: float, costs, confidence: float) -> OperatingPoint:
    if sw.n_positive == 0:
        return OperatingPoint("recall", target, False, "no flagged messages in the data: recall is undefined", None)
    reached = np.flatnonzero(sw.tp / sw.n_positive >= target)
    if len(reached) == 0:
        return OperatingPoint("recall", target, False, f"no threshold reaches a recall of {_percent(target)}", None)
    return OperatingPoint("recall", target, True, None, _at(sw, int(reached[0]), costs, confidence))


def _cost_points(sw: _Sweep, costs, confidence: float) -> tuple[OperatingPoint, ...]:
    cost_fp, cost_fn = costs
    expected = cost_fp * sw.fp + cost_fn * (sw.n_positive - sw.tp)
    best = int(np.argmin(expected))
    # Bayes decision rule: flag when P(flag) * cost_fn >= P(normal) * cost_fp
    calibrated = float(np.log(cost_fp) - np.log(cost_fn))
    i = int(np.searchsorted(-sw.thresholds, -calibrated, side="right")) - 1
    at_calibrated = _figures(calibrated, sw.tp[i], sw.fp[i], sw.n_positive, sw.n_negative, costs, confidence)
    return (
        OperatingPoint("least cost", None, True, None, _at(sw, best, costs, confidence)),
        OperatingPoint("cost if calibrated", None, True, None, at_calibrated),
    )


# --- calibration and score distribution -----------------------------------------


def _calibration(scores: np.ndarray, positive: np.ndarray, n_bins: int, confidence: float) -> Calibration:
    order = np.argsort(scores, kind="stable")
    probability = expit(scores)
    n_bins = min(n_bins, len(scores))
    groups = np.array_split(order, n_bins)
    counts = np.array([len(g) for g in groups])
    hits = np.array([int(positive[g].sum()) for g in groups])
    mean_predicted = np.array([probability[g].mean() for g in groups])
    lo, hi = wilson_interval(hits, counts, confidence)
    observed = hits / counts
    return Calibration(
        n_bins=n_bins,
        counts=_frozen(counts),
        mean_predicted=_frozen(mean_predicted),
        observed=_frozen(observed),
        observed_low=_frozen(lo),
        observed_high=_frozen(hi),
        log_odds_low=_frozen([scores[g[0]] for g in groups]),
        log_odds_high=_frozen([scores[g[-1]] for g in groups]),
        brier_score=float(np.mean((probability - positive) ** 2)),
        expected_calibration_error=float(np.sum(counts / len(scores) * np.abs(observed - mean_predicted))),
    )


def _score_distribution(
    classes: tuple[str, ...], truth: np.ndarray, scores: np.ndarray, threshold_log_odds: float
) -> ScoreDistribution:
    lo, hi = np.percentile(scores, SCORE_RANGE_PERCENTILES)
    if not hi > lo:
        lo, hi = lo - 1.0, hi + 1.0
    edges = np.linspace(lo, hi, SCORE_BINS + 1)
    clipped = np.clip(scores, lo, hi)
    counts = np.zeros((len(classes), SCORE_BINS), dtype=np.int64)
    quantiles = np.full((len(classes), len(QUANTILE_LEVELS)), np.nan)
    for c in range(len(classes)):
        mine = truth == c
        counts[c] = np.histogram(clipped[mine], bins=edges)[0]
        if mine.any():
            quantiles[c] = np.quantile(scores[mine], QUANTILE_LEVELS)
    return ScoreDistribution(
        classes=classes,
        edges=_frozen(edges),
        counts=_frozen(counts),
        below=_frozen(np.bincount(truth[scores < lo], minlength=len(classes))),
        above=_frozen(np.bincount(truth[scores > hi], minlength=len(classes))),
        quantile_levels=_frozen(QUANTILE_LEVELS),
        quantiles=_frozen(quantiles),
        threshold_log_odds=float(threshold_log_odds),
    )


# --- error review ------------------------------------------------------------


def _flag_evidence(view: ModelView, X, rows: np.ndarray, flag_class: np.ndarray, normal: int) -> sp.csr_matrix:
    """Per-token evidence toward ``flag_class[row]`` against normal, for ``rows``."""
    part = view.prepare(sp.csr_matrix(X)[rows])
    part.sort_indices()
    return evidence_matrix(view, part, flag_class[rows], np.full(len(rows), normal))


def _pushes(tokens: np.ndarray, cols: np.ndarray, values: np.ndarray, sign: float) -> tuple[TokenPush, ...]:
    return tuple(TokenPush(str(tokens[c]), sign * float(v)) for c, v in zip(cols, values) if c >= 0)


@dataclass(frozen=True, eq=False)
class _Decisions:
    """Per-message arrays the error review reads (length n), and the normal class."""

    normal: int
    truth: np.ndarray
    decided: np.ndarray
    margin: np.ndarray
    scores: np.ndarray
    flag_class: np.ndarray
    ids: np.ndarray


def _reviewed(rows, view, X, ctx: _Decisions, top_tokens: int) -> tuple[ReviewedMessage, ...]:
    rows = np.asarray(rows, dtype=np.int64)
    if len(rows) == 0:
        return ()
    E = _flag_evidence(view, X, rows, ctx.flag_class, ctx.normal)
    up_cols, up_vals, down_cols, down_vals = top_k_per_row(E, E.data, top_tokens)
    down_vals = -down_vals  # _pushes takes magnitudes and the sign separately
    classes = view.classes
    return tuple(
        ReviewedMessage(
            index=int(r),
            id=str(ctx.ids[r]),
            true_class=str(classes[ctx.truth[r]]),
            decided_class=str(classes[ctx.decided[r]]),
            flag_class=str(classes[ctx.flag_class[r]]),
            flag_probability=float(expit(ctx.scores[r])),
            flag_log_odds=float(ctx.scores[r]),
            margin=float(ctx.margin[r]),
            toward_flag=_pushes(view.tokens, up_cols[i], up_vals[i], 1.0),
            toward_normal=_pushes(view.tokens, down_cols[i], down_vals[i], -1.0),
        )
        for i, r in enumerate(rows)
    )


def _drivers(view, X, rows: np.ndarray, ctx: _Decisions, sign: float, top: int) -> tuple[ErrorDriver, ...]:
    """Tokens by summed evidence toward the wrong side; ``sign`` +1 for false alarms, -1 for misses."""
    if len(rows) == 0:
        return ()
    E = _flag_evidence(view, X, rows, ctx.flag_class, ctx.normal)
    push = np.maximum(sign * E.data, 0.0)
    owner = np.repeat(np.arange(len(rows)), np.diff(E.indptr))
    n_features = len(view.tokens)
    total = np.bincount(E.indices, weights=push, minlength=n_features)
    pushed = np.bincount(E.indices[push > 0], minlength=n_features)
    room = np.abs(ctx.margin[rows])[owner]
    tipped = np.bincount(E.indices[push > room], minlength=n_features)
    ranked = [int(c) for c in np.lexsort((np.arange(n_features), -total)) if total[c] > 0][:top]
    return tuple(ErrorDriver(str(view.tokens[c]), float(total[c]), int(pushed[c]), int(tipped[c])) for c in ranked)


def _error_review(view, X, ctx: _Decisions, top: int, top_tokens: int) -> ErrorReview:
    normal, truth, decided, margin = ctx.normal, ctx.truth, ctx.decided, ctx.margin
    false_alarm = np.flatnonzero((truth == normal) & (decided != normal))
    missed = np.flatnonzero((truth != normal) & (decided == normal))
    false_alarm = false_alarm[np.argsort(-margin[false_alarm], kind="stable")]
    missed = missed[np.argsort(margin[missed], kind="stable")]
    borderline = np.argsort(np.abs(margin), kind="stable")[:top]
    return ErrorReview(
        n_false_alarms=len(false_alarm),
        n_missed=len(missed),
        false_alarms=_reviewed(false_alarm[:top], view, X, ctx, top_tokens),
        missed=_reviewed(missed[:top], view, X, ctx, top_tokens),
        borderline=_reviewed(borderline, view, X, ctx, top_tokens),
        false_alarm_drivers=_drivers(view, X, false_alarm, ctx, 1.0, top),
        missed_drivers=_drivers(view, X, missed, ctx, -1.0, top),
    )


# --- the assessment ------------------------------------------------------------


def _class_indices(view: ModelView, labels) -> np.ndarray:
    if labels is None:
        raise NbledgerError("the assessment needs the true label of every message (a label column)")
    labels = np.asarray(labels, dtype=object).astype(str)
    known = {str(c): i for i, c in enumerate(view.classes)}
    names, inverse, counts = np.unique(labels, return_inverse=True, return_counts=True)
    unknown = [(str(n), int(c)) for n, c in zip(names, counts) if n not in known]
    if unknown:
        listed = ", ".join(f"{n!r} ({c} message{'s' * (c != 1)})" for n, c in unknown)
        raise NbledgerError(
            f"labels not among the model's classes ({', '.join(view.classes)}): {listed}"
        )
    return np.array([known[str(n)] for n in names], dtype=np.int64)[inverse]


def _check_targets(name: str, targets) -> tuple[float, ...]:
    targets = tuple(float(t) for t in targets)
    bad = [t for t in targets if not 0.0 <= t <= 1.0]
    if bad:
        raise NbledgerError(f"target {name} must be a fraction in [0, 1], got {bad[0]:g}")
    return targets


def _check_costs(costs) -> tuple[float, float] | None:
    if costs is None:
        return None
    cost_fp, cost_fn = (float(c) for c in costs)
    if not (cost_fp > 0 and cost_fn > 0 and np.isfinite(cost_fp) and np.isfinite(cost_fn)):
        raise NbledgerError(f"costs must be positive numbers, got {cost_fp:g}:{cost_fn:g}")
    return cost_fp, cost_fn


def one_vs_rest_log_odds(jll: np.ndarray, c: int) -> np.ndarray:
    """``log P(c) - log P(not c)`` per row: class ``c`` against the rest."""
    others = np.delete(jll, c, axis=1)
    # the plain max-shift form: scipy's logsumexp spends most of its time on checks
    top = others.max(axis=1)
    return jll[:, c] - (top + np.log(np.exp(others - top[:, None]).sum(axis=1)))


def assess(
    view: ModelView,
    X,
    labels,
    *,
    threshold: float | None = None,
    ids=None,
    target_fpr=DEFAULT_TARGET_FPR,
    target_recall=DEFAULT_TARGET_RECALL,
    costs: tuple[float, float] | None = None,
    n_bins: int = 10,
    top: int = 10,
    top_tokens: int = 5,
    confidence: float = 0.95,
    evidence: BatchEvidence | None = None,
) -> Assessment:
    """Assess a filter on labelled messages.

    Parameters
    ----------
    view : the model's :class:`~explain.model.model_view.ModelView` (its
        ``normal_class`` names the class that lets a message through; with two
        classes and none named, the first class is taken as normal).
    X : the vectorizer's feature matrix of the messages, shape (n, F).
    labels : true class of each message, as the model's class names.
    threshold : probability of *not normal* at or above which a message is
        flagged; None decides by the most probable class.
    ids : message ids for the error review (default: row numbers from 1).
    target_fpr, target_recall : targets for the operating-point table.
    costs : (cost of a false alarm, cost of a missed message), for the
        least-cost threshold.
    n_bins : equal-count bins of the reliability diagram.
    top : how many errors, borderline messages and error drivers to list.
    top_tokens : how many tokens for and against in each message's summary.
    confidence : level of every interval.
    evidence : the :func:`~explain.analysis.batch.batch_evidence` of ``X`` under the
        same threshold, when the messages are already scored.

    Examples
    --------
    >>> from sklearn.feature_extraction.text import CountVectorizer
    >>> from sklearn.naive_bayes import MultinomialNB
    >>> from explain.model.model_view import view_of
    >>> texts = ["pay the fee now", "meeting at the boathouse", "fee for prize", "boathouse rota"]
    >>> labels = ["scam", "ok", "scam", "ok"]
    >>> vec = CountVectorizer().fit(texts)
    >>> clf = MultinomialNB().fit(vec.transform(texts), labels)
    >>> view = view_of(clf, vec.get_feature_names_out(), "counts", normal_class="ok")
    >>> result = assess(view, vec.transform(texts), labels)
    >>> result.flag_metrics.recall.value, result.flag_ranking.auc.auc
    (1.0, 1.0)
    """
    if view.n_classes < 2:
        raise NbledgerError("the model has a single class; there is nothing to assess")
    truth = _class_indices(view, labels)
    n = len(truth)
    if n != X.shape[0]:
        raise NbledgerError(f"{n} labels for {X.shape[0]} messages")
    target_fpr = _check_targets("false-positive rates", target_fpr)
    target_recall = _check_targets("recalls", target_recall)
    costs = _check_costs(costs)
    if not 0.0 < confidence < 1.0:
        raise NbledgerError(f"confidence must be in (0, 1), got {confidence:g}")
    if n_bins < 1 or top < 0 or top_tokens < 0:
        raise NbledgerError("bins must be at least 1, and list lengths at least 0")
    rule = DecisionRule.for_view(view, threshold)
    if evidence is None:
        evidence = batch_evidence(view, X, rule, top_k=0)
    elif len(evidence) != n or evidence.threshold != threshold or evidence.normal_index != rule.normal_index:
        raise NbledgerError("the scored messages do not match these messages or this threshold")
    ids = np.arange(1, n + 1).astype(str) if ids is None else np.asarray(ids, dtype=object)
    classes = tuple(str(c) for c in view.classes)
    decided = np.asarray(evidence.decision)
    notes: list[str] = []

    present = np.bincount(truth, minlength=len(classes))
    for c in np.flatnonzero(present == 0):
        notes.append(f"the data hold no {classes[c]!r} messages")

    confusion = _confusion(classes, truth, decided)
    counts = confusion.counts
    class_metrics = tuple(
        binary_metrics(
            classes[c],
            tp=counts[c, c],
            fp=counts[:, c].sum() - counts[c, c],
            fn=counts[c].sum() - counts[c, c],
            tn=n - counts[c].sum() - counts[:, c].sum() + counts[c, c],
            confidence=confidence,
        )
        for c in range(len(classes))
    )
    accuracy = _rate(int(np.trace(counts)), n, confidence)

    normal = rule.normal_index
    class_ranking: tuple[RankingQuality | None, ...] = ()
    if len(classes) > 2:
        class_ranking = tuple(
            _ranking(classes[c], one_vs_rest_log_odds(evidence.jll, c), truth == c, confidence)
            if 0 < present[c] < n
            else None
            for c in range(len(classes))
        )
        for c, r in enumerate(class_ranking):
            if r is None:
                notes.append(f"AUC of {classes[c]!r} against the rest undefined: the data hold only one side")

    base_rates = BaseRates(
        n_messages=n,
        classes=classes,
        counts=_frozen(present),
        shares=tuple(_rate(int(k), n, confidence) for k in present),
        flagged=None if normal is None else _rate(int(n - present[normal]), n, confidence),
    )

    flag_confusion = flag_metrics = flag_ranking = calibration = scores_dist = errors = None
    points: tuple[OperatingPoint, ...] = ()
    threshold_log_odds = rule.threshold_log_odds
    if normal is None:
        notes.append(
            "no normal class named: flagged-versus-normal figures, operating points, calibration and "
            "error review need one (--normal-class)"
        )
        decision = "most probable class"
    else:
        if view.normal_class is None:
            notes.append(f"no normal class named: {classes[normal]!r} (the first of two classes) taken as normal")
        scores = np.asarray(evidence.flag_log_odds)
        flag_truth = truth != normal
        flag_decided = decided != normal
        flag_confusion = _confusion(("normal", FLAGGED), flag_truth.astype(np.int64), flag_decided.astype(np.int64))
        (tn, fp), (fn, tp) = flag_confusion.counts
        flag_metrics = binary_metrics(FLAGGED, tp, fp, fn, tn, confidence)
        best_flagged = rule.flagged_indices[np.argmax(evidence.jll[:, rule.flagged_indices], axis=1)]
        if threshold is None:
            decision = "most probable class"
            margin = evidence.jll[np.arange(n), best_flagged] - evidence.jll[:, normal]
            in_use_threshold = 0.0 if len(classes) == 2 else float("nan")
        else:
            decision = f"flag when P(not {classes[normal]}) >= {threshold:g}"
            margin = scores - threshold_log_odds
            in_use_threshold = threshold_log_odds
        if 0 < flag_truth.sum() < n:
            flag_ranking = _ranking(FLAGGED, scores, flag_truth, confidence)
        else:
            only = classes[normal] if flag_truth.sum() == 0 else "flagged classes"
            notes.append(f"AUC and precision-recall curve undefined: the data hold only {only} messages")
        sw = _sweep(scores, flag_truth)
        in_use = OperatingPoint(
            "in use", None, True, None,
            _figures(in_use_threshold, tp, fp, sw.n_positive, sw.n_negative, costs, confidence),
        )
        points = (
            in_use,
            *(_fpr_point(sw, t, costs, confidence) for t in target_fpr),
            *(_recall_point(sw, t, costs, confidence) for t in target_recall),
            *(() if costs is None else _cost_points(sw, costs, confidence)),
        )
        wording = {"fpr": "false-positive rate at most", "recall": "recall at least"}
        notes.extend(
            f"target {wording[p.kind]} {_percent(p.target)} not met: {p.note}" for p in points if not p.met
        )
        calibration = _calibration(scores, flag_truth, n_bins, confidence)
        scores_dist = _score_distribution(classes, truth, scores, in_use_threshold)
        ctx = _Decisions(normal, truth, decided, margin, scores, best_flagged, ids)
        errors = _error_review(view, X, ctx, top, top_tokens)

    return Assessment(
        classes=classes,
        normal_class=None if normal is None else classes[normal],
        decision=decision,
        threshold=threshold,
        threshold_log_odds=threshold_log_odds,
        confidence=confidence,
        costs=costs,
        base_rates=base_rates,
        confusion=confusion,
        accuracy=accuracy,
        class_metrics=class_metrics,
        flag_confusion=flag_confusion,
        flag_metrics=flag_metrics,
        flag_ranking=flag_ranking,
        class_ranking=class_ranking,
        operating_points=points,
        calibration=calibration,
        scores=scores_dist,
        errors=errors,
        notes=tuple(notes),
    )
