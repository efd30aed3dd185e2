"""Wilson score intervals and DeLong's AUC variance (explain.analysis.stats)."""

import numpy as np
import pytest
import scipy
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import binomtest
from sklearn.metrics import roc_auc_score

from explain.analysis.stats import delong_auc, wilson_interval


# Newcombe (1998), Statistics in Medicine 17(8), Table I, method 3 (score
# interval without continuity correction). The values were recalled from the
# table; each is confirmed here by a reference library, statsmodels'
# proportion_confint(method="wilson"), so that a misremembered digit fails.
@pytest.mark.parametrize(
    "k, n, low, high",
    [
        (81, 263, 0.2553, 0.3662),
        (15, 148, 0.0624, 0.1605),
        (0, 20, 0.0, 0.1611),
        (1, 29, 0.0061, 0.1718),
    ],
)
def test_wilson_matches_newcombe_worked_examples(k, n, low, high):
    from statsmodels.stats.proportion import proportion_confint

    ref_lo, ref_hi = proportion_confint(k, n, alpha=0.05, method="wilson")
    assert (round(float(ref_lo), 4), round(float(ref_hi), 4)) == (low, high)
    lo, hi = wilson_interval(k, n)
    assert round(float(lo), 4) == low
    assert round(float(hi), 4) == high


@settings(max_examples=300, deadline=None)
@given(
    n=st.integers(1, 10**6),
    frac=st.floats(0, 1),
    confidence=st.floats(0.5, 0.999),
)
def test_wilson_matches_scipy_binomtest(n, frac, confidence):
    # scipy.stats.binomtest(...).proportion_ci(method="wilson"), scipy as installed
    k = int(round(frac * n))
    expected = binomtest(k, n).proportion_ci(confidence_level=confidence, method="wilson")
    lo, hi = wilson_interval(k, n, confidence)
    assert lo == pytest.approx(expected.low, abs=1e-12)
    assert hi == pytest.approx(expected.high, abs=1e-12)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 500), st.integers(0, 500)), min_size=1, max_size=30))
def test_wilson_vectorised_equals_elementwise(pairs):
    k = np.array([min(a, b) for a, b in pairs])
    n = np.array([max(a, b) for a, b in pairs])
    lo, hi = wilson_interval(k, n)
    for i in range(len(k)):
        one_lo, one_hi = wilson_interval(int(k[i]), int(n[i]))
        np.testing.assert_equal([lo[i], hi[i]], [one_lo, one_hi])
    # the interval holds the estimate and stays inside [0, 1]; empty trials give NaN
    filled = n > 0
    p = k[filled] / n[filled]
    assert np.all((lo[filled] <= p) & (p <= hi[filled]))
    assert np.all((lo[filled] >= 0) & (hi[filled] <= 1))
    assert np.all(np.isnan(lo[~filled]) & np.isnan(hi[~filled]))


@given(k=st.integers(0, 200), extra=st.integers(0, 200))
def test_wilson_widens_with_confidence(k, extra):
    n = k + extra
    if n == 0:
        return
    lo90, hi90 = wilson_interval(k, n, 0.90)
    lo99, hi99 = wilson_interval(k, n, 0.99)
    assert lo99 <= lo90 and hi90 <= hi99


def delong_direct(scores, positive):
    """DeLong, DeLong & Clarke-Pearson (1988), Biometrics 44(3), section 3.

    The structural components straight from the definition, O(m n):
    psi(X, Y) = 1 if Y < X, 1/2 if Y = X, 0 if Y > X;
    V10(X_i) = mean_j psi(X_i, Y_j); V01(Y_j) = mean_i psi(X_i, Y_j);
    S10 = sum (V10 - A)^2 / (m - 1); S01 likewise; var(A) = S10/m + S01/n.
    """
    x = [s for s, p in zip(scores, positive) if p]
    y = [s for s, p in zip(scores, positive) if not p]
    psi = [[1.0 if yj < xi else 0.5 if yj == xi else 0.0 for yj in y] for xi in x]
    m, n = len(x), len(y)
    v10 = [sum(row) / n for row in psi]
    v01 = [sum(psi[i][j] for i in range(m)) / m for j in range(n)]
    auc = sum(v10) / m
    s10 = sum((v - auc) ** 2 for v in v10) / (m - 1)
    s01 = sum((v - auc) ** 2 for v in v01) / (n - 1)
    return auc, s10 / m + s01 / n


scored = st.lists(
    st.tuples(st.integers(-6, 6).map(lambda v: v / 2), st.booleans()), min_size=4, max_size=60
).filter(lambda rows: 2 <= sum(p for _, p in rows) <= len(rows) - 2)


@settings(max_examples=300, deadline=None)
@given(scored)
def test_delong_fast_equals_direct_1988_formulas(rows):
    # integer halves make ties common, which is where mid-ranks matter
    scores = [s for s, _ in rows]
    positive = [p for _, p in rows]
    auc, variance = delong_direct(scores, positive)
    est = delong_auc(scores, positive)
    assert est.auc == pytest.approx(auc, abs=1e-12)
    assert est.variance == pytest.approx(variance, rel=1e-9, abs=1e-15)


@settings(max_examples=200, deadline=None)
@given(scored, st.floats(0.5, 0.999))
def test_delong_auc_matches_sklearn_and_interval_is_ordered(rows, confidence):
    # scikit-learn roc_auc_score (trapezoidal area), version as installed
    scores = np.array([s for s, _ in rows])
    positive = np.array([p for _, p in rows])
    est = delong_auc(scores, positive, confidence)
    assert est.auc == pytest.approx(roc_auc_score(positive, scores), abs=1e-12)
    assert 0.0 <= est.low <= est.auc <= est.high <= 1.0
    half = float(scipy.special.ndtri(0.5 + confidence / 2) * np.sqrt(est.variance))
    if 0 < est.auc - half and est.auc + half < 1:
        assert est.high - est.low == pytest.approx(2 * half)


def test_delong_random_scores_give_auc_near_one_half():
    # common practice, no source: scores unrelated to the truth rank no better than chance
    rng = np.random.default_rng(4)
    positive = rng.random(4000) < 0.3
    est = delong_auc(rng.normal(size=4000), positive)
    assert est.low < 0.5 < est.high
    assert est.high - est.low < 0.08


def test_delong_needs_both_classes():
    with pytest.raises(ValueError, match="both positive and negative"):
        delong_auc([0.1, 0.2], [True, True])


def test_delong_variance_undefined_with_one_positive():
    est = delong_auc([0.1, 0.2, 0.3], [False, True, False])
    assert est.auc == 0.5
    assert np.isnan(est.variance) and np.isnan(est.low) and np.isnan(est.high)


def test_delong_interval_covers_chance_about_as_often_as_stated():
    # common practice, no source: a 95 % interval for scores unrelated to the
    # truth should cover 0.5 in about 95 % of repeated samples
    rng = np.random.default_rng(11)
    covered = 0
    for _ in range(600):
        positive = rng.random(150) < 0.4
        if positive.sum() < 2 or (~positive).sum() < 2:
            continue
        est = delong_auc(rng.normal(size=150), positive)
        covered += est.low <= 0.5 <= est.high
    assert 0.92 * 600 <= covered <= 0.98 * 600
