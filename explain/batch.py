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

from explain.decision import DecisionRule
from explain.model_view import ModelView


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


def _top_k_per_row(X: sp.csr_matrix, values: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Columns and values of the k largest positive ``values`` per CSR row."""
    n = X.shape[0]
    cols = np.full((n, k), -1, dtype=np.int64)
    vals = np.zeros((n, k))
    if k == 0 or values.size == 0:
        return cols, vals
    rows = np.repeat(np.arange(n), np.diff(X.indptr))
    keep = values > 0
    rows, col_idx, v = rows[keep], X.indices[keep], values[keep]
    order = np.lexsort((col_idx, -v, rows))
    rows, col_idx, v = rows[order], col_idx[order], v[order]
    first = np.searchsorted(rows, rows, side="left")
    rank = np.arange(len(rows)) - first
    take = rank < k
    cols[rows[take], rank[take]] = col_idx[take]
    vals[rows[take], rank[take]] = v[take]
    return cols, vals


def batch_evidence(view: ModelView, X, rule: DecisionRule, top_k: int = 5) -> BatchEvidence:
    """Score a feature matrix (the vectorizer's output) and rank its evidence."""
    X = view.prepare(X)
    X.sort_indices()
    jll = view.joint_log_likelihood(X)
    probabilities = view.posterior(jll)
    predicted, runner_up = top_two(jll)
    rows = np.repeat(np.arange(X.shape[0]), np.diff(X.indptr))
    delta = view.weights[predicted[rows], X.indices] - view.weights[runner_up[rows], X.indices]
    evidence = X.data * delta
    top_for, top_for_ev = _top_k_per_row(X, evidence, top_k)
    top_against, top_against_ev = _top_k_per_row(X, -evidence, top_k)
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
        top_against_evidence=-top_against_ev,
    )


def score_texts(model, texts, threshold: float | None = None, top_k: int = 5) -> BatchEvidence:
    """Featurise ``texts`` with the model's own text steps, then :func:`batch_evidence`."""
    rule = DecisionRule.for_view(model.view, threshold)
    return batch_evidence(model.view, model.featurizer.transform(texts), rule, top_k)
