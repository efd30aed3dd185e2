"""Flag drivers: which tokens carried the flags over many messages.

Over every flagged message (decided as a class other than the normal class)
and per flagged class ``d`` and token ``j`` it counts:

- ``messages``: flagged messages in which ``j`` appears;
- ``total_evidence``: the sum of its *flag evidence*
  ``x_j (W[d, j] - W[normal, j])``, what the token adds to the log-odds of
  the decided class against the normal class (for two classes, the evidence
  of ``why``); ``mean_evidence = total_evidence / messages``;
- ``tipped``: flagged messages in which its flag evidence exceeds the
  message's margin (glossary: positive on the flagged side), so that this
  token alone carried the message over the decision boundary. With two
  classes and count or presence features, removing the token alone lets the
  message through; for TF-IDF the other weights are not re-normalised.

Totals are additive over chunks (:meth:`FlagDrivers.plus`), so memory stays
(classes x vocabulary) however many messages pass.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from explain.errors import NbledgerError
from explain.model.decision import DecisionRule
from explain.model.model_view import ModelView


def flag_margin(rule: DecisionRule, jll: np.ndarray) -> np.ndarray:
    """The glossary's margin per row of ``jll`` (n, C): positive on the flagged side.

    With a threshold: ``flag_log_odds - threshold_log_odds``; with the most
    probable class deciding: ``jll[strongest flagged] - jll[normal]``.
    """
    if rule.threshold is not None:
        return rule.flag_log_odds(jll) - rule.threshold_log_odds
    return jll[:, rule.flagged_indices].max(axis=1) - jll[:, rule.normal_index]


@dataclass(frozen=True, eq=False)
class FlagDrivers:
    """Flag-driver totals; arrays (C, F) indexed by decided class and token column.

    Rows of the normal class stay zero. ``flagged`` (C,) counts flagged
    messages per decided class; ``per_occurrence`` (C, F) is what the filter
    learned, ``W[c, j] - W[normal, j]``, to set beside this traffic's figures.
    """

    classes: np.ndarray
    tokens: np.ndarray
    normal_index: int
    messages: np.ndarray
    total_evidence: np.ndarray
    tipped: np.ndarray
    flagged: np.ndarray
    per_occurrence: np.ndarray

    def plus(self, other: "FlagDrivers") -> "FlagDrivers":
        """Totals over both sets of messages."""
        return FlagDrivers(
            self.classes, self.tokens, self.normal_index,
            self.messages + other.messages,
            self.total_evidence + other.total_evidence,
            self.tipped + other.tipped,
            self.flagged + other.flagged,
            self.per_occurrence,
        )

    def rows(self) -> list[dict]:
        """One dict per (flagged class, token) that appeared in a flagged message.

        Sorted by flagged class (model order), then total evidence, largest first.
        """
        out = []
        for c in range(len(self.classes)):
            cols = np.flatnonzero(self.messages[c])
            cols = cols[np.argsort(-self.total_evidence[c, cols], kind="stable")]
            for j in cols:
                n = int(self.messages[c, j])
                out.append({
                    "flagged_class": str(self.classes[c]),
                    "token": str(self.tokens[j]),
                    "messages": n,
                    "share_of_flagged": n / int(self.flagged[c]),
                    "total_evidence": float(self.total_evidence[c, j]),
                    "mean_evidence": float(self.total_evidence[c, j]) / n,
                    "tipped": int(self.tipped[c, j]),
                    "per_occurrence": float(self.per_occurrence[c, j]),
                })
        return out


def empty_drivers(view: ModelView, rule: DecisionRule) -> FlagDrivers:
    """Zero totals for ``view`` (a start for :meth:`FlagDrivers.plus`)."""
    if rule.normal_index is None:
        raise NbledgerError("flag drivers need a normal class: name it with --normal-class")
    C, F = view.weights.shape
    return FlagDrivers(
        view.classes, view.tokens, rule.normal_index,
        np.zeros((C, F), dtype=np.int64), np.zeros((C, F)), np.zeros((C, F), dtype=np.int64),
        np.zeros(C, dtype=np.int64), view.weights - view.weights[rule.normal_index],
    )


def chunk_drivers(view: ModelView, rule: DecisionRule, X: sp.csr_matrix, jll: np.ndarray, decision: np.ndarray) -> FlagDrivers:
    """Flag-driver totals of one chunk.

    ``X`` (n, F) is the prepared feature matrix (:meth:`ModelView.prepare`),
    ``jll`` (n, C) its joint log-likelihoods, ``decision`` (n,) the decided
    class indices.
    """
    start = empty_drivers(view, rule)
    C, F = view.weights.shape
    flagged = np.flatnonzero(decision != rule.normal_index)
    sub = X[flagged]
    decided = decision[flagged]
    rows = np.repeat(np.arange(len(flagged)), np.diff(sub.indptr))
    evidence = sub.data * start.per_occurrence[decided[rows], sub.indices]
    tipped = evidence > flag_margin(rule, jll[flagged])[rows]
    cell = decided[rows] * F + sub.indices
    return FlagDrivers(
        view.classes, view.tokens, rule.normal_index,
        np.bincount(cell, minlength=C * F).reshape(C, F),
        np.bincount(cell, weights=evidence, minlength=C * F).reshape(C, F),
        np.bincount(cell, weights=tipped, minlength=C * F).astype(np.int64).reshape(C, F),
        np.bincount(decided, minlength=C),
        start.per_occurrence,
    )
