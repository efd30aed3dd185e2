"""Why one message got its score: an exact, per-token account.

For a naive Bayes filter the joint log-likelihood of class ``c`` is
``b[c] + sum_j x_j W[c, j]`` (see :mod:`explain.model.model_view`). Comparing the
predicted class ``A`` with the runner-up ``B``::

    log_odds = jll[A] - jll[B] = (b[A] - b[B]) + sum_j x_j (W[A, j] - W[B, j])

so every present token has an exact share ``evidence_j = x_j (W[A,j] - W[B,j])``
and ``baseline + sum(evidence) == log_odds`` up to floating-point rounding.
``exp(evidence_j)`` is the factor by which the token multiplies the odds of
``A`` against ``B``.

The *flip set* is the smallest set of token occurrences whose removal changes
the decision. When the decision depends on sums of per-token terms (argmax,
or a threshold with two classes) and features are counts or presence flags,
removals are additive and sorting by their effect gives the exact minimum
(the decision against each rival depends on one margin only; the minimum over
rivals is the answer). For TF-IDF (a removal re-normalises the row) or a
threshold over several flagged classes the set is found greedily, re-scoring
exactly after each removal, and is labelled as greedy.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from explain.analysis.batch import by_row_then_value
from explain.analysis.mail_facts import MailFacts, mail_facts
from explain.model.decision import DecisionRule, top_two
from explain.errors import NbledgerError
from explain.model.featurizer import Occurrences, unknown_tokens
from explain.model.model_view import ROW_WEIGHTED

#: Greedy flip search stops after this many removals (a cost bound for huge messages).
GREEDY_STEP_LIMIT = 400


@dataclass(frozen=True)
class TokenEvidence:
    """One feature present in the message.

    ``value`` is what the classifier multiplies (count, 0/1 or TF-IDF weight);
    ``per_unit`` is ``W[A, j] - W[B, j]``; ``evidence = value * per_unit``;
    ``spans`` the character offsets of its occurrences (empty when unknown).
    """

    token: str
    column: int
    occurrences: int
    value: float
    per_unit: float
    evidence: float
    spans: tuple[tuple[int, int], ...]

    @property
    def odds_factor(self) -> float:
        """How many times this token multiplies the odds of A against B."""
        with np.errstate(over="ignore"):
            return float(np.exp(self.evidence))


@dataclass(frozen=True)
class FlipSet:
    """The token occurrences whose removal changes the decision.

    ``removals`` lists ``(token, occurrences removed)``; ``exact`` is False
    when the set was found greedily; ``new_decision`` is the decision after
    the removals; ``reason`` explains an empty set.
    """

    removals: tuple[tuple[str, int], ...]
    exact: bool
    # With presence features a token counts once: only its presence matters,
    # so the minimum is over tokens, each removed with all its occurrences.
    method: str
    new_decision: str | None
    reason: str | None

    @property
    def size(self) -> int:
        return sum(n for _, n in self.removals)


@dataclass(frozen=True, eq=False)
class Explanation:
    """Everything ``why`` reports about one message; presenters only read it."""

    text: str
    classes: tuple[str, ...]
    jll: np.ndarray
    probabilities: np.ndarray
    predicted: str
    runner_up: str
    log_odds: float
    baseline: float
    baseline_prior: float
    baseline_absence: float
    threshold: float | None
    normal_class: str | None
    flag_probability: float | None
    decision: str
    tokens: tuple[TokenEvidence, ...]
    unknown_tokens: tuple[tuple[str, int], ...]
    spans_note: str | None
    flip: FlipSet
    feature_kind: str
    variant: str
    #: what was read from a raw e-mail, else None
    mail: MailFacts | None = None
    #: hashed features: ``(column, tokens)`` for each column two or more of the message's tokens share
    collisions: tuple[tuple[int, tuple[str, ...]], ...] = ()

    @property
    def evidence_sum(self) -> float:
        return float(sum(t.evidence for t in self.tokens))

    def strongest(self, n: int, side: str = "for") -> list[TokenEvidence]:
        """The n tokens with the largest evidence for (or against) the predicted class."""
        if side == "for":
            chosen = [t for t in self.tokens if t.evidence > 0]
            return sorted(chosen, key=lambda t: -t.evidence)[:n]
        chosen = [t for t in self.tokens if t.evidence < 0]
        return sorted(chosen, key=lambda t: t.evidence)[:n]


def explain_message(
    model, text: str, threshold: float | None = None, threshold_log_odds: float | None = None,
    *, mail: MailFacts | None = None, occurrences: Occurrences | None = None,
) -> Explanation:
    """The exact per-token account of ``text`` under a loaded model.

    The threshold is a probability of not normal (``threshold``) or, exactly,
    flag log-odds (``threshold_log_odds``, as ``assess`` prints them). ``mail``
    says what was read when ``text`` came from a raw e-mail: the one way mail
    facts reach an explanation (:func:`explain_email` and
    :func:`explain.analysis.ledger.ledger_of` both pass them here).
    ``occurrences`` may hold ``model.featurizer.occurrences(text)`` when the
    caller has them (the ledger does); the model is then taken as already
    named for ``text`` (:meth:`~explain.model.loading.LoadedModel.named_for`).
    """
    if not isinstance(text, str):
        raise NbledgerError("the message must be text")
    if not text.strip():
        raise NbledgerError("the message is empty")
    if occurrences is None:
        # Hashed features: no stored vocabulary, so columns are named by the message's own tokens.
        model = model.named_for([text])
        occurrences = model.featurizer.occurrences(text)
    occ = occurrences
    view, featurizer = model.view, model.featurizer
    rule = DecisionRule.for_view(view, threshold, threshold_log_odds)
    x = view.prepare(featurizer.transform([text]))
    jll = view.joint_log_likelihood(x)[0]
    predicted, runner_up = (int(i[0]) for i in top_two(jll[None, :]))
    a, b = predicted, runner_up
    cols = x.indices
    values = x.data
    per_unit = view.weights[a, cols] - view.weights[b, cols]
    counts = np.bincount(occ.columns[occ.columns >= 0], minlength=view.n_features)
    spans_by_col: dict[int, list] = {}
    if occ.spans is not None:
        for col, span in zip(occ.columns, occ.spans):
            if col >= 0:
                spans_by_col.setdefault(int(col), []).append(span)
    tokens = tuple(
        TokenEvidence(
            token=str(view.tokens[j]),
            column=int(j),
            occurrences=int(counts[j]),
            value=float(v),
            per_unit=float(d),
            evidence=float(v * d),
            spans=tuple(spans_by_col.get(int(j), ())),
        )
        for j, v, d in zip(cols, values, per_unit)
    )
    flag = None
    if rule.normal_index is not None and view.n_classes > 1:
        flag = float(rule.flag_probability(jll)[0])
    decision = int(rule.decide(jll)[0])
    return Explanation(
        text=text,
        classes=tuple(str(c) for c in view.classes),
        jll=jll,
        probabilities=view.posterior(jll),
        predicted=str(view.classes[a]),
        runner_up=str(view.classes[b]),
        log_odds=float(jll[a] - jll[b]),
        baseline=float(view.baseline[a] - view.baseline[b]),
        baseline_prior=float(view.prior[a] - view.prior[b]),
        baseline_absence=float(view.absence[a] - view.absence[b]),
        threshold=rule.threshold,
        normal_class=None if rule.normal_index is None else str(view.classes[rule.normal_index]),
        flag_probability=flag,
        decision=str(view.classes[decision]),
        tokens=tokens,
        unknown_tokens=tuple(unknown_tokens(occ)),
        spans_note=occ.spans_note,
        flip=flip_set(model, occ, rule, decision),
        feature_kind=view.feature_kind,
        variant=view.variant,
        collisions=_collisions(featurizer, text),
        mail=mail,
    )


def explain_email(model, email, view: str, threshold: float | None = None) -> Explanation:
    """The :class:`Explanation` of ``email`` (an :class:`~explain.model.email_reader.EmailText`)
    read in ``view``, carrying its :class:`~explain.analysis.mail_facts.MailFacts` as ``mail``."""
    return explain_message(model, email.text(view), threshold, mail=mail_facts(email, view))


def _collisions(featurizer, text: str) -> tuple[tuple[int, tuple[str, ...]], ...]:
    """Hashed features: ``(column, tokens)`` for each column several of the message's tokens share."""
    if not featurizer.hashed:
        return ()
    return tuple((c, t) for c, t in featurizer.hashed_names([text]).items() if len(t) > 1)


# --- the flip set ---------------------------------------------------------


def _presence_only(view, featurizer) -> bool:
    """True when only a token's presence matters (its count does not)."""
    return featurizer.vectorizer.binary or (view.variant == "bernoulli" and view.binarize is not None)


def _units(view, featurizer, counts: sp.csr_matrix) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Removable units of every row as (row, column, occurrences the unit stands for).

    With count features every occurrence is a unit. When only presence
    matters a token is one unit, made of as many occurrences as must go for
    it to count as absent (all of them, or down to BernoulliNB's threshold).
    Units are grouped by row, columns ascending within a row.
    """
    rows = np.repeat(np.arange(counts.shape[0]), np.diff(counts.indptr))
    cols, n = counts.indices, counts.data.astype(np.int64)
    if not _presence_only(view, featurizer):
        return np.repeat(rows, n), np.repeat(cols, n), np.ones(int(n.sum()), dtype=np.int64)
    allowed = 0
    if not featurizer.vectorizer.binary and view.binarize is not None:
        allowed = int(max(np.floor(view.binarize), 0.0))
    sizes = n - allowed
    keep = sizes > 0
    return rows[keep], cols[keep], sizes[keep]


def exact_flip_possible(view, featurizer, rule: DecisionRule) -> bool:
    """True when sorting removals by their effect gives the proven minimum flip set."""
    # TF-IDF re-normalises the row on every removal, except when BernoulliNB
    # reduces the weights to presence (binarize=0): then removals are additive.
    additive_features = featurizer.feature_kind not in ROW_WEIGHTED or (
        view.variant == "bernoulli" and view.binarize == 0.0
    )
    return view.n_classes > 1 and additive_features and rule.additive


def flip_set(model, occ: Occurrences, rule: DecisionRule, decision: int) -> FlipSet:
    """The smallest set of token occurrences whose removal changes the decision."""
    view, featurizer = model.view, model.featurizer
    counts = np.bincount(occ.columns[occ.columns >= 0], minlength=view.n_features).astype(np.float64)
    if view.n_classes < 2:
        return FlipSet((), True, "exact", None, "the model has a single class, so no decision can change")
    if not counts.any():
        return FlipSet((), True, "exact", None, "the message has no token the model knows; the baseline alone decides")
    if not exact_flip_possible(view, featurizer, rule):
        return _greedy_flip(view, featurizer, rule, decision, counts)
    flips = exact_flips(view, featurizer, rule, sp.csr_matrix(counts.reshape(1, -1)), np.array([decision]), confirm_all=True)
    if flips.units[0] == 0:
        return FlipSet(
            (), True, "exact", None,
            "removing every token that supports this decision does not change it; "
            "the baseline and the remaining tokens decide",
        )
    cols, sizes = flips.removed(0)
    return FlipSet(_removals(view, cols, sizes), True, "exact", str(view.classes[flips.new_decision[0]]), None)


def _score(view, featurizer, counts: sp.csr_matrix) -> np.ndarray:
    return view.joint_log_likelihood(view.prepare(featurizer.weigh(counts)))


@dataclass(frozen=True, eq=False)
class ExactFlips:
    """Minimum flip sets of n messages (additive cases only; see :func:`exact_flips`).

    ``units`` (n,) is how many units the set removes (0: no removal changes
    the decision); ``size`` (n,) how many token occurrences that is;
    ``new_decision`` (n,) the class index after the removals (-1 for none).
    ``unit_cols``/``unit_sizes`` are every row's units; ``orders[t]`` is
    (unit indices in removal order, start of each row in it) for rival
    number t, and ``rival`` (n,) the rival whose order row i's set follows.
    """

    units: np.ndarray
    size: np.ndarray
    new_decision: np.ndarray
    unit_cols: np.ndarray
    unit_sizes: np.ndarray
    orders: tuple
    rival: np.ndarray

    def removed(self, i: int) -> tuple[np.ndarray, np.ndarray]:
        """(columns, occurrences) of row i's flip set, in the order they were chosen."""
        order, starts = self.orders[self.rival[i]]
        chosen = order[starts[i] : starts[i] + self.units[i]]
        return self.unit_cols[chosen], self.unit_sizes[chosen]


def exact_flips(
    view, featurizer, rule, counts: sp.csr_matrix, decisions: np.ndarray, confirm_all=False, jll=None
) -> ExactFlips:
    """Minimum flip sets of many messages at once, by sorting removals by their effect.

    ``counts`` (n, F) holds raw occurrence counts; ``decisions`` (n,) the
    decided class indices. Needs :func:`exact_flip_possible`. A decision
    changes when some rival overtakes it, and the margin against one rival is
    a sum of per-unit terms; so per rival the units are removed in order of
    how much they lower that margin, and the shortest prefix that closes it,
    over all rivals, is the minimum. Prefixes are found with running sums
    for every row at once; rows within rounding of a boundary (all rows with
    ``confirm_all``), and any row whose exact re-score disagrees, are
    re-scored exactly step by step. ``jll`` may hold the scores of
    ``counts`` (n, C) when the caller has them, as the ledger does.
    """
    counts = sp.csr_matrix(counts, dtype=np.float64)
    counts.eliminate_zeros()
    counts.sort_indices()
    n, C = counts.shape[0], view.n_classes
    decisions = np.asarray(decisions, dtype=np.int64)
    u_row, u_col, u_size = _units(view, featurizer, counts)
    jll0 = _score(view, featurizer, counts) if jll is None else jll
    tolerance = 1e-8 * (1.0 + np.abs(jll0).max(axis=1))
    targets = _targets(rule, jll0, decisions, C)
    weights_t = np.ascontiguousarray(view.weights.T)  # (F, C)
    best_units = np.zeros(n, dtype=np.int64)
    best_size = np.zeros(n, dtype=np.int64)
    best_new = np.full(n, -1, dtype=np.int64)
    best_rival = np.zeros(n, dtype=np.int64)
    orders = []
    for t, (winner, rival, sign, margin, tie_changes) in enumerate(targets):
        # Removing unit u lowers the margin by gain[u]; for a threshold the
        # direction depends on whether the message is flagged.
        gain = sign[u_row] * (weights_t[u_col, winner[u_row]] - weights_t[u_col, rival[u_row]])
        # Rows where removing every helpful unit cannot close the margin need
        # no sort. Units that do not move the margin go last: at an exact tie,
        # re-scoring without them can still tip the decision by rounding.
        reachable = np.bincount(u_row, weights=np.maximum(gain, 0.0), minlength=n) >= margin - tolerance
        order = by_row_then_value(u_row, np.where(reachable[u_row], gain, -1.0), non_negative=True)
        rows = u_row[order]
        length = np.bincount(rows, minlength=n)
        starts = np.concatenate(([0], np.cumsum(length)[:-1]))
        running = np.cumsum(gain[order])
        before = np.concatenate(([0.0], running))[starts]
        left = margin[rows] - (running - before[rows])  # the margin after each prefix
        changed = (left < 0) | ((left == 0) & tie_changes[rows])
        position = np.arange(len(order)) - starts[rows]
        first = np.flatnonzero(changed)
        first = first[np.r_[True, rows[first][1:] != rows[first][:-1]]] if len(first) else first
        k = np.zeros(n, dtype=np.int64)
        k[rows[first]] = position[first] + 1
        # Near the boundary the running sums can differ from exact scoring.
        has = length > 0
        near = np.abs(margin) <= tolerance
        last = starts + np.where(k > 0, k, length) - 1
        near[has] |= np.abs(left[last[has]]) <= tolerance[has]
        inner = has & (k > 1)
        near[inner] |= np.abs(left[last[inner] - 1]) <= tolerance[inner]
        removed = np.concatenate(([0], np.cumsum(u_size[order])))
        closed = _closer(rule, decisions, rival, tie_changes)
        new = np.full(n, -1, dtype=np.int64)
        done = np.flatnonzero(k > 0)
        exact = _score_after(view, featurizer, counts, done, order, starts, k, u_col, u_size)
        new[done] = rule.decide(exact)
        wrong = np.zeros(n, dtype=bool)
        wrong[done] = ~closed(exact, done)
        for i in np.flatnonzero(has & (near | wrong | confirm_all)):
            row_units = order[starts[i] : starts[i] + length[i]]
            dense = counts[i].toarray()[0]
            # Start where the running sums closed the margin, or after the last unit if they never did.
            start_k = k[i] if k[i] > 0 else length[i]
            k[i], new[i] = _confirm(view, featurizer, rule, dense, u_col[row_units], u_size[row_units], start_k,
                                    lambda jll, i=i: bool(closed(jll, np.array([i]))[0]))
        better = (k > 0) & ((best_units == 0) | (k < best_units))
        best_units[better] = k[better]
        best_size[better] = (removed[starts + k] - removed[starts])[better]
        best_new[better] = new[better]
        best_rival[better] = t
        orders.append((order, starts))
    return ExactFlips(best_units, best_size, best_new, u_col, u_size, tuple(orders), best_rival)


def _targets(rule, jll0: np.ndarray, decisions: np.ndarray, C: int) -> list:
    """Per rival: ``(winner, rival, sign, margin, tie_changes)`` arrays (n,) of the margins a flip must close."""
    n = len(decisions)
    rows_n = np.arange(n)
    if rule.threshold is not None:
        # One margin: the flag log-odds (two classes) against the threshold.
        flagged = decisions != rule.normal_index
        gap = jll0[:, rule.flagged_indices[0]] - jll0[:, rule.normal_index] - rule.threshold_log_odds
        return [(np.full(n, rule.flagged_indices[0]), np.full(n, rule.normal_index),
                 np.where(flagged, 1.0, -1.0), np.where(flagged, gap, -gap), ~flagged)]
    targets = []
    for t in range(C - 1):
        rival = t + (t >= decisions)
        # argmax gives ties to the first class: a rival before the decision wins a tie.
        targets.append((decisions, rival, np.ones(n), jll0[rows_n, decisions] - jll0[rows_n, rival], rival < decisions))
    return targets


def _closer(rule, decisions, rival, tie_changes):
    """``closed(jll, i)``: whether the margin against the rival is closed, from exact scores ``jll`` of rows ``i``."""

    def closed(jll, i):
        if rule.threshold is not None:
            return rule.decide(jll) != decisions[i]
        a, b = jll[np.arange(len(i)), rival[i]], jll[np.arange(len(i)), decisions[i]]
        return (a > b) | ((a == b) & tie_changes[i])

    return closed


def _score_after(view, featurizer, counts, rows, order, starts, k, u_col, u_size) -> np.ndarray:
    """Exact joint log-likelihoods (len(rows), C) once the first ``k[row]`` units of ``order`` are removed."""
    if len(rows) == 0:
        return np.zeros((0, view.n_classes))
    lengths = k[rows]
    # Position j of the concatenated prefixes comes from order[starts[row] + (j - where row's prefix begins)].
    take = np.repeat(starts[rows] - np.concatenate(([0], np.cumsum(lengths)[:-1])), lengths) + np.arange(lengths.sum())
    prefix = order[take]
    which = np.repeat(np.arange(len(rows)), k[rows])
    removal = sp.csr_matrix((u_size[prefix].astype(np.float64), (which, u_col[prefix])), shape=(len(rows), counts.shape[1]))
    after = counts[rows] - removal
    after.eliminate_zeros()
    return _score(view, featurizer, after)


def _confirm(view, featurizer, rule, counts, cols, sizes, k, closed):
    """Re-score prefixes exactly around ``k`` (the running sums can differ in the last bits).

    ``closed(jll)`` says whether exact scores (1, C) have closed the margin.
    Returns the shortest prefix length that closes it exactly and the new
    decision; (0, -1) if no prefix does.
    """

    def scores(n):
        after = counts.copy()
        np.subtract.at(after, cols[:n], sizes[:n])
        return _score(view, featurizer, sp.csr_matrix(after.reshape(1, -1)))

    while k <= len(cols) and not closed(scores(k)):
        k += 1
    if k > len(cols):
        return 0, -1
    while k > 1 and closed(scores(k - 1)):
        k -= 1
    return k, int(rule.decide(scores(k))[0])


def _removals(view, cols: np.ndarray, sizes: np.ndarray) -> tuple[tuple[str, int], ...]:
    """(token, occurrences) per column, in the order the columns were first chosen."""
    unique, first, inverse = np.unique(cols, return_index=True, return_inverse=True)
    totals = np.bincount(inverse, weights=sizes).astype(int)
    order = np.argsort(first, kind="stable")
    return tuple((str(view.tokens[unique[i]]), int(totals[i])) for i in order)


def _distance(rule: DecisionRule, jll: np.ndarray, decision) -> np.ndarray:
    """How far each row of ``jll`` is from changing ``decision`` (a class index, or one per row); <= 0 once changed."""
    jll = np.atleast_2d(jll)
    decision = np.broadcast_to(decision, (len(jll),))
    if rule.threshold is not None:
        gap = rule.flag_log_odds(jll) - rule.threshold_log_odds
        return np.where(decision != rule.normal_index, gap, -gap)
    rows = np.arange(len(jll))
    others = jll.copy()
    others[rows, decision] = -np.inf
    return jll[rows, decision] - others.max(axis=1)


def _greedy_flip(view, featurizer, rule, decision, counts) -> FlipSet:
    counts = counts.copy()
    presence = _presence_only(view, featurizer)
    removed: dict[int, int] = {}
    for _ in range(GREEDY_STEP_LIMIT):
        present = np.flatnonzero(counts)
        if len(present) == 0:
            break
        # One candidate row per removable unit, all re-scored exactly at once;
        # only the message's own columns are stored (p x p, not p x vocabulary).
        p = len(present)
        step = counts[present] if presence else np.ones(p)
        block = np.tile(counts[present], (p, 1))
        block[np.arange(p), np.arange(p)] -= step
        candidates = sp.csr_matrix(
            (block.ravel(), np.tile(present, p), np.arange(0, p * p + 1, p)), shape=(p, view.n_features)
        )
        jll = _score(view, featurizer, candidates)
        new_decisions = rule.decide(jll)
        flipped = np.flatnonzero(new_decisions != decision)
        pick = flipped[0] if len(flipped) else int(np.argmin(_distance(rule, jll, decision)))
        col = int(present[pick])
        removed[col] = removed.get(col, 0) + int(step[pick])
        counts[col] -= step[pick]
        if len(flipped):
            return FlipSet(
                tuple((str(view.tokens[c]), n) for c, n in removed.items()),
                False, "greedy", str(view.classes[new_decisions[pick]]), None,
            )
    why = (
        f"no change within {GREEDY_STEP_LIMIT} greedy removals"
        if counts.any()
        else "removing every known token does not change the decision; the baseline decides"
    )
    return FlipSet((), False, "greedy", None, why)
