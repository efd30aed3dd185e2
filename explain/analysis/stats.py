"""Statistics shared by the vocabulary review and the assessment.

Interval estimates for the assessment:

- :func:`wilson_interval`: the score interval for a binomial proportion
  (Wilson 1927, "Probable inference, the law of succession, and statistical
  inference", JASA 22(158); formulas as in Newcombe 1998, "Two-sided
  confidence intervals for the single proportion", Statistics in Medicine
  17(8), method 3).
- :func:`delong_auc`: the area under the ROC curve with its variance
  (DeLong, DeLong & Clarke-Pearson 1988, "Comparing the areas under two or
  more correlated receiver operating characteristic curves", Biometrics
  44(3)), computed from mid-ranks in O(n log n) (Sun & Xu 2014, "Fast
  implementation of DeLong's algorithm for comparing the areas under
  correlated receiver operating characteristic curves", IEEE Signal
  Processing Letters 21(11)).

Association in 2x2 tables, for the vocabulary review. Each function takes
four arrays (broadcast together) holding the cells of many tables at once,
in the layout of Manning, Raghavan & Schuetze, *Introduction to Information
Retrieval* (2008), section 13.5: ``n11`` token present and in the class,
``n10`` present and not in the class, ``n01`` absent and in the class,
``n00`` neither.

- :func:`pearson_chi2`: Pearson's chi-square without continuity correction.
- :func:`dunning_g2`: the log-likelihood ratio statistic G2 (Dunning 1993,
  "Accurate methods for the statistics of surprise and coincidence",
  Computational Linguistics 19(1)).
- :func:`mutual_information`: the mutual information of token and class
  (Manning et al. 2008, eq. 13.17), in bits by default.

A table with an empty row or column carries no evidence of association;
all three give 0 for it rather than NaN.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import ndtri, xlogy


def _z(confidence: float) -> float:
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must be in (0, 1), got {confidence}")
    return float(ndtri(0.5 + 0.5 * confidence))


def wilson_interval(k, n, confidence: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Two-sided Wilson score interval for ``k`` successes in ``n`` trials.

    Vectorised over ``k`` and ``n`` (broadcast; scalars in, scalars out). Where ``n == 0`` the
    proportion is undefined and both ends are NaN. The ends are exactly 0 when
    ``k == 0`` and exactly 1 when ``k == n``, as in Newcombe (1998).

    Examples
    --------
    >>> lo, hi = wilson_interval(81, 263)
    >>> round(float(lo), 4), round(float(hi), 4)
    (0.2553, 0.3662)
    """
    z = _z(confidence)
    k = np.asarray(k, dtype=np.float64)
    n = np.asarray(n, dtype=np.float64)
    k, n = np.broadcast_arrays(k, n)
    with np.errstate(invalid="ignore", divide="ignore"):
        p = k / n
        denom = 2.0 * (n + z * z)
        center = (2.0 * n * p + z * z) / denom
        delta = z / denom * np.sqrt(4.0 * n * p * (1.0 - p) + z * z)
        lo = np.where(k == 0, 0.0, center - delta)
        hi = np.where(k == n, 1.0, center + delta)
    empty = n == 0
    lo = np.where(empty, np.nan, lo)
    hi = np.where(empty, np.nan, hi)
    return lo[()], hi[()]


@dataclass(frozen=True)
class AucEstimate:
    """The ROC AUC of one score with DeLong's variance and a normal interval.

    ``auc`` is the Mann-Whitney estimate P(score_pos > score_neg) with ties
    counted one half, which equals the trapezoidal area under the empirical
    ROC curve. ``variance`` is DeLong's ``S10/m + S01/n``; it is NaN when a
    class has fewer than two members. ``low``/``high`` are
    ``auc -+ z * sqrt(variance)`` clipped to [0, 1] (NaN with the variance).
    """

    auc: float
    variance: float
    low: float
    high: float
    confidence: float
    n_positive: int
    n_negative: int


def _midranks_of_sorted(values: np.ndarray) -> np.ndarray:
    """Mid-ranks (1-based, ties averaged) of an already sorted array."""
    n = len(values)
    starts = np.flatnonzero(np.concatenate([[True], values[1:] != values[:-1]])) if n else np.zeros(0, int)
    ends = np.append(starts[1:], n)
    return np.repeat((starts + 1 + ends) / 2.0, ends - starts)


def _midrank_components(scores: np.ndarray, positive: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """DeLong's structural components V10 (per positive) and V01 (per negative).

    Sun & Xu (2014), section II: with ``T_z`` the mid-ranks in the pooled
    sample and ``T_x``/``T_y`` those within positives/negatives,
    ``V10_i = (T_z_i - T_x_i) / n`` and ``V01_j = 1 - (T_z_j - T_y_j) / m``.
    One sort serves all three rankings: each class, taken in pooled order,
    is already sorted.
    """
    order = np.argsort(scores, kind="stable")
    ordered = scores[order]
    hit = positive[order]
    pooled = _midranks_of_sorted(ordered)
    m, n = int(hit.sum()), int((~hit).sum())
    v10 = (pooled[hit] - _midranks_of_sorted(ordered[hit])) / n
    v01 = 1.0 - (pooled[~hit] - _midranks_of_sorted(ordered[~hit])) / m
    return v10, v01


def delong_auc(scores, positive, confidence: float = 0.95) -> AucEstimate:
    """ROC AUC of ``scores`` for the boolean truth ``positive``, with DeLong's interval.

    Parameters
    ----------
    scores : array of float, shape (n,); larger means "more positive".
    positive : array of bool, shape (n,).
    confidence : level of the two-sided normal interval.

    Raises ``ValueError`` when either class is absent (the AUC is undefined).

    Examples
    --------
    >>> est = delong_auc([0.1, 0.4, 0.35, 0.8], [False, False, True, True])
    >>> est.auc
    0.75
    """
    z = _z(confidence)
    scores = np.asarray(scores, dtype=np.float64)
    positive = np.asarray(positive, dtype=bool)
    if scores.shape != positive.shape or scores.ndim != 1:
        raise ValueError("scores and positive must be 1-D arrays of the same length")
    m, n = int(positive.sum()), int((~positive).sum())
    if m == 0 or n == 0:
        raise ValueError("the AUC needs both positive and negative examples")
    v10, v01 = _midrank_components(scores, positive)
    auc = float(v10.mean())
    if m > 1 and n > 1:
        variance = float(np.var(v10, ddof=1) / m + np.var(v01, ddof=1) / n)
    else:
        variance = float("nan")
    half = z * np.sqrt(variance)
    return AucEstimate(
        auc=auc,
        variance=variance,
        low=float(np.clip(auc - half, 0.0, 1.0)),
        high=float(np.clip(auc + half, 0.0, 1.0)),
        confidence=confidence,
        n_positive=m,
        n_negative=n,
    )


def _tables(n11, n10, n01, n00) -> np.ndarray:
    """The cells as one float64 array of shape (4, ...)."""
    return np.stack(np.broadcast_arrays(*(np.asarray(n, dtype=np.float64) for n in (n11, n10, n01, n00))))


def _o_log_o_over_e(n11, n10, n01, n00) -> tuple[np.ndarray, np.ndarray]:
    """``sum O ln(O / E)`` over the four cells (0 ln 0 = 0), and the table totals."""
    observed = _tables(n11, n10, n01, n00)
    present, absent = observed[0] + observed[1], observed[2] + observed[3]
    in_class, out_class = observed[0] + observed[2], observed[1] + observed[3]
    total = present + absent
    with np.errstate(invalid="ignore", divide="ignore"):
        expected = np.stack([present * in_class, present * out_class, absent * in_class, absent * out_class]) / total
        terms = np.where(observed > 0, xlogy(observed, observed / expected), 0.0)
    return terms.sum(axis=0), total


def pearson_chi2(n11, n10, n01, n00) -> np.ndarray:
    """Pearson's chi-square of each 2x2 table, without Yates' correction.

    Uses the closed form ``N (n11 n00 - n10 n01)^2 / (row1 row2 col1 col2)``,
    exact for integer counts up to 2**53 before the division.

    Examples
    --------
    >>> round(float(pearson_chi2(49, 27652, 141, 774106)), 1)  # Manning et al. 2008, 13.5.2
    284.3
    """
    a, b, c, d = _tables(n11, n10, n01, n00)
    margins = (a + b) * (c + d) * (a + c) * (b + d)
    with np.errstate(invalid="ignore", divide="ignore"):
        chi2 = (a + b + c + d) * (a * d - b * c) ** 2 / margins
    return np.where(margins > 0, chi2, 0.0)[()]


def dunning_g2(n11, n10, n01, n00) -> np.ndarray:
    """Dunning's log-likelihood ratio ``G2 = 2 sum O ln(O / E)`` of each 2x2 table.

    Examples
    --------
    >>> round(float(dunning_g2(49, 27652, 141, 774106)), 2)
    122.89
    """
    sums, _ = _o_log_o_over_e(n11, n10, n01, n00)
    return (2.0 * sums)[()]


def mutual_information(n11, n10, n01, n00, base: float = 2.0) -> np.ndarray:
    """Mutual information of token and class for each 2x2 table (bits by default).

    ``I = sum (O / N) log(O / E)``, which equals ``G2 / (2 N)`` in nats.

    Examples
    --------
    >>> round(float(mutual_information(49, 27652, 141, 774106)), 7)  # Manning et al. 2008, 13.5.1
    0.0001105
    """
    sums, total = _o_log_o_over_e(n11, n10, n01, n00)
    with np.errstate(invalid="ignore", divide="ignore"):
        mi = sums / total / np.log(base)
    return np.where(total > 0, mi, 0.0)[()]


@dataclass(frozen=True)
class McNemarTest:
    """McNemar's test on paired decisions (McNemar 1947, "Note on the sampling error of the
    difference between correlated proportions or percentages", Psychometrika 12(2)).

    ``b`` counts the messages the first model decided rightly and the second
    wrongly, ``c`` the reverse; the messages both got right or both wrong say
    nothing about which is better. ``exact_p`` is the two-sided binomial test of
    ``b`` in ``b + c`` trials at 1/2 (what ``scipy.stats.binomtest(b, b + c, 0.5)``
    gives); ``chi2 = (b - c)^2 / (b + c)`` without continuity correction, with
    ``chi2_p`` from the chi-square distribution with one degree of freedom.
    With ``b + c == 0`` both p-values are 1 and ``chi2`` is 0.
    """

    b: int
    c: int
    exact_p: float
    chi2: float
    chi2_p: float


def mcnemar(b: int, c: int) -> McNemarTest:
    """McNemar's test from the two discordant counts (see :class:`McNemarTest`)."""
    from scipy.stats import binom, chi2

    b, c = int(b), int(c)
    n = b + c
    if n == 0:
        return McNemarTest(b, c, 1.0, 0.0, 1.0)
    # At p = 1/2 the binomial is symmetric, so the two-sided p-value is twice the smaller tail.
    exact = min(1.0, 2.0 * float(binom.cdf(min(b, c), n, 0.5)))
    statistic = (b - c) ** 2 / n
    return McNemarTest(b, c, exact, float(statistic), float(chi2.sf(statistic, 1)))
