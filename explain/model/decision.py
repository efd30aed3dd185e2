"""How scores become a decision: argmax, or a threshold on "not normal".

A filter has one *normal* class (``ok``, ``ham``) that lets a message through.
With a threshold ``t`` a message is flagged when the probability that it is
*not* normal is at least ``t``; it then goes to the most probable flagged
class. Without a threshold the decision is the most probable class, exactly
as scikit-learn's ``predict`` (ties go to the first class).

Working on the log-odds scale keeps extreme probabilities exact:
``P(not normal) >= t``  <=>  ``log P(not normal) - log P(normal) >= logit(t)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import expit, logit, logsumexp

from explain.errors import NbledgerError


@dataclass(frozen=True)
class DecisionRule:
    """Argmax, or a threshold on the probability of not-normal.

    Attributes
    ----------
    n_classes : int
    normal_index : int or None
        Column of the normal class. Needed for a threshold; for two classes
        without a named normal class the first class is taken as normal
        (scikit-learn's convention makes the second class "positive").
    threshold : float or None
        Probability of not-normal at or above which a message is flagged;
        None means argmax.
    log_odds : float or None
        The same threshold as log-odds, given exactly instead of
        ``threshold`` (which then becomes ``expit(log_odds)``, for display).
        Decisions always compare log-odds with ``threshold_log_odds``, so a
        threshold printed as log-odds and typed back flags the same messages.
    """

    n_classes: int
    normal_index: int | None = None
    threshold: float | None = None
    log_odds: float | None = None

    def __post_init__(self):
        if self.threshold is not None and self.log_odds is not None:
            raise NbledgerError("give the threshold as a probability or as log-odds, not both")
        if self.log_odds is not None:
            if np.isnan(self.log_odds):
                raise NbledgerError("the threshold log-odds must be a number, got nan")
            object.__setattr__(self, "threshold", float(expit(self.log_odds)))
        elif self.threshold is not None:
            if not 0.0 <= self.threshold <= 1.0 or np.isnan(self.threshold):
                raise NbledgerError(f"threshold must be a probability in [0, 1], got {self.threshold}")
            object.__setattr__(self, "log_odds", float(logit(self.threshold)))
        if self.threshold is not None:
            if self.normal_index is None:
                raise NbledgerError(
                    "a threshold needs a normal class: name it with --normal-class"
                )

    @classmethod
    def for_view(cls, view, threshold: float | None = None, log_odds: float | None = None) -> "DecisionRule":
        normal = view.normal_index
        if normal is None and view.n_classes == 2:
            normal = 0
        return cls(view.n_classes, normal, threshold, log_odds)

    @property
    def flagged_indices(self) -> np.ndarray:
        return np.array([c for c in range(self.n_classes) if c != self.normal_index], dtype=int)

    @property
    def threshold_log_odds(self) -> float | None:
        return self.log_odds

    def flag_log_odds(self, jll: np.ndarray) -> np.ndarray:
        """``log P(not normal) - log P(normal)`` per row; needs a normal class."""
        if self.normal_index is None:
            raise NbledgerError("flagging needs a normal class: name it with --normal-class")
        jll = np.atleast_2d(jll)
        others = logsumexp(jll[:, self.flagged_indices], axis=1)
        return others - jll[:, self.normal_index]

    def decide(self, jll: np.ndarray) -> np.ndarray:
        """Decided class index per row of joint log-likelihoods, shape (n,)."""
        jll = np.atleast_2d(jll)
        if self.threshold is None:
            return np.argmax(jll, axis=1)
        flagged = self.flag_log_odds(jll) >= self.threshold_log_odds
        best_flagged = self.flagged_indices[np.argmax(jll[:, self.flagged_indices], axis=1)]
        return np.where(flagged, best_flagged, self.normal_index)

    @property
    def additive(self) -> bool:
        """True when the decision depends on sums of per-token terms only.

        Argmax compares classes pairwise (additive); a threshold with two
        classes compares one difference with a constant (additive); a
        threshold over several flagged classes sums probabilities (not).
        """
        return self.threshold is None or self.n_classes == 2
