"""The k strongest entries per row, found by selection rounds, against a plain per-row stable sort.

Reference: for each row, Python's ``sorted`` (stable) by descending value for
the positive side and by ascending value, read from the end of a descending
stable sort, for the negative side; common practice, no source.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from explain.analysis.batch import by_row_then_value, top_k_per_row


def reference(X: sp.csr_matrix, values: np.ndarray, k: int):
    n = X.shape[0]
    out = [np.full((n, k), -1), np.zeros((n, k)), np.full((n, k), -1), np.zeros((n, k))]
    for i in range(n):
        lo, hi = X.indptr[i], X.indptr[i + 1]
        ordered = sorted(range(lo, hi), key=lambda p: -values[p])  # stable: ties keep their order
        positive = [p for p in ordered if values[p] > 0][:k]
        negative = [p for p in reversed(ordered) if values[p] < 0][:k]
        for j, p in enumerate(positive):
            out[0][i, j], out[1][i, j] = X.indices[p], values[p]
        for j, p in enumerate(negative):
            out[2][i, j], out[3][i, j] = X.indices[p], values[p]
    return out


@st.composite
def matrices(draw):
    n = draw(st.integers(1, 12))
    f = draw(st.integers(1, 15))
    dense = np.array(draw(st.lists(st.integers(-3, 3), min_size=n * f, max_size=n * f)), dtype=float).reshape(n, f)
    X = sp.csr_matrix(dense)
    # values with many ties and zeros kept as explicit entries
    values = np.array(draw(st.lists(st.sampled_from([-2.0, -0.5, 0.0, 0.5, 2.0]), min_size=X.nnz, max_size=X.nnz)))
    return X, values, draw(st.integers(0, 6))


@settings(max_examples=200, deadline=None)
@given(matrices())
def test_top_k_per_row_matches_a_stable_sort_of_each_row(case):
    X, values, k = case
    got = top_k_per_row(X, values, k)
    for ours, theirs in zip(got, reference(X, values, k)):
        assert np.array_equal(ours, theirs)


@settings(max_examples=100, deadline=None)
@given(matrices())
def test_by_row_then_value_matches_a_stable_sort_of_each_row(case):
    X, values, _ = case
    rows = np.repeat(np.arange(X.shape[0]), np.diff(X.indptr))
    expected = [p for i in range(X.shape[0])
                for p in sorted(range(X.indptr[i], X.indptr[i + 1]), key=lambda p: -values[p])]
    assert by_row_then_value(rows, values).tolist() == expected
