"""What the filter's mistakes look like: the false alarms and missed messages, and the tokens behind them."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from explain.analysis.batch import evidence_matrix, top_k_per_row
from explain.model.decision import flag_probability
from explain.model.model_view import ModelView


@dataclass(frozen=True)
class TokenPush:
    """A token's evidence toward flagging (positive) or toward normal (negative)."""

    token: str
    evidence: float


@dataclass(frozen=True)
class ReviewedMessage:
    """One message under review, with its evidence summary (words as in ``docs/glossary.md``).

    ``flag_probability`` is P(flag), every flagged class together, and
    ``flag_log_odds`` the same on the log-odds scale. ``margin`` is how far
    the decision was from going the other way, in log-odds, positive on the
    flagged side: with a threshold ``flag_log_odds - threshold_log_odds`` (the
    same scale as P(flag)); with the most probable class deciding, the
    boundary is where the strongest flagged class ``flag_class`` ties with the
    normal class, so the margin is ``jll[flag_class] - jll[normal]``
    (:attr:`ErrorReview.margin_scale` says which). Token evidence compares
    ``flag_class`` with the normal class: ``x_j * (W[flag_class, j] - W[normal, j])``.
    ``label_may_be_wrong`` marks a message listed among the suspected label
    errors, when they were searched.
    """

    index: int
    id: str
    true_class: str
    decided_class: str
    flag_class: str
    flag_probability: float
    flag_log_odds: float
    margin: float
    toward_flag: tuple[TokenPush, ...]
    toward_normal: tuple[TokenPush, ...]
    label_may_be_wrong: bool = False


@dataclass(frozen=True)
class ErrorDriver:
    """A token that pushed errors the wrong way, summed over the errors.

    ``evidence`` is the token's summed evidence toward the wrong decision,
    ``pushed`` the number of errors it pushed that way, ``tipped`` the number
    in which its evidence alone was larger than the margin. With two classes
    and count or presence features, tipping means that removing the token
    alone would have avoided the error; with TF-IDF features (a removal
    re-weighs the whole message) or several flagged classes it is an
    approximation of that.
    """

    token: str
    evidence: float
    pushed: int
    tipped: int


@dataclass(frozen=True)
class ErrorReview:
    """False alarms and missed messages, the most confident first; borderline messages; drivers.

    ``margin_scale`` names the log-odds every margin is on: ``"flag log-odds"``
    (with a threshold) or ``"strongest flagged class against normal"`` (most
    probable class deciding).
    """

    n_false_alarms: int
    n_missed: int
    false_alarms: tuple[ReviewedMessage, ...]
    missed: tuple[ReviewedMessage, ...]
    borderline: tuple[ReviewedMessage, ...]
    false_alarm_drivers: tuple[ErrorDriver, ...]
    missed_drivers: tuple[ErrorDriver, ...]
    margin_scale: str = "flag log-odds"


def pair_evidence(view: ModelView, X, rows: np.ndarray, winner: np.ndarray, rival: np.ndarray) -> sp.csr_matrix:
    """Per-token evidence of each of ``rows`` toward ``winner[i]`` against ``rival[i]``, shape (len(rows), F)."""
    part = view.prepare(sp.csr_matrix(X)[rows])
    part.sort_indices()
    return evidence_matrix(view, part, winner, rival)


def _pushes(tokens: np.ndarray, cols: np.ndarray, values: np.ndarray, sign: float) -> tuple[TokenPush, ...]:
    return tuple(TokenPush(str(tokens[c]), sign * float(v)) for c, v in zip(cols, values) if c >= 0)


def top_pushes(view: ModelView, X, rows: np.ndarray, winner: np.ndarray, rival: np.ndarray, k: int):
    """Per row, the ``k`` tokens with most evidence toward ``winner`` and toward ``rival``.

    Returns a list of (toward winner, toward rival) pairs of :class:`TokenPush`
    tuples; evidence toward the rival is negative.
    """
    E = pair_evidence(view, X, rows, winner, rival)
    up_cols, up_vals, down_cols, down_vals = top_k_per_row(E, E.data, k)
    # _pushes takes magnitudes and the sign separately
    return [
        (_pushes(view.tokens, up_cols[i], up_vals[i], 1.0), _pushes(view.tokens, down_cols[i], -down_vals[i], -1.0))
        for i in range(len(rows))
    ]


@dataclass(frozen=True, eq=False)
class Decisions:
    """Per-message arrays the error review reads (length n), and the normal class.

    ``scores`` is the flag log-odds, ``margin`` as in
    :class:`ReviewedMessage` on ``margin_scale``; ``suspected`` marks the
    suspected label errors.
    """

    normal: int
    truth: np.ndarray
    decided: np.ndarray
    margin: np.ndarray
    scores: np.ndarray
    flag_class: np.ndarray
    ids: np.ndarray
    suspected: np.ndarray
    margin_scale: str


def _reviewed(rows, view, X, ctx: Decisions, top_tokens: int) -> tuple[ReviewedMessage, ...]:
    rows = np.asarray(rows, dtype=np.int64)
    if len(rows) == 0:
        return ()
    pushes = top_pushes(view, X, rows, ctx.flag_class[rows], np.full(len(rows), ctx.normal), top_tokens)
    classes = view.classes
    return tuple(
        ReviewedMessage(
            index=int(r),
            id=str(ctx.ids[r]),
            true_class=str(classes[ctx.truth[r]]),
            decided_class=str(classes[ctx.decided[r]]),
            flag_class=str(classes[ctx.flag_class[r]]),
            flag_probability=float(flag_probability(ctx.scores[r])),
            flag_log_odds=float(ctx.scores[r]),
            margin=float(ctx.margin[r]),
            toward_flag=pushes[i][0],
            toward_normal=pushes[i][1],
            label_may_be_wrong=bool(ctx.suspected[r]),
        )
        for i, r in enumerate(rows)
    )


def _drivers(view, X, rows: np.ndarray, ctx: Decisions, sign: float, top: int) -> tuple[ErrorDriver, ...]:
    """Tokens by summed evidence toward the wrong side; ``sign`` +1 for false alarms, -1 for misses."""
    if len(rows) == 0:
        return ()
    E = pair_evidence(view, X, rows, ctx.flag_class[rows], np.full(len(rows), ctx.normal))
    push = np.maximum(sign * E.data, 0.0)
    owner = np.repeat(np.arange(len(rows)), np.diff(E.indptr))
    n_features = len(view.tokens)
    total = np.bincount(E.indices, weights=push, minlength=n_features)
    pushed = np.bincount(E.indices[push > 0], minlength=n_features)
    room = np.abs(ctx.margin[rows])[owner]
    tipped = np.bincount(E.indices[push > room], minlength=n_features)
    ranked = [int(c) for c in np.lexsort((np.arange(n_features), -total)) if total[c] > 0][:top]
    return tuple(ErrorDriver(str(view.tokens[c]), float(total[c]), int(pushed[c]), int(tipped[c])) for c in ranked)


def error_review(view, X, ctx: Decisions, top: int, top_tokens: int) -> ErrorReview:
    normal, truth, decided, margin = ctx.normal, ctx.truth, ctx.decided, ctx.margin
    false_alarm = np.flatnonzero((truth == normal) & (decided != normal))
    missed = np.flatnonzero((truth != normal) & (decided == normal))
    false_alarm = false_alarm[np.argsort(-margin[false_alarm], kind="stable")]
    missed = missed[np.argsort(margin[missed], kind="stable")]
    borderline = np.argsort(np.abs(margin), kind="stable")[:top]
    return ErrorReview(
        n_false_alarms=len(false_alarm),
        n_missed=len(missed),
        false_alarms=_reviewed(false_alarm[:top], view, X, ctx, top_tokens),
        missed=_reviewed(missed[:top], view, X, ctx, top_tokens),
        borderline=_reviewed(borderline, view, X, ctx, top_tokens),
        false_alarm_drivers=_drivers(view, X, false_alarm, ctx, 1.0, top),
        missed_drivers=_drivers(view, X, missed, ctx, -1.0, top),
        margin_scale=ctx.margin_scale,
    )
