"""Association statistics of 2x2 tables (explain.analysis.stats: pearson_chi2, dunning_g2, mutual_information)."""

import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy.stats import chi2_contingency
from sklearn.metrics import mutual_info_score

from explain.analysis.stats import dunning_g2, mutual_information, pearson_chi2

cell = st.integers(0, 10**6)
tables = st.tuples(cell, cell, cell, cell)


def _has_empty_margin(n11, n10, n01, n00):
    return 0 in (n11 + n10, n01 + n00, n11 + n01, n10 + n00)


# Manning, Raghavan & Schuetze, Introduction to Information Retrieval (2008),
# section 13.5, worked examples for term "export" and class "poultry"
# (values recalled from the book): MI about 0.0001105 bits, chi-square about 284;
# both confirmed below by reference libraries (scikit-learn's mutual_info_score
# on the contingency table, scipy's chi2_contingency without correction).
EXPORT_POULTRY = (49, 27_652, 141, 774_106)


def test_the_recalled_export_poultry_values_match_reference_libraries():
    import math

    from sklearn.metrics import mutual_info_score

    n11, n10, n01, n00 = EXPORT_POULTRY
    table = np.array([[n11, n10], [n01, n00]])
    assert mutual_info_score(None, None, contingency=table) / math.log(2) == pytest.approx(0.0001105, abs=5e-8)
    assert chi2_contingency(table, correction=False).statistic == pytest.approx(284, abs=0.5)


def test_mutual_information_matches_manning_export_poultry():
    assert mutual_information(*EXPORT_POULTRY) == pytest.approx(0.0001105, abs=5e-8)


def test_chi2_matches_manning_export_poultry():
    assert pearson_chi2(*EXPORT_POULTRY) == pytest.approx(284, abs=0.5)


@settings(max_examples=400, deadline=None)
@given(tables)
def test_chi2_matches_scipy_chi2_contingency(table):
    # scipy.stats.chi2_contingency(correction=False), scipy >= 1.11 (as installed)
    assume(not _has_empty_margin(*table))
    expected = chi2_contingency(np.reshape(table, (2, 2)), correction=False).statistic
    assert pearson_chi2(*table) == pytest.approx(expected, rel=1e-9, abs=1e-9)


@settings(max_examples=400, deadline=None)
@given(tables)
def test_g2_matches_scipy_log_likelihood(table):
    # scipy.stats.chi2_contingency(correction=False, lambda_="log-likelihood"), scipy >= 1.11
    assume(not _has_empty_margin(*table))
    expected = chi2_contingency(np.reshape(table, (2, 2)), correction=False, lambda_="log-likelihood").statistic
    assert dunning_g2(*table) == pytest.approx(expected, rel=1e-8, abs=1e-8)


@settings(max_examples=400, deadline=None)
@given(tables)
def test_mutual_information_matches_sklearn(table):
    # sklearn.metrics.mutual_info_score(contingency=...) is in nats; scikit-learn >= 1.5
    assume(sum(table) > 0)
    nats = mutual_info_score(None, None, contingency=np.reshape(table, (2, 2)))
    assert mutual_information(*table, base=math.e) == pytest.approx(nats, rel=1e-8, abs=1e-12)
    assert mutual_information(*table) == pytest.approx(nats / math.log(2), rel=1e-8, abs=1e-12)


@settings(max_examples=100, deadline=None)
@given(st.lists(tables, min_size=1, max_size=50))
def test_vectorised_equals_one_table_at_a_time(rows):
    cells = np.array(rows).T
    for statistic in (pearson_chi2, dunning_g2, mutual_information):
        together = statistic(*cells)
        assert together.shape == (len(rows),)
        singly = [float(statistic(*row)) for row in rows]
        np.testing.assert_allclose(together, singly, rtol=1e-12, atol=0)


@settings(max_examples=200, deadline=None)
@given(tables)
def test_g2_is_twice_n_times_mutual_information_in_nats(table):
    # Identity G2 = 2 N I (I in nats); common practice, no source
    n = sum(table)
    assert dunning_g2(*table) == pytest.approx(2 * n * mutual_information(*table, base=math.e), rel=1e-9, abs=1e-9)


@settings(max_examples=200, deadline=None)
@given(st.integers(0, 10**6), st.integers(0, 10**6), st.sampled_from(["row", "column"]))
def test_empty_margin_gives_zero_not_nan(x, y, which):
    # A token never present (or a class never seen) carries no association.
    table = (0, 0, x, y) if which == "row" else (0, x, 0, y)
    for statistic in (pearson_chi2, dunning_g2, mutual_information):
        assert statistic(*table) == 0.0


@settings(max_examples=200, deadline=None)
@given(tables)
def test_statistics_are_symmetric_in_token_and_class(table):
    # Transposing the table (swapping the roles of token and class) changes nothing.
    n11, n10, n01, n00 = table
    for statistic in (pearson_chi2, dunning_g2, mutual_information):
        assert statistic(n11, n01, n10, n00) == pytest.approx(statistic(*table), rel=1e-9, abs=1e-12)


@settings(max_examples=200, deadline=None)
@given(st.integers(1, 1000), st.integers(1, 1000), st.integers(1, 50))
def test_independent_tables_score_zero(row, col, k):
    # Cells proportional to the product of margins: no association.
    table = (row * col * k, row * k, col * k, k)
    assert pearson_chi2(*table) == pytest.approx(0.0, abs=1e-6)
    assert dunning_g2(*table) == pytest.approx(0.0, abs=1e-6)
