"""How many added tokens let a flagged message through: the evasion cost.

A sender who wants a scam through may pad it with innocent-looking words
(the "good word attack" of Lowd & Meek 2005, "Good Word Attacks on
Statistical Spam Filters", CEAS 2005). For a naive Bayes filter the score is
``jll[c] = b[c] + sum_j x_j W[c, j]`` (:mod:`explain.model.model_view`), so
adding one *unit* of token ``j`` adds ``W[:, j]`` to the scores. A unit is
one occurrence for count features, or for presence features (binary
vectorizer, BernoulliNB) the occurrences that make an absent token present;
adding a token that is already present then does nothing. BernoulliNB's
``W`` already is ``log p - log(1 - p)``, the change from absent to present.

Two budgets, both in added units:

- ``repeats``: any token, as often as wanted (the cheapest attack). With two
  classes and count features every addition moves the margin
  ``jll[flagged] - jll[normal]`` by ``g_j = W[f, j] - W[n, j]``, so ``k``
  additions move it by at least ``k min_j g_j``: the cheapest attack repeats
  the single token with the most negative ``g_j``.
- ``distinct``: each token at most once and only tokens not already in the
  message (a more natural-looking attack). The ``k`` most negative ``g_j``
  among the allowed tokens move the margin furthest, so a prefix of the
  sorted list is the minimum.

Both are exact for count and presence features with two classes (argmax or
a threshold): the decision compares one sum with a constant. (With
BernoulliNB's ``binarize`` of 1 or more a unit can take several occurrences;
the minimum is then over units, as for the flip set.) Every answer is
confirmed by re-scoring the new count rows exactly. Exact costs are never
capped: the cheapest attack is a prefix of the whole sorted vocabulary (a
cumulative sum), however long. For TF-IDF (an addition
re-normalises the row), argmax over more than two classes, or a threshold
over several flagged classes, the attack is built greedily, one unit at a
time, each step re-scored exactly over the :data:`GREEDY_CANDIDATES` tokens
pulling hardest toward the normal class, and labelled greedy; only this
search stops at ``max_added`` units, and a message past it counts as "more
than max_added" (:class:`MoreThan`).

Only tokens that the model's own analyzer turns back into themselves can be
added as text; with word n-grams, words added to a text also form new n-grams
with their neighbours, which the costs (counted in features) do not include.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from sklearn.feature_extraction.text import CountVectorizer

from explain.analysis.evidence import _presence_only, _score
from explain.errors import NbledgerError
from explain.model.decision import DecisionRule
from explain.model.model_view import ROW_WEIGHTED

#: Greedy steps score this many candidate tokens each (those pulling hardest toward normal).
GREEDY_CANDIDATES = 200
#: The shares of evaded messages reported per flagged class.
WITHIN = (1, 3, 5, 10)
BUDGETS = ("repeats", "distinct")


@dataclass(frozen=True)
class MoreThan:
    """A cost past what was searched: more than ``limit`` added units (the greedy search's cap).

    ``limit`` None: exact costs, and no addition of tokens lets the message through.
    """

    limit: int | None

    def __str__(self) -> str:
        return "no attack" if self.limit is None else f"more than {self.limit}"


@dataclass(frozen=True)
class CostSummary:
    """Evasion costs of the messages decided as one flagged class (one budget).

    ``median``/``q1``/``q3`` are over every message of the class, counting a
    message not evaded as costing more than any evaded one: a number of added
    units, or :class:`MoreThan` when the quartile falls among messages past
    the greedy search's cap (never missing); ``within[k]`` is the share
    evaded with at most ``k`` added units.
    """

    flagged_class: str
    messages: int
    evaded: int
    median: float | MoreThan
    q1: float | MoreThan
    q3: float | MoreThan
    within: tuple[tuple[int, float], ...]


@dataclass(frozen=True)
class WeakPoint:
    """A token used in many cheapest attacks.

    ``attacks``: flagged messages whose attack uses it; ``per_unit``: its
    evidence toward the normal class against each flagged class
    (``W[n, j] - W[f, j]``), in the order of ``Evasion.flagged_classes``;
    ``support``: its training occurrences (documents for presence features)
    in every class, in the model's class order.
    """

    token: str
    attacks: int
    per_unit: tuple[float, ...]
    support: tuple[float, ...]


@dataclass(frozen=True, eq=False)
class BudgetResult:
    """One budget's attack on every flagged message.

    ``costs``: int array (n_flagged,), units added, -1 where no attack was
    found (exact: none exists; greedy: none within ``max_added``); ``additions[i]``: ``(token, occurrences)`` pairs of
    message i's attack (empty when none).
    """

    budget: str
    exact: bool
    method: str
    costs: np.ndarray
    additions: tuple[tuple[tuple[str, int], ...], ...]
    summaries: tuple[CostSummary, ...]
    weak_points: tuple[WeakPoint, ...]


@dataclass(frozen=True, eq=False)
class Evasion:
    """Evasion costs of the flagged messages (``rows`` index the data)."""

    rows: np.ndarray
    decided: np.ndarray
    flagged_classes: tuple[str, ...]
    max_added: int
    presence: bool
    repeats: BudgetResult
    distinct: BudgetResult
    note: str | None

    def budget(self, name: str) -> BudgetResult:
        return self.repeats if name == "repeats" else self.distinct


def raw_counts(featurizer, texts) -> sp.csr_matrix:
    """Occurrence counts (1 for a binary vectorizer) before any TF-IDF, (n, F) float64 CSR."""
    # TfidfVectorizer is a CountVectorizer: its parent's transform gives the counts.
    X = CountVectorizer.transform(featurizer.vectorizer, texts)
    X = sp.csr_matrix(X, dtype=np.float64)
    X.sort_indices()
    return X


def addable(featurizer) -> np.ndarray:
    """Bool (F,): tokens that the analyzer turns back into exactly themselves."""
    analyze = featurizer._analyzer
    return np.fromiter(
        (list(analyze(str(t))) == [t] for t in featurizer.tokens), dtype=bool, count=featurizer.n_features
    )


def unit_sizes(view, featurizer, counts: np.ndarray) -> np.ndarray:
    """Occurrences one unit of each token adds to a message with ``counts`` (0 = cannot add).

    Counts: 1. Presence: 0 when already present, else what makes it present
    (BernoulliNB counts a feature when its value is above ``binarize``).
    """
    if not _presence_only(view, featurizer):
        return np.ones_like(counts, dtype=np.int64)
    limit = view.binarize if view.variant == "bernoulli" and view.binarize is not None else 0.0
    if featurizer.vectorizer.binary:
        return np.where((counts == 0) & (1.0 > limit), 1, 0).astype(np.int64)
    need = np.floor(limit) + 1 - counts if limit >= 0 else np.ones_like(counts)
    return np.where(counts > limit, 0, np.maximum(need, 1)).astype(np.int64)


def evasion_costs(model, texts, rule: DecisionRule, max_added: int = 50, counts=None) -> Evasion:
    """The cheapest additions that let every flagged message of ``texts`` through.

    ``counts`` may hold the texts' occurrence counts (n, F) when the caller has them.
    """
    view, featurizer = model.view, model.featurizer
    if max_added < 1:
        raise NbledgerError(f"--max-added must be at least 1, got {max_added}")
    if rule.normal_index is None or view.n_classes < 2:
        raise NbledgerError("evasion needs a normal class to reach: name it with --normal-class")
    normal = rule.normal_index
    if counts is None:
        counts = raw_counts(featurizer, texts)
    else:
        counts = sp.csr_matrix(counts, dtype=np.float64, copy=True)
        counts.sort_indices()
        if featurizer.vectorizer.binary:
            counts.data[:] = 1.0  # as raw_counts gives them: a binary vectorizer counts presence
    jll = _score(view, featurizer, counts)
    decided = rule.decide(jll)
    rows = np.flatnonzero(decided != normal)
    if len(rows) == 0:
        raise NbledgerError("no message in the data is flagged, so there is nothing to evade")
    counts = counts[rows]
    jll, decided = jll[rows], decided[rows]
    presence = _presence_only(view, featurizer)
    ok = addable(featurizer)
    additive = featurizer.feature_kind not in ROW_WEIGHTED or (view.variant == "bernoulli" and view.binarize == 0.0)
    exact = additive and view.n_classes == 2
    results = {}
    search = _exact if exact else _greedy
    for budget in BUDGETS:
        # With presence features a repeat adds nothing: both budgets are one search.
        if presence and results:
            results[budget] = next(iter(results.values()))
            continue
        results[budget] = search(view, featurizer, rule, counts, jll, decided, ok, budget, presence, max_added)
    flagged_classes = tuple(str(view.classes[c]) for c in rule.flagged_indices)
    outcome = {
        budget: BudgetResult(
            budget=budget,
            exact=exact,
            method="exact" if exact else "greedy",
            costs=costs,
            additions=adds,
            summaries=_summaries(view, costs, decided, None if exact else max_added),
            weak_points=_weak_points(view, rule, adds),
        )
        for budget, (costs, adds) in results.items()
    }
    notes = []
    if presence:
        notes.append("only a token's presence counts, so repeating one does nothing: both budgets agree")
    if featurizer.vectorizer.analyzer != "word" or featurizer.vectorizer.ngram_range[1] > 1:
        notes.append(
            "the model reads n-grams: added words also form new n-grams with their neighbours, "
            "which these costs (counted in features) leave out"
        )
    if not ok.any():
        notes.append("no token of the vocabulary survives the model's analyzer alone, so none can be added")
    return Evasion(
        rows=rows,
        decided=np.array([str(view.classes[d]) for d in decided], dtype=object),
        flagged_classes=flagged_classes,
        max_added=max_added,
        presence=presence,
        repeats=outcome["repeats"],
        distinct=outcome["distinct"],
        note="; ".join(notes) or None,
    )


# --- exact: two classes, count or presence features -------------------------


def _exact(view, featurizer, rule, counts, jll, decided, ok, budget, presence, max_added):
    """Exact costs, never capped: a sorted cumulative sum over the whole vocabulary (``max_added`` unused)."""
    normal = rule.normal_index
    flagged = 1 - normal
    gain = view.weights[flagged] - view.weights[normal]  # margin change per unit, (F,)
    pull = np.flatnonzero(ok & (gain < 0))
    pull = pull[np.argsort(gain[pull], kind="stable")]  # most negative first
    n = counts.shape[0]
    if len(pull) == 0:
        return np.full(n, -1, dtype=np.int64), tuple(() for _ in range(n))
    margin = jll[:, flagged] - jll[:, normal]
    # The margin must fall below the line (threshold: strictly; argmax: to 0 or below, the
    # normal class winning ties only when it comes first; _confirm_all settles ties exactly).
    line = rule.threshold_log_odds if rule.threshold is not None else 0.0
    if budget == "repeats" and not presence:
        # One token repeated k times: the margin is linear in k.
        best, step = pull[0], -gain[pull[0]]
        k = np.maximum(np.ceil((margin - line) / step), 1).astype(np.int64)
        return _confirm_repeats(view, featurizer, rule, counts, best, k)
    running = np.cumsum(gain[pull])
    rank = np.full(len(gain), -1, dtype=np.int64)
    rank[pull] = np.arange(len(pull))
    cols, sizes, k = [], [], np.zeros(n, dtype=np.int64)
    for i in range(n):
        lo, hi = counts.indptr[i], counts.indptr[i + 1]
        present, values = counts.indices[lo:hi], counts.data[lo:hi]
        blocked = present[unit_sizes(view, featurizer, values) == 0] if presence else present
        at = np.sort(rank[blocked][rank[blocked] >= 0])
        p = _first_through(margin[i] - line, running, at, gain[pull[at]])
        if p < 0:  # every allowed token together does not let it through: no attack exists
            cols.append(pull[:0])
            sizes.append(np.zeros(0, dtype=np.int64))
            continue
        head = pull[: min(len(pull), p + 1 + 16)]  # spare units, should exact scoring need more
        head = head[~np.isin(head, blocked)]
        size = np.ones(len(head), dtype=np.int64)
        if presence:
            lookup = dict(zip(present.tolist(), values.tolist()))
            size = unit_sizes(view, featurizer, np.array([lookup.get(int(j), 0.0) for j in head]))
        cols.append(head)
        sizes.append(size)
        k[i] = p + 1 - np.searchsorted(at, p, side="right")
    return _confirm_all(view, featurizer, rule, counts, cols, sizes, k)


def _first_through(room: float, running: np.ndarray, blocked: np.ndarray, blocked_gain: np.ndarray) -> int:
    """The first position ``p`` of the sorted tokens whose prefix, without ``blocked`` positions, closes ``room``.

    ``running`` is the cumulative sum of all gains (decreasing); the blocked
    positions (sorted) split it into stretches over which the correction is
    constant, so each stretch is one binary search. Returns -1 when adding
    every allowed token still leaves the margin above the line.
    """
    correction = 0.0
    starts = np.concatenate(([0], blocked + 1))
    ends = np.concatenate((blocked, [len(running)]))
    for j, (a, b) in enumerate(zip(starts, ends)):
        if j:
            correction += blocked_gain[j - 1]
        if a >= b:
            continue
        # room + running[p] - correction <= 0  <=>  -running[p] >= room - correction
        p = a + int(np.searchsorted(-running[a:b], room - correction, side="left"))
        if p < b:
            return p
    return -1


def _confirm_repeats(view, featurizer, rule, counts, best: int, k: np.ndarray):
    """Settle the repeat count of every message exactly by re-scoring (the closed form may be off by one)."""
    normal = rule.normal_index
    n = counts.shape[0]

    def passes(rows, m):
        extra = sp.csr_matrix((m.astype(np.float64), (np.arange(len(rows)), np.full(len(rows), best))),
                              shape=(len(rows), counts.shape[1]))
        return rule.decide(_score(view, featurizer, sp.csr_matrix(counts[rows] + extra))) == normal

    rows = np.arange(n)
    for _ in range(64):
        up = ~passes(rows, k)
        k[up] += 1
        lower = rows[~up & (k > 1)]
        down = lower[passes(lower, k[lower] - 1)]
        k[down] -= 1
        if not up.any() and len(down) == 0:
            break
    adds = tuple(((str(view.tokens[best]), int(m)),) for m in k)
    return k, adds


def _confirm_all(view, featurizer, rule, counts, cols, sizes, k):
    """Re-score attacks exactly and move ``k`` until it is the shortest passing prefix.

    ``cols[i]``/``sizes[i]``: message i's candidate units in the order they
    are added; ``k``: the prefix length the running sums point at. Those sums
    may differ from exact scoring in the last bits near a tie, so prefixes
    are re-scored in batches (one sparse matrix per round) until settled.
    """
    normal = rule.normal_index
    n = counts.shape[0]
    available = np.array([len(c) for c in cols], dtype=np.int64)
    k = np.minimum(np.maximum(np.asarray(k, dtype=np.int64), 1), available)

    def passes(which: np.ndarray, lengths: np.ndarray) -> np.ndarray:
        if len(which) == 0:
            return np.zeros(0, dtype=bool)
        rows = np.repeat(np.arange(len(which)), lengths)
        add_cols = np.concatenate([cols[i][:m] for i, m in zip(which, lengths)])
        add_vals = np.concatenate([sizes[i][:m] for i, m in zip(which, lengths)]).astype(np.float64)
        extra = sp.csr_matrix((add_vals, (rows, add_cols)), shape=(len(which), counts.shape[1]))
        return rule.decide(_score(view, featurizer, sp.csr_matrix(counts[which] + extra))) == normal

    todo = np.flatnonzero(available > 0)
    for _ in range(int(available.max(initial=0)) + 2):
        up = passes(todo, k[todo])
        fix = todo[~up & (k[todo] < available[todo])]
        lower = todo[up & (k[todo] > 1)]
        down = lower[passes(lower, k[lower] - 1)]
        if len(fix) == 0 and len(down) == 0:
            break
        k[fix] += 1
        k[down] -= 1
    through = todo[passes(todo, k[todo])]
    costs = np.full(n, -1, dtype=np.int64)
    costs[through] = k[through]
    adds = tuple(
        _additions(view, cols[i][: costs[i]], sizes[i][: costs[i]]) if costs[i] > 0 else () for i in range(n)
    )
    return costs, adds


def _additions(view, cols: np.ndarray, sizes: np.ndarray) -> tuple[tuple[str, int], ...]:
    """(token, occurrences) per column, in the order first chosen."""
    unique, first, inverse = np.unique(cols, return_index=True, return_inverse=True)
    totals = np.bincount(inverse, weights=sizes).astype(int)
    order = np.argsort(first, kind="stable")
    return tuple((str(view.tokens[unique[i]]), int(totals[i])) for i in order)


# --- greedy: TF-IDF, several classes ----------------------------------------


def _to_pass(rule: DecisionRule, jll: np.ndarray) -> np.ndarray:
    """How far each row is from being let through (< 0 once through, up to ties)."""
    if rule.threshold is not None:
        return rule.flag_log_odds(jll) - rule.threshold_log_odds
    others = np.delete(jll, rule.normal_index, axis=1)
    return others.max(axis=1) - jll[:, rule.normal_index]


def _greedy(view, featurizer, rule, counts, jll, decided, ok, budget, presence, max_added):
    normal = rule.normal_index
    n = counts.shape[0]
    costs = np.full(n, -1, dtype=np.int64)
    adds = []
    for i in range(n):
        row = counts[i].toarray().ravel()
        target = int(decided[i])
        chosen: list[tuple[int, int]] = []
        used: set[int] = set()
        through = False
        for _ in range(max_added):
            size = unit_sizes(view, featurizer, row)
            allowed = ok & (size > 0)
            if budget == "distinct":
                allowed &= row == 0
                allowed[list(used)] = False
            pull = view.weights[target] - view.weights[normal]
            cand = np.flatnonzero(allowed & (pull < 0))
            if len(cand) == 0:
                break
            cand = cand[np.argsort(pull[cand], kind="stable")[:GREEDY_CANDIDATES]]
            jll = _score(view, featurizer, _with_one_more(row, cand, size[cand]))
            passed = np.flatnonzero(rule.decide(jll) == normal)
            distance = _to_pass(rule, jll)
            pick = passed[np.argmin(distance[passed])] if len(passed) else int(np.argmin(distance))
            col = int(cand[pick])
            row[col] += size[col]
            chosen.append((col, int(size[col])))
            used.add(col)
            target = int(rule.decide(jll[pick : pick + 1])[0])
            if len(passed):
                through = True
                break
        if through:
            costs[i] = len(chosen)
            adds.append(_additions(view, np.array([c for c, _ in chosen]), np.array([s for _, s in chosen])))
        else:
            adds.append(())
    return costs, tuple(adds)


def _with_one_more(row: np.ndarray, cand: np.ndarray, size: np.ndarray) -> sp.csr_matrix:
    """One count row per candidate: ``row`` with ``size[k]`` more of column ``cand[k]``, (len(cand), F) CSR.

    Only the message's own columns and the added one are stored, so a step
    costs candidates x (tokens in the message), not candidates x vocabulary.
    """
    present = np.flatnonzero(row)
    p, m = len(present), len(cand)
    indices = np.column_stack([np.tile(present, (m, 1)), cand[:, None]]).ravel()
    data = np.column_stack([np.tile(row[present], (m, 1)), size[:, None]]).ravel().astype(np.float64)
    block = sp.csr_matrix((data, indices, np.arange(0, m * (p + 1) + 1, p + 1)), shape=(m, len(row)))
    block.sum_duplicates()  # a repeated token adds to its own count
    return block


# --- summaries ----------------------------------------------------------------


def _summaries(view, costs, decided, limit: int | None) -> tuple[CostSummary, ...]:
    """Quartiles per decided class; a message not let through ranks above every evaded one.

    ``limit`` is the greedy search's cap (None for exact costs): a quartile
    among the messages past it is :class:`MoreThan` the cap; for exact costs
    it is :class:`MoreThan` with no limit, meaning no addition lets them through.
    """
    out = []
    for c in np.unique(decided):
        mine = costs[decided == c]
        ranked = np.where(mine < 0, np.inf, mine).astype(float)
        quart = [float(np.quantile(ranked, q, method="inverted_cdf")) for q in (0.25, 0.5, 0.75)]
        quart = [q if np.isfinite(q) else MoreThan(limit) for q in quart]
        out.append(
            CostSummary(
                flagged_class=str(view.classes[c]),
                messages=int(len(mine)),
                evaded=int((mine > 0).sum()),
                median=quart[1],
                q1=quart[0],
                q3=quart[2],
                within=tuple((k, float(((mine > 0) & (mine <= k)).mean())) for k in WITHIN),
            )
        )
    return tuple(out)


def _weak_points(view, rule, additions, top: int = 10) -> tuple[WeakPoint, ...]:
    used: dict[str, int] = {}
    for attack in additions:
        for token, _ in attack:
            used[token] = used.get(token, 0) + 1
    column = {str(t): j for j, t in enumerate(view.tokens) if str(t) in used}
    ranked = sorted(used.items(), key=lambda kv: (-kv[1], kv[0]))[:top]
    normal = rule.normal_index
    return tuple(
        WeakPoint(
            token=token,
            attacks=n,
            per_unit=tuple(
                float(view.weights[normal, column[token]] - view.weights[f, column[token]]) for f in rule.flagged_indices
            ),
            support=tuple(float(s) for s in view.feature_count[:, column[token]]),
        )
        for token, n in ranked
    )
