"""Whether the filter's probabilities can be taken at face value, and how scores spread per class."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import expit, log_expit, logit, logsumexp

from explain.analysis.rates import frozen
from explain.analysis.stats import wilson_interval

#: Bins of the score histogram; its range covers the middle 99 % of scores.
SCORE_BINS = 40
SCORE_RANGE_PERCENTILES = (0.5, 99.5)
QUANTILE_LEVELS = (0.0, 0.05, 0.25, 0.5, 0.75, 0.95, 1.0)


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
    AAAI, "Obtaining well calibrated probabilities using Bayesian binning");
    maximum calibration error: ``max_b |observed_b - mean_predicted_b|`` (the
    same paper). A weighted mean hides a few badly calibrated bins, so both
    are kept, and ``overconfident[b]`` marks the bins where the filter is more
    certain than the data: the mean P(flag) lies outside the Wilson interval of
    the observed share, on the far side from 1/2 (above the interval when
    mean P(flag) > 1/2, below it when < 1/2).

    The same on the log-odds scale, where naive Bayes probabilities spread
    out: ``mean_predicted_log_odds`` is ``logit(mean_predicted)`` computed
    without rounding (``log mean P - log mean (1 - P)`` from log-probabilities),
    ``observed_log_odds`` and its ends ``logit`` of the observed share and of
    its Wilson ends (infinite where the share is 0 or 1).
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
    maximum_calibration_error: float
    overconfident: np.ndarray
    mean_predicted_log_odds: np.ndarray
    observed_log_odds: np.ndarray
    observed_log_odds_low: np.ndarray
    observed_log_odds_high: np.ndarray


@dataclass(frozen=True, eq=False)
class ScoreDistribution:
    """Flag log-odds per true class: a shared histogram and quantiles.

    ``edges`` span the middle 99 % of all scores; scores outside are counted
    in the end bins and also in ``below``/``above``. ``quantiles[c, q]`` is
    the ``quantile_levels[q]`` quantile of class ``c`` (NaN when absent).
    ``shares[c, b]`` is ``counts[c, b]`` over the class's messages, so that
    small classes show their shape beside large ones (NaN when absent).
    """

    classes: tuple[str, ...]
    edges: np.ndarray
    counts: np.ndarray
    below: np.ndarray
    above: np.ndarray
    quantile_levels: np.ndarray
    quantiles: np.ndarray
    threshold_log_odds: float
    shares: np.ndarray



def calibration_of(scores: np.ndarray, positive: np.ndarray, n_bins: int, confidence: float) -> Calibration:
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
        counts=frozen(counts),
        mean_predicted=frozen(mean_predicted),
        observed=frozen(observed),
        observed_low=frozen(lo),
        observed_high=frozen(hi),
        log_odds_low=frozen([scores[g[0]] for g in groups]),
        log_odds_high=frozen([scores[g[-1]] for g in groups]),
        brier_score=float(np.mean((probability - positive) ** 2)),
        expected_calibration_error=float(np.sum(counts / len(scores) * np.abs(observed - mean_predicted))),
        maximum_calibration_error=float(np.max(np.abs(observed - mean_predicted))),
        overconfident=frozen(((mean_predicted > 0.5) & (mean_predicted > hi)) | ((mean_predicted < 0.5) & (mean_predicted < lo))),
        mean_predicted_log_odds=frozen(
            [logsumexp(log_expit(scores[g])) - logsumexp(log_expit(-scores[g])) for g in groups]
        ),
        observed_log_odds=frozen(_logit(observed)),
        observed_log_odds_low=frozen(_logit(lo)),
        observed_log_odds_high=frozen(_logit(hi)),
    )


def _logit(p) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return logit(np.asarray(p, dtype=np.float64))


def score_distribution(
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
        edges=frozen(edges),
        counts=frozen(counts),
        below=frozen(np.bincount(truth[scores < lo], minlength=len(classes))),
        above=frozen(np.bincount(truth[scores > hi], minlength=len(classes))),
        quantile_levels=frozen(QUANTILE_LEVELS),
        quantiles=frozen(quantiles),
        threshold_log_odds=float(threshold_log_odds),
        shares=frozen(_shares(counts)),
    )


def _shares(counts: np.ndarray) -> np.ndarray:
    totals = counts.sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        return counts / totals
