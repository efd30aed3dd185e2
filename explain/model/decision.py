"""How scores become a decision: argmax, or a threshold on "not normal".

A filter has one *normal* class (``ok``, ``ham``) that lets a message through.
With a threshold ``t`` a message is flagged when the probability that it is
*not* normal is at least ``t``; it then goes to the most probable flagged
class. Without a threshold the decision is the most probable class, exactly
as scikit-learn's ``predict`` (ties go to the first class).

Working on the log-odds scale keeps extreme probabilities exact:
``P(not normal) >= t``  <=>  ``log P(not normal) - log P(normal) >= logit(t)``.

This module holds the one computation of P(flag) and of the flag log-odds
(:func:`flag_probability`, :meth:`DecisionRule.flag_log_odds`) and the one
check of a threshold (:func:`check_threshold`); every other module calls them.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import expit, logit, logsumexp

from explain.errors import NbledgerError


def flag_probability(flag_log_odds):
    """P(flag) from the flag log-odds: the logistic function, ``scipy.special.expit``.

    The one formula for P(flag): the evidence, the ledger, the batch rows and
    the report all call it, so the same message gets the same bits everywhere.
    ``expit`` neither overflows nor loses the tail (``expit(-800)`` is a
    subnormal, not 0 by an overflow of ``exp(800)``).
    """
    return expit(flag_log_odds)


def check_threshold(threshold: float | None = None, log_odds: float | None = None) -> None:
    """Refuse a threshold that is not a probability in [0, 1] or log-odds that are NaN, or both at once.

    The one check of a threshold: :class:`DecisionRule` runs it, and a command
    may run it before loading a model to fail early with the same words.
    ``threshold`` 0 flags everything, 1 only a message with infinite flag
    log-odds; ``log_odds`` may be infinite for the same two rules.
    """
    if threshold is not None and log_odds is not None:
        raise NbledgerError("give --threshold or --threshold-log-odds, not both")
    if log_odds is not None and np.isnan(log_odds):
        raise NbledgerError("the threshold log-odds must be a number, got nan")
    if threshold is not None and not 0.0 <= threshold <= 1.0:  # also refuses NaN
        raise NbledgerError(f"the threshold must be a probability in [0, 1], got {threshold}")


def top_two(jll: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Indices of the best and second-best class per row (argmax tie rule: the first class wins)."""
    predicted = np.argmax(jll, axis=1)
    if jll.shape[1] == 1:
        return predicted, predicted
    masked = jll.copy()
    masked[np.arange(len(jll)), predicted] = -np.inf
    return predicted, np.argmax(masked, axis=1)


#: What the balance of a ledger compares (glossary: versus), by the rule and the decision.
VERSUS = {
    "flagged-against-normal": "the decided class against the normal class",
    "normal-against-flagged": "the normal class against the strongest flagged class",
    "flag-log-odds": "the flagged classes together against the normal class",
    "predicted-against-runner-up": "the decided class against the runner-up: no normal class is known",
}


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
        check_threshold(self.threshold, self.log_odds)
        if self.log_odds is not None:
            object.__setattr__(self, "threshold", float(flag_probability(self.log_odds)))
        elif self.threshold is not None:
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

    def flag_probability(self, jll: np.ndarray) -> np.ndarray:
        """P(flag) per row of joint log-likelihoods: :func:`flag_probability` of :meth:`flag_log_odds`."""
        return flag_probability(self.flag_log_odds(jll))

    def sides(self, jll: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The ledger's comparison per row: ``(credit, debit)`` class indices, shape (n,) each.

        With the most probable class deciding and a normal class known, a
        flagged message is its decided class against the normal class and a
        message let through the normal class against the strongest flagged
        class; with a threshold the strongest flagged class (one of the
        flagged classes together) against the normal class; without a normal
        class the predicted class against the runner-up. :meth:`versus` names
        the comparison.
        """
        jll = np.atleast_2d(jll)
        if self.normal_index is None:
            return top_two(jll)
        normal = np.full(len(jll), self.normal_index)
        strongest = self.flagged_indices[np.argmax(jll[:, self.flagged_indices], axis=1)]
        if self.threshold is not None:
            return strongest, normal
        # The most probable class: flagged exactly when the strongest flagged class beats the normal class
        # (ties go to the class listed first, as in predict).
        s, n = jll[np.arange(len(jll)), strongest], jll[:, self.normal_index]
        through = (n > s) | ((n == s) & (self.normal_index < strongest))
        return np.where(through, normal, strongest), np.where(through, strongest, normal)

    def versus(self, credit: int) -> str:
        """The key of :data:`VERSUS` for a message whose credit class (from :meth:`sides`) is ``credit``."""
        if self.normal_index is None:
            return "predicted-against-runner-up"
        if self.threshold is not None:
            return "flag-log-odds"
        return "normal-against-flagged" if credit == self.normal_index else "flagged-against-normal"

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
