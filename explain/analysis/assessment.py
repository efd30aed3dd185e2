"""How well a filter works on labelled messages: one result that carries every figure.

The assessment answers an auditor's questions on the data it is given; each
part lives in a module of its own and this one assembles them:

- :mod:`explain.analysis.rates`: how often each class occurs (base rates),
  what the filter decided (confusion matrices), rates with Wilson intervals,
  and their projection to another share of abuse (``base_rate``);
- :mod:`explain.analysis.ranking`: ROC and precision-recall curves, AUC with
  DeLong's interval, and the operating points (thresholds chosen by a target
  or by costs, each with its exact log-odds threshold);
- :mod:`explain.analysis.calibration`: reliability and score distributions;
- :mod:`explain.analysis.error_review`: the mistakes and the tokens behind them;
- :mod:`explain.analysis.slices`: error rates per slice of the messages;
- :mod:`explain.analysis.label_errors`: messages whose label may be wrong.

Thresholds act on the probability that a message is *not normal*. The score
is the flag log-odds ``log P(not normal) - log P(normal)`` from
:class:`explain.analysis.batch.BatchEvidence`: naive Bayes probabilities pile
up at 0 and 1 where many messages round to exactly 1.0, while their log-odds
stay distinct, so every ranking and threshold here works on the log-odds. A
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

from explain.analysis.batch import BatchEvidence, batch_evidence
from explain.analysis.calibration import Calibration, ScoreDistribution, calibration_of, score_distribution
from explain.analysis.error_review import Decisions, ErrorReview, error_review
from explain.analysis.label_errors import LabelErrors
from explain.analysis.ranking import (
    DEFAULT_TARGET_FPR,
    DEFAULT_TARGET_RECALL,
    FigureSettings,
    OperatingPoint,
    RankingQuality,
    cost_points,
    fpr_point,
    percent,
    ranking_quality,
    recall_point,
    sweep,
    threshold_figures,
)
from explain.analysis.rates import (
    PER_MESSAGES,
    BaseRates,
    BinaryMetrics,
    ConfusionMatrix,
    Rate,
    binary_metrics,
    confusion_of,
    frozen,
    rate_of,
)
from explain.analysis.slices import SliceReport, slice_report
from explain.errors import NbledgerError
from explain.model.decision import DecisionRule
from explain.model.model_view import ModelView

__all__ = ["Assessment", "assess", "one_vs_rest_log_odds", "DEFAULT_TARGET_FPR", "DEFAULT_TARGET_RECALL",
           "PER_MESSAGES", "FLAGGED"]

FLAGGED = "flagged"


@dataclass(frozen=True, eq=False)
class Assessment:
    """Every figure of one assessment; presenters read it, never recompute.

    Parts that the data or the model cannot support are None, with the reason
    in ``notes`` (for example, the AUC without both normal and flagged
    messages, or operating points without a normal class). ``base_rate`` is
    the share of abuse the operating points were projected to (None: no
    projection); ``slices`` and ``label_errors`` are None unless asked for.
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
    base_rate: float | None = None
    slices: SliceReport | None = None
    label_errors: LabelErrors | None = None


def class_indices(view: ModelView, labels) -> np.ndarray:
    """Index of each label among the model's classes, or a one-line error naming the unknown ones."""
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


@dataclass(frozen=True)
class _ClassParts:
    confusion: ConfusionMatrix
    class_metrics: tuple[BinaryMetrics, ...]
    accuracy: Rate
    class_ranking: tuple[RankingQuality | None, ...]
    base_rates: BaseRates


def _class_parts(classes, truth, decided, jll, normal, confidence, notes: list) -> _ClassParts:
    """Per-class figures: confusion, one-against-the-rest rates and rankings, base rates."""
    n = len(truth)
    present = np.bincount(truth, minlength=len(classes))
    for c in np.flatnonzero(present == 0):
        notes.append(f"the data hold no {classes[c]!r} messages")
    confusion = confusion_of(classes, truth, decided)
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
    class_ranking: tuple[RankingQuality | None, ...] = ()
    if len(classes) > 2:
        class_ranking = tuple(
            ranking_quality(classes[c], one_vs_rest_log_odds(jll, c), truth == c, confidence)
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
        counts=frozen(present),
        shares=tuple(rate_of(int(k), n, confidence) for k in present),
        flagged=None if normal is None else rate_of(int(n - present[normal]), n, confidence),
    )
    return _ClassParts(confusion, class_metrics, rate_of(int(np.trace(counts)), n, confidence), class_ranking, base_rates)


def _decision_in_use(rule: DecisionRule, jll: np.ndarray, scores: np.ndarray, best_flagged: np.ndarray,
                     given_as_probability: bool):
    """(decision in words, margin per message, its scale, the in-use threshold in log-odds).

    See :class:`~explain.analysis.error_review.ReviewedMessage` for the margin.
    The most probable class with more than one flagged class has no single
    threshold on the flag log-odds: NaN.
    """
    normal = rule.normal_index
    if rule.threshold is None:
        margin = jll[np.arange(len(jll)), best_flagged] - jll[:, normal]
        in_use = 0.0 if rule.n_classes == 2 else float("nan")
        return "most probable class", margin, "strongest flagged class against normal", in_use
    exact = f"flag log-odds >= {rule.threshold_log_odds!r}"
    decision = f"flag when P(flag) >= {rule.threshold:g}, that is {exact}" if given_as_probability else f"flag when {exact}"
    return decision, scores - rule.threshold_log_odds, "flag log-odds", rule.threshold_log_odds


def _operating_points(scores, flag_truth, in_use_counts, in_use_threshold, target_fpr, target_recall,
                      how: FigureSettings, notes: list) -> tuple[OperatingPoint, ...]:
    """The decision in use, then the thresholds chosen by target and by cost; unmet targets go to ``notes``."""
    sw = sweep(scores, flag_truth)
    tp, fp = in_use_counts
    points = (
        OperatingPoint("in use", None, True, None,
                       threshold_figures(in_use_threshold, tp, fp, sw.n_positive, sw.n_negative, how)),
        *(fpr_point(sw, t, how) for t in target_fpr),
        *(recall_point(sw, t, how) for t in target_recall),
        *(() if how.costs is None else cost_points(sw, how)),
    )
    wording = {"fpr": "false-alarm rate at most", "recall": "recall at least"}
    notes.extend(f"target {wording[p.kind]} {percent(p.target)} not met: {p.note}" for p in points if not p.met)
    return points


def assess(
    view: ModelView,
    X,
    labels,
    *,
    threshold: float | None = None,
    threshold_log_odds: float | None = None,
    ids=None,
    target_fpr=DEFAULT_TARGET_FPR,
    target_recall=DEFAULT_TARGET_RECALL,
    costs: tuple[float, float] | None = None,
    base_rate: float | None = None,
    slices=(),
    label_errors: LabelErrors | None = None,
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
    threshold_log_odds : the same threshold as log-odds, exactly (instead of
        ``threshold``): flag when ``log P(not normal) - log P(normal) >= L``.
    ids : message ids for the error review (default: row numbers from 1).
    target_fpr, target_recall : targets for the operating-point table.
    costs : (cost of a false alarm, cost of a missed message), for the
        least-cost threshold.
    base_rate : share of messages of a flagged class in the traffic the
        filter will meet; every operating point is projected to it
        (:class:`~explain.analysis.rates.Projection`).
    slices : :class:`~explain.analysis.slices.SliceGroup` s to report error
        rates for (see :mod:`explain.analysis.slices`).
    label_errors : the suspected label errors of these messages
        (:func:`~explain.analysis.label_errors.label_errors`), to carry and
        to mark in the error review.
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
    truth = _checked_messages(view, X, labels, label_errors)
    how = FigureSettings(_check_costs(costs), confidence, base_rate)
    _check_settings(how, n_bins, top, top_tokens)
    targets = _check_targets("false-alarm rates", target_fpr), _check_targets("recalls", target_recall)
    rule = DecisionRule.for_view(view, threshold, threshold_log_odds)
    if evidence is None:
        evidence = batch_evidence(view, X, rule, top_k=0)
    elif len(evidence) != len(truth) or evidence.threshold != rule.threshold or evidence.normal_index != rule.normal_index:
        raise NbledgerError("the scored messages do not match these messages or this threshold")
    ids = np.arange(1, len(truth) + 1).astype(str) if ids is None else np.asarray(ids, dtype=object)
    lists = _Lists(n_bins, top, top_tokens)
    return _assessment(view, X, truth, rule, evidence, ids, targets, how, slices, label_errors, lists,
                       given_as_probability=threshold is not None)


@dataclass(frozen=True)
class _Lists:
    """How long the assessment's lists are: reliability bins, errors listed, tokens per message."""

    n_bins: int
    top: int
    top_tokens: int


def _checked_messages(view: ModelView, X, labels, label_errors) -> np.ndarray:
    """The true class index of each message, after the checks that the messages fit the model."""
    if view.n_classes < 2:
        raise NbledgerError("the model has a single class; there is nothing to assess")
    truth = class_indices(view, labels)
    if len(truth) != X.shape[0]:
        raise NbledgerError(f"{len(truth)} labels for {X.shape[0]} messages")
    if label_errors is not None and label_errors.n_messages != len(truth):
        raise NbledgerError("the suspected label errors were found on other messages")
    return truth


def _check_settings(how: FigureSettings, n_bins: int, top: int, top_tokens: int) -> None:
    if not 0.0 < how.confidence < 1.0:
        raise NbledgerError(f"confidence must be in (0, 1), got {how.confidence:g}")
    if how.base_rate is not None and not 0.0 < how.base_rate < 1.0:
        raise NbledgerError(f"the base rate must be a share strictly between 0 and 1, got {how.base_rate:g}")
    if n_bins < 1 or top < 0 or top_tokens < 0:
        raise NbledgerError("bins must be at least 1, and list lengths at least 0")


def _assessment(view, X, truth, rule: DecisionRule, evidence: BatchEvidence, ids, targets, how: FigureSettings,
                slices, label_errors, lists: _Lists, given_as_probability: bool) -> Assessment:
    """Every figure of :func:`assess`, its inputs checked."""
    n, confidence = len(truth), how.confidence
    classes = tuple(str(c) for c in view.classes)
    decided = np.asarray(evidence.decision)
    notes: list[str] = []
    normal = rule.normal_index
    parts = _class_parts(classes, truth, decided, evidence.jll, normal, confidence, notes)

    flag_confusion = flag_metrics = flag_ranking = calibration = scores_dist = errors = slice_figures = None
    points: tuple[OperatingPoint, ...] = ()
    if normal is None:
        notes.append(
            "no normal class named: flagged-versus-normal figures, operating points, calibration, slices and "
            "error review need one (--normal-class)"
        )
        decision = "most probable class"
    else:
        if view.normal_class is None:
            notes.append(f"no normal class named: {classes[normal]!r} (the first of two classes) taken as normal")
        scores = np.asarray(evidence.flag_log_odds)
        flag_truth = truth != normal
        flag_decided = decided != normal
        flag_confusion = confusion_of(("normal", FLAGGED), flag_truth.astype(np.int64), flag_decided.astype(np.int64))
        (tn, fp), (fn, tp) = flag_confusion.counts
        flag_metrics = binary_metrics(FLAGGED, tp, fp, fn, tn, confidence)
        best_flagged = rule.flagged_indices[np.argmax(evidence.jll[:, rule.flagged_indices], axis=1)]
        decision, margin, margin_scale, in_use_threshold = _decision_in_use(
            rule, evidence.jll, scores, best_flagged, given_as_probability=given_as_probability
        )
        if 0 < flag_truth.sum() < n:
            flag_ranking = ranking_quality(FLAGGED, scores, flag_truth, confidence)
        else:
            only = classes[normal] if flag_truth.sum() == 0 else "flagged classes"
            notes.append(f"AUC and precision-recall curve undefined: the data hold only {only} messages")
        points = _operating_points(
            scores, flag_truth, (int(tp), int(fp)), in_use_threshold, *targets, how, notes,
        )
        calibration = calibration_of(scores, flag_truth, lists.n_bins, confidence)
        scores_dist = score_distribution(classes, truth, scores, in_use_threshold)
        suspected = np.zeros(n, dtype=bool)
        if label_errors is not None:
            suspected[[s.index for s in label_errors.suspected]] = True
        ctx = Decisions(normal, truth, decided, margin, scores, best_flagged, ids, suspected, margin_scale)
        errors = error_review(view, X, ctx, lists.top, lists.top_tokens)
        if slices:
            slice_figures = slice_report(slices, flag_truth, flag_decided, confidence)

    return Assessment(
        classes=classes,
        normal_class=None if normal is None else classes[normal],
        decision=decision,
        threshold=rule.threshold,
        threshold_log_odds=rule.threshold_log_odds,
        confidence=confidence,
        costs=how.costs,
        base_rates=parts.base_rates,
        confusion=parts.confusion,
        accuracy=parts.accuracy,
        class_metrics=parts.class_metrics,
        flag_confusion=flag_confusion,
        flag_metrics=flag_metrics,
        flag_ranking=flag_ranking,
        class_ranking=parts.class_ranking,
        operating_points=points,
        calibration=calibration,
        scores=scores_dist,
        errors=errors,
        notes=tuple(notes),
        base_rate=how.base_rate,
        slices=slice_figures,
        label_errors=label_errors,
    )
