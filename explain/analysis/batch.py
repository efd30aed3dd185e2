"""Evidence for many messages at once, vectorised over a sparse matrix.

For each message: joint log-likelihoods, probabilities, the predicted class
and the runner-up, their log-odds, the decision under a :class:`DecisionRule`,
the ledger's comparison (:meth:`DecisionRule.sides`: the credit and debit
class, as ``why``'s ledger tells the message) and the ``k`` tokens with the
largest entries toward each side (``x_j * (W[credit, j] - W[debit, j])``).
There is no Python loop per message: ranking within rows is one sort over all
non-zeros.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from explain.model.decision import DecisionRule, top_two
from explain.model.model_view import ModelView


@dataclass(frozen=True, eq=False)
class BatchEvidence:
    """Scores and strongest evidence of ``n`` messages (arrays of length n).

    ``credit``/``debit`` (n,) are the ledger's two classes per message
    (:meth:`DecisionRule.sides`). ``top_for``/``top_against`` hold feature
    columns of the tokens with the largest entries toward the credit and the
    debit class (-1 where a message has fewer than k tokens of that sign) and
    ``top_for_evidence``/``top_against_evidence`` their entries, the ledger's
    amounts (0 where the column is -1). ``flag_log_odds`` is ``log P(not
    normal) - log P(normal)``, or None when the model has no normal class.
    """

    classes: np.ndarray
    tokens: np.ndarray
    jll: np.ndarray
    probabilities: np.ndarray
    predicted: np.ndarray
    runner_up: np.ndarray
    log_odds: np.ndarray
    decision: np.ndarray
    flag_log_odds: np.ndarray | None
    threshold: float | None
    normal_index: int | None
    credit: np.ndarray
    debit: np.ndarray
    top_for: np.ndarray
    top_for_evidence: np.ndarray
    top_against: np.ndarray
    top_against_evidence: np.ndarray

    def __len__(self) -> int:
        return len(self.predicted)


def by_row_then_value(rows: np.ndarray, values: np.ndarray, non_negative: bool = False) -> np.ndarray:
    """Indices of ``values`` grouped by ``rows`` (ascending), largest value first within a row.

    Ties keep their original order, as ``np.argsort(-values, kind="stable")``
    within each row would; ``non_negative`` keeps only values >= 0. A stable
    sort of floats is several times slower than numpy's quicksort, so the
    values are ranked with a quicksort (equal values share a rank) and the
    order is one quicksort of unique integer keys (row, rank, position).
    """
    order = np.flatnonzero(values >= 0) if non_negative else np.arange(len(values))
    m = len(order)
    if m == 0:
        return order
    v, r = values[order], rows[order].astype(np.int64)
    by_value = np.argsort(-v)
    ranked = v[by_value]
    rank = np.empty(m, dtype=np.int64)
    rank[by_value] = np.concatenate(([0], np.cumsum(ranked[1:] != ranked[:-1])))
    distinct = int(rank.max()) + 1
    if (int(r.max()) + 1) * distinct * m < 2**62:
        return order[np.argsort((r * distinct + rank) * m + np.arange(m))]
    return order[np.lexsort((rank, r))]  # keys too wide for int64: the slower stable sort


def _row_extremes(indptr: np.ndarray, rows: np.ndarray, scores: np.ndarray, k: int, last: bool):
    """Positions of the ``k`` largest finite ``scores`` of each CSR row, one selection round per place.

    Round ``j`` takes each row's maximum (``np.maximum.reduceat``, one pass)
    and the first position holding it (``last``: the last one), then sets it
    to -inf: the order a stable sort by descending score gives (``last``: by
    ascending score, read from its end). Rows with fewer finite scores stop
    early. Returns ``(rows, positions)`` per round.
    """
    nonempty = np.flatnonzero(np.diff(indptr) > 0)
    starts = indptr[nonempty]
    best = np.full(len(indptr) - 1, -np.inf)
    rounds = []
    for _ in range(k):
        best[nonempty] = np.maximum.reduceat(scores, starts)
        hit = np.flatnonzero((scores == best[rows]) & (scores > -np.inf))
        if len(hit) == 0:
            break
        r = rows[hit]
        change = r[1:] != r[:-1]
        keep = np.concatenate((change, [True])) if last else np.concatenate(([True], change))
        pos = hit[keep]
        rounds.append((r[keep], pos))
        scores[pos] = -np.inf
    return rounds


def top_k_per_row(X: sp.csr_matrix, values: np.ndarray, k: int, rows: np.ndarray | None = None):
    """Columns and values of the k largest positive and k most negative ``values`` per CSR row.

    Within a row, equal values keep the order a stable sort by value would give
    them (:func:`by_row_then_value`): the first of equal positive values comes
    first, the last of equal negative values. ``k`` selection rounds over the
    non-zeros (:func:`_row_extremes`) instead of sorting them all: only the k
    strongest of each row are ever wanted. Returns (for_cols, for_vals,
    against_cols, against_vals), each (n, k), columns -1 where there are fewer.
    """
    n = X.shape[0]
    out = [np.full((n, k), -1, dtype=np.int64), np.zeros((n, k)), np.full((n, k), -1, dtype=np.int64), np.zeros((n, k))]
    if k == 0 or values.size == 0:
        return tuple(out)
    if rows is None:
        rows = np.repeat(np.arange(n), np.diff(X.indptr))
    for side, sign, last in ((0, 1.0, False), (2, -1.0, True)):
        # only the entries of this side take part: the rounds pass over them alone
        at = np.flatnonzero(sign * values > 0)
        if len(at) == 0:
            continue
        side_rows = rows[at]
        side_indptr = np.concatenate(([0], np.cumsum(np.bincount(side_rows, minlength=n))))
        for j, (r, pos) in enumerate(_row_extremes(side_indptr, side_rows, sign * values[at], k, last)):
            out[side][r, j] = X.indices[at[pos]]
            out[side + 1][r, j] = values[at[pos]]
    return tuple(out)


def evidence_values(view: ModelView, X: sp.csr_matrix, winner: np.ndarray, rival: np.ndarray,
                    rows: np.ndarray | None = None) -> np.ndarray:
    """The data of :func:`evidence_matrix`: ``x_ij (W[winner_i, j] - W[rival_i, j])`` in ``X``'s order.

    Each distinct (winner, rival) pair's weight difference is taken once (two
    classes have at most two pairs), then one gather per non-zero.
    """
    if rows is None:
        rows = np.repeat(np.arange(X.shape[0]), np.diff(X.indptr))
    n_classes, n_features = view.weights.shape
    pairs, pair_of_row = np.unique(winner.astype(np.int64) * n_classes + rival, return_inverse=True)
    differences = view.weights[pairs // n_classes] - view.weights[pairs % n_classes]
    delta = differences.ravel()[pair_of_row.ravel()[rows] * n_features + X.indices]
    return X.data * delta


def evidence_matrix(view: ModelView, X: sp.csr_matrix, winner: np.ndarray, rival: np.ndarray) -> sp.csr_matrix:
    """Every token's evidence ``x_ij (W[winner_i, j] - W[rival_i, j])``, as a CSR matrix.

    ``X`` must be prepared (:meth:`ModelView.prepare`); the result has the
    same sparsity pattern, so row ``i`` sums to ``jll[i, winner] - jll[i, rival]``
    minus the baseline difference.
    """
    data = evidence_values(view, X, winner, rival)
    return sp.csr_matrix((data, X.indices.copy(), X.indptr.copy()), shape=X.shape)


def batch_evidence(view: ModelView, X, rule: DecisionRule, top_k: int = 5) -> BatchEvidence:
    """Score a feature matrix (the vectorizer's output) and rank its evidence."""
    X = view.prepare(X)
    X.sort_indices()
    jll = view.joint_log_likelihood(X)
    probabilities = view.posterior(jll)
    predicted, runner_up = top_two(jll)
    credit, debit = rule.sides(jll)
    if top_k > 0:
        rows = np.repeat(np.arange(X.shape[0]), np.diff(X.indptr))
        evidence = evidence_values(view, X, credit, debit, rows)
        top_for, top_for_ev, top_against, top_against_ev = top_k_per_row(X, evidence, top_k, rows)
    else:
        top_for, top_for_ev, top_against, top_against_ev = top_k_per_row(X, np.zeros(0), 0)
    flag = rule.flag_log_odds(jll) if rule.normal_index is not None else None
    return BatchEvidence(
        classes=view.classes,
        tokens=view.tokens,
        jll=jll,
        probabilities=probabilities,
        predicted=predicted,
        runner_up=runner_up,
        log_odds=jll[np.arange(len(jll)), predicted] - jll[np.arange(len(jll)), runner_up],
        decision=rule.decide(jll),
        flag_log_odds=flag,
        threshold=rule.threshold,
        normal_index=rule.normal_index,
        credit=credit,
        debit=debit,
        top_for=top_for,
        top_for_evidence=top_for_ev,
        top_against=top_against,
        top_against_evidence=top_against_ev,
    )


def score_texts(model, texts, threshold: float | None = None, top_k: int = 5) -> BatchEvidence:
    """Featurise ``texts`` with the model's own text steps, then :func:`batch_evidence`."""
    rule = DecisionRule.for_view(model.view, threshold)
    model = model.named_for(texts)
    return batch_evidence(model.view, model.featurizer.transform(texts), rule, top_k)
