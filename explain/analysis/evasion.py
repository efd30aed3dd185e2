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
confirmed by re-scoring the new count rows exactly. For TF-IDF (an addition
re-normalises the row), argmax over more than two classes, or a threshold
over several flagged classes, the attack is built greedily, one unit at a
time, each step re-scored exactly over the :data:`GREEDY_CANDIDATES` tokens
pulling hardest toward the normal class, and labelled greedy.

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
class CostSummary:
    """Evasion costs of the messages decided as one flagged class (one budget).

    ``median``/``q1``/``q3`` are over every message of the class, counting a
    message not evaded within the limit as costing more than any evaded one
    (None when more than that share is unevaded); ``within[k]`` is the share
    evaded with at most ``k`` added units.
    """

    flagged_class: str
    messages: int
    evaded: int
    median: float | None
    q1: float | None
    q3: float | None
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

    ``costs``: int array (n_flagged,), units added, -1 where no attack within
    ``max_added`` was found; ``additions[i]``: ``(token, occurrences)`` pairs of
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


def evasion_costs(model, texts, rule: DecisionRule, max_added: int = 50) -> Evasion:
    """The cheapest additions that let every flagged message of ``texts`` through."""
    view, featurizer = model.view, model.featurizer
    if max_added < 1:
        raise NbledgerError(f"--max-added must be at least 1, got {max_added}")
    if rule.normal_index is None or view.n_classes < 2:
        raise NbledgerError("evasion needs a normal class to reach: name it with --normal-class")
    normal = rule.normal_index
    counts = raw_counts(featurizer, texts)
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
            summaries=_summaries(view, costs, decided, max_added),
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
    normal = rule.normal_index
    flagged = 1 - normal
    gain = view.weights[flagged] - view.weights[normal]  # margin change per unit, (F,)
    pull = np.flatnonzero(ok & (gain < 0))
    pull = pull[np.argsort(gain[pull], kind="stable")]  # most negative first
    n = counts.shape[0]
    costs = np.full(n, -1, dtype=np.int64)
    cols: list[np.ndarray] = [np.zeros(0, np.int64)] * n
    sizes: list[np.ndarray] = [np.zeros(0, np.int64)] * n
    if len(pull) == 0:
        return costs, tuple(() for _ in range(n))
    margin = jll[:, flagged] - jll[:, normal]
    if budget == "repeats" and not presence:
        # One token repeated k times: the margin is linear in k.
        best = pull[0]
        step = -gain[best]
        if rule.threshold is not None:
            k = np.floor((margin - rule.threshold_log_odds) / step) + 1
        else:
            k = np.ceil((margin) / step)
        k = np.clip(k, 1, max_added)
        cols = [np.full(max_added, best)] * n
        sizes = [np.ones(max_added, dtype=np.int64)] * n
    else:
        k = np.zeros(n, dtype=np.int64)
        indptr, indices, data = counts.indptr, counts.indices, counts.data
        for i in range(n):
            present = indices[indptr[i] : indptr[i + 1]]
            head = pull[: max_added + len(present)]
            if presence:
                lookup = dict(zip(present.tolist(), data[indptr[i] : indptr[i + 1]].tolist()))
                values = np.array([lookup.get(int(j), 0.0) for j in head])
                size = unit_sizes(view, featurizer, values)
                keep = size > 0
            else:
                keep = ~np.isin(head, present)
                size = np.ones(len(head), dtype=np.int64)
            chosen, size = head[keep][:max_added], size[keep][:max_added]
            row = margin[i] + np.cumsum(gain[chosen])
            if rule.threshold is not None:
                through = np.flatnonzero(row < rule.threshold_log_odds)
            else:
                through = np.flatnonzero(row <= 0)
            cols[i], sizes[i] = chosen, size
            k[i] = through[0] + 1 if len(through) else len(chosen)
    return _confirm_all(view, featurizer, rule, counts, cols, sizes, k, max_added)


def _confirm_all(view, featurizer, rule, counts, cols, sizes, k, max_added):
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
    for _ in range(max_added + 2):
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


def _summaries(view, costs, decided, max_added) -> tuple[CostSummary, ...]:
    out = []
    for c in np.unique(decided):
        mine = costs[decided == c]
        # Unevaded messages rank above every evaded one.
        ranked = np.where(mine < 0, np.inf, mine).astype(float)
        quart = [float(np.quantile(ranked, q, method="inverted_cdf")) for q in (0.25, 0.5, 0.75)]
        quart = [q if np.isfinite(q) else None for q in quart]
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
