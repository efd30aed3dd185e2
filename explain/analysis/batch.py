"""Evidence for many messages at once, vectorised over a sparse matrix.

For each message: joint log-likelihoods, probabilities, the predicted class
and the runner-up, their log-odds, the decision under a :class:`DecisionRule`,
and the ``k`` tokens with the strongest evidence for and against the
predicted class (``x_j * (W[predicted, j] - W[runner_up, j])``). There is no
Python loop per message: ranking within rows is one sort over all non-zeros.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from explain.model.decision import DecisionRule
from explain.model.model_view import ModelView


@dataclass(frozen=True, eq=False)
class BatchEvidence:
    """Scores and strongest evidence of ``n`` messages (arrays of length n).

    ``top_for``/``top_against`` hold feature columns (-1 where a message has
    fewer than k tokens of that sign) and ``top_for_evidence``/
    ``top_against_evidence`` their evidence (0 where the column is -1).
    ``flag_log_odds`` is ``log P(not normal) - log P(normal)``, or None when
    the model has no normal class.
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
    top_for: np.ndarray
    top_for_evidence: np.ndarray
    top_against: np.ndarray
    top_against_evidence: np.ndarray

    def __len__(self) -> int:
        return len(self.predicted)

    def top_tokens(self, i: int, side: str = "for") -> list[tuple[str, float]]:
        """(token, evidence) pairs of message ``i``, strongest first."""
        cols = self.top_for[i] if side == "for" else self.top_against[i]
        vals = self.top_for_evidence[i] if side == "for" else self.top_against_evidence[i]
        return [(str(self.tokens[c]), float(v)) for c, v in zip(cols, vals) if c >= 0]


def top_two(jll: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Indices of the best and second-best class per row (argmax tie rule)."""
    predicted = np.argmax(jll, axis=1)
    if jll.shape[1] == 1:
        return predicted, predicted
    masked = jll.copy()
    masked[np.arange(len(jll)), predicted] = -np.inf
    return predicted, np.argmax(masked, axis=1)


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


def top_k_per_row(X: sp.csr_matrix, values: np.ndarray, k: int):
    """Columns and values of the k largest positive and k most negative ``values`` per CSR row.

    One sort over all non-zeros (:func:`by_row_then_value`); returns (for_cols, for_vals,
    against_cols, against_vals), each (n, k), columns -1 where there are fewer.
    """
    n = X.shape[0]
    out = [np.full((n, k), -1, dtype=np.int64), np.zeros((n, k)), np.full((n, k), -1, dtype=np.int64), np.zeros((n, k))]
    if k == 0 or values.size == 0:
        return tuple(out)
    rows = np.repeat(np.arange(n), np.diff(X.indptr))
    order = by_row_then_value(rows, values)
    v, cols = values[order], X.indices[order]
    position = np.arange(len(v))
    from_start = position - X.indptr[rows]
    from_end = X.indptr[rows + 1] - 1 - position
    take = (from_start < k) & (v > 0)
    out[0][rows[take], from_start[take]] = cols[take]
    out[1][rows[take], from_start[take]] = v[take]
    take = (from_end < k) & (v < 0)
    out[2][rows[take], from_end[take]] = cols[take]
    out[3][rows[take], from_end[take]] = v[take]
    return tuple(out)


def evidence_matrix(view: ModelView, X: sp.csr_matrix, winner: np.ndarray, rival: np.ndarray) -> sp.csr_matrix:
    """Every token's evidence ``x_ij (W[winner_i, j] - W[rival_i, j])``, as a CSR matrix.

    ``X`` must be prepared (:meth:`ModelView.prepare`); the result has the
    same sparsity pattern, so row ``i`` sums to ``jll[i, winner] - jll[i, rival]``
    minus the baseline difference.
    """
    rows = np.repeat(np.arange(X.shape[0]), np.diff(X.indptr))
    delta = view.weights[winner[rows], X.indices] - view.weights[rival[rows], X.indices]
    return sp.csr_matrix((X.data * delta, X.indices.copy(), X.indptr.copy()), shape=X.shape)


def batch_evidence(view: ModelView, X, rule: DecisionRule, top_k: int = 5) -> BatchEvidence:
    """Score a feature matrix (the vectorizer's output) and rank its evidence."""
    X = view.prepare(X)
    X.sort_indices()
    jll = view.joint_log_likelihood(X)
    probabilities = view.posterior(jll)
    predicted, runner_up = top_two(jll)
    evidence = evidence_matrix(view, X, predicted, runner_up).data
    top_for, top_for_ev, top_against, top_against_ev = top_k_per_row(X, evidence, top_k)
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
