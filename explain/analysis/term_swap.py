"""Does the filter treat groups of people alike? Exact term swaps.

A swap-terms file lists groups of interchangeable terms (religion,
nationality, gender, disability words ...). For every message that contains
a term, each other term of its group is substituted for every occurrence and
the message is re-scored exactly; the changes measure counterfactual token
fairness (Garg et al. 2019, "Counterfactual Fairness in Text Classification
through Robustness", AIES 2019). Their *counterfactual token fairness gap*
of a message ``x`` with counterfactuals ``Phi(x)`` is
``mean over x' in Phi(x) of |f(x) - f(x')|``, here with ``f`` = P(flag);
a group's gap is the mean over the messages holding one of its terms, a term
pair's gap the mean over the messages holding the first term. A group or a
pair that no message holds is *untested*: its gap is None (null in JSON),
never 0, which would read as "treated alike".

A substitution changes only the counts of the two tokens (for a word
analyzer of single words), so the new rows are built from the count matrix
and scored at once; with word n-grams the substituted texts are built from
the analyzer's character spans and re-featurised. Terms are matched as the
model's own analyzer reads them (its case folding and word boundaries).
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from scipy.special import expit

from explain.analysis.evasion import raw_counts
from explain.analysis.evidence import _score
from explain.errors import NbledgerError
from explain.model.decision import DecisionRule
from explain.model.input_files import term_text

#: Texts tokenised at a time when looking for terms (memory for their tokens, not for all of them).
TOKENISE_ROWS = 10_000


@dataclass(frozen=True)
class TermGroup:
    """A group of interchangeable terms; ``tokens[i]`` is how the model reads ``terms[i]``."""

    name: str
    terms: tuple[str, ...]
    tokens: tuple[str, ...]


@dataclass(frozen=True)
class SwapTerms:
    """The usable groups of a swap-terms file and what was set aside (``notes``, one a problem)."""

    groups: tuple[TermGroup, ...]
    notes: tuple[str, ...]


@dataclass(frozen=True)
class TermEvidence:
    """One term's evidence per occurrence toward every class against the normal class.

    ``evidence[c] = W[c, j] - W[normal, j]`` in the model's class order (0 for
    the normal class); all zeros and ``known`` False when the model does not
    know the token (it then has no effect).
    """

    group: str
    term: str
    token: str
    known: bool
    evidence: tuple[float, ...]
    support: float


@dataclass(frozen=True)
class PairShift:
    """Swapping ``source`` for ``target`` in every message holding ``source``.

    Shifts are target minus source; ``gap`` is the mean absolute change in
    P(flag) (Garg et al.'s gap restricted to this pair). A pair whose source
    no message holds is untested: ``messages`` 0 and the shifts and gap None.
    """

    group: str
    source: str
    target: str
    messages: int
    decisions_changed: int
    mean_log_odds_shift: float | None
    mean_probability_shift: float | None
    gap: float | None

    @property
    def tested(self) -> bool:
        return self.messages > 0


@dataclass(frozen=True)
class GroupFairness:
    """One group over the data: messages holding a term, swaps scored, decisions changed, the gap.

    ``gap`` is None when no message holds a term of the group (untested).
    """

    group: str
    messages: int
    swaps: int
    decisions_changed: int
    gap: float | None

    @property
    def tested(self) -> bool:
        return self.messages > 0


@dataclass(frozen=True, eq=False)
class TermSwaps:
    """Every swap scored (arrays of length n_swaps) and their summaries.

    ``message`` indexes the data; ``group``/``source``/``target`` name the
    swap; ``log_odds_before``/``after`` are flag log-odds
    (``log P(flag) - log P(normal)``); ``decision_before``/``after``
    class names.
    """

    terms: SwapTerms
    evidence: tuple[TermEvidence, ...]
    message: np.ndarray
    group: np.ndarray
    source: np.ndarray
    target: np.ndarray
    log_odds_before: np.ndarray
    log_odds_after: np.ndarray
    decision_before: np.ndarray
    decision_after: np.ndarray
    pairs: tuple[PairShift, ...]
    groups: tuple[GroupFairness, ...]
    messages_scanned: int


# --- the file -------------------------------------------------------------------


def read_swap_terms(path, featurizer) -> SwapTerms:
    """Read a swap-terms file (UTF-8): one group a line, ``name: a, b, c`` or ``a, b, c``, ``#`` comments."""
    path = Path(path)
    return parse_swap_terms(term_text(path, "swap-terms file"), featurizer, str(path))


def parse_swap_terms(text: str, featurizer, name: str = "the swap-terms file") -> SwapTerms:
    """Groups of single-token terms, as the model's analyzer reads them, and notes on what was set aside."""
    if featurizer.vectorizer.analyzer != "word":
        raise NbledgerError("term swaps need a model that reads words; this one reads character n-grams")
    analyze = featurizer._analyzer
    groups, notes, seen = [], [], {}
    for number, line in enumerate(text.splitlines(), start=1):
        line = line.split("#", 1)[0].strip()
        if not line:
            continue
        label = f"line {number}"
        head, colon, rest = line.partition(":")
        if colon and "," not in head:
            label, line = head.strip() or label, rest
        terms, tokens = [], []
        for term in (t.strip() for t in line.split(",")):
            if not term:
                continue
            read = [t for t in analyze(term) if " " not in t]
            if len(read) != 1:
                how = "no token" if not read else f"{len(read)} tokens ({', '.join(read)})"
                notes.append(f"{label}: {term!r} is {how} to the model's tokenizer; left out")
                continue
            token = read[0]
            where = label if token in tokens else seen.get(token)
            if where is not None:
                notes.append(f"{label}: {term!r} reads as {token!r}, already in {where}; left out here")
                continue
            terms.append(term)
            tokens.append(token)
        if len(terms) < 2:
            notes.append(f"{label}: fewer than two usable terms, so nothing to swap; group left out")
            continue
        seen.update((token, label) for token in tokens)
        groups.append(TermGroup(label, tuple(terms), tuple(tokens)))
    if not groups:
        detail = f" ({'; '.join(notes)})" if notes else ""
        raise NbledgerError(f"{name} has no group of two or more usable terms{detail}")
    return SwapTerms(tuple(groups), tuple(notes))


# --- evidence without data --------------------------------------------------------


def term_evidence(view, rule: DecisionRule, terms: SwapTerms) -> tuple[TermEvidence, ...]:
    """Each term's per-occurrence evidence toward every class against the normal class."""
    column = {str(t): j for j, t in enumerate(view.tokens)}
    normal = rule.normal_index
    out = []
    for group in terms.groups:
        for term, token in zip(group.terms, group.tokens):
            j = column.get(token)
            if j is None:
                out.append(TermEvidence(group.name, term, token, False, (0.0,) * view.n_classes, 0.0))
                continue
            w = view.weights[:, j]
            out.append(
                TermEvidence(
                    group.name, term, token, True,
                    tuple(float(x) for x in w - w[normal]),
                    float(view.feature_count[:, j].sum()),
                )
            )
    return tuple(out)


# --- swaps over data ------------------------------------------------------------


def term_swaps(model, texts, rule: DecisionRule, terms: SwapTerms) -> TermSwaps:
    """Score every substitution of a term by another of its group, in every message holding it."""
    view, featurizer = model.view, model.featurizer
    if rule.normal_index is None:
        raise NbledgerError("term swaps need a normal class: name it with --normal-class")
    token_group = {tok: (g, i) for g, group in enumerate(terms.groups) for i, tok in enumerate(group.tokens)}
    rows, sources, targets, found, already = [], [], [], [], []
    hits, hit_tokens = [], []
    for i, counts, tokens in _term_counts(featurizer, texts, token_group):
        hits.append(i)
        hit_tokens.append(tokens)
        for tok, n in counts.items():
            g, s = token_group[tok]
            for t in range(len(terms.groups[g].tokens)):
                if t != s:
                    rows.append(i)
                    sources.append((g, s))
                    targets.append(t)
                    found.append(n)
                    already.append(counts.get(terms.groups[g].tokens[t], 0))
    message = np.asarray(rows, dtype=np.int64)
    if len(message):
        if all(t is not None for t in hit_tokens):  # the texts were tokenised once already
            before = featurizer.counts_of_tokens(hit_tokens)
            if featurizer.vectorizer.binary:
                before.data[:] = 1.0
        else:
            before = raw_counts(featurizer, [texts[i] for i in hits])
        where = {i: r for r, i in enumerate(hits)}
        base = before[[where[i] for i in message]]
        group_of = np.array([g for g, _ in sources], dtype=np.int64)
        src_tok = [terms.groups[g].tokens[s] for g, s in sources]
        tgt_tok = [terms.groups[g].tokens[t] for (g, _), t in zip(sources, targets)]
        after = _substituted(model, texts, message, base, src_tok, tgt_tok, found, already)
        jll_before = _score(view, featurizer, base)
        jll_after = _score(view, featurizer, after)
    else:
        group_of = np.zeros(0, dtype=np.int64)
        src_tok, tgt_tok = [], []
        jll_before = jll_after = np.zeros((0, view.n_classes))
    names = view.classes
    lo_before, lo_after = rule.flag_log_odds(jll_before), rule.flag_log_odds(jll_after)
    d_before, d_after = names[rule.decide(jll_before)], names[rule.decide(jll_after)]
    src_term = np.array([terms.groups[g].terms[s] for g, s in sources], dtype=object)
    tgt_term = np.array([terms.groups[g].terms[t] for (g, _), t in zip(sources, targets)], dtype=object)
    group_name = np.array([terms.groups[g].name for g in group_of], dtype=object)
    p_shift = expit(lo_after) - expit(lo_before)
    changed = d_before != d_after
    return TermSwaps(
        terms=terms,
        evidence=term_evidence(view, rule, terms),
        message=message,
        group=group_name,
        source=src_term,
        target=tgt_term,
        log_odds_before=lo_before,
        log_odds_after=lo_after,
        decision_before=d_before,
        decision_after=d_after,
        pairs=_pairs(terms, group_name, src_term, tgt_term, message, lo_after - lo_before, p_shift, changed),
        groups=_groups(terms, group_name, message, p_shift, changed),
        messages_scanned=len(texts),
    )


def _term_counts(featurizer, texts, token_group):
    """``(row, {token: occurrences}, tokens)`` for every text holding a term, as the model's analyzer reads it.

    With a plain word analyzer (:meth:`Featurizer.plain_tokens`) each text is
    tokenised once and its tokens come along, so that the counts before the
    swap need no second pass; otherwise scikit-learn's analyzer runs and
    ``tokens`` is None. Texts are tokenised :data:`TOKENISE_ROWS` at a time.
    """
    terms = frozenset(token_group)
    analyze = featurizer._analyzer
    for start in range(0, len(texts), TOKENISE_ROWS):
        batch = texts[start : start + TOKENISE_ROWS]
        lists = featurizer.plain_tokens(batch) or [None] * len(batch)
        for i, (text, tokens) in enumerate(zip(batch, lists), start=start):
            if tokens is None:
                found = Counter(t for t in analyze(text) if t in terms)
                if found:
                    yield i, dict(found), None
            elif not terms.isdisjoint(tokens):
                yield i, dict(Counter(t for t in tokens if t in terms)), tokens


def _substituted(model, texts, message, base, src_tok, tgt_tok, found, already) -> sp.csr_matrix:
    """Count rows after each substitution (all occurrences of the source become the target).

    ``found[r]``/``already[r]``: occurrences of swap r's source and target in its message.
    """
    featurizer = model.featurizer
    vec = featurizer.vectorizer
    if vec.ngram_range == (1, 1):
        column = vec.vocabulary_
        rows, cols, vals = [], [], []
        for r, (s, t, n, m) in enumerate(zip(src_tok, tgt_tok, found, already)):
            # An unknown token has no column: removing or adding it changes nothing.
            # A binary vectorizer stores 1 however often a token occurs.
            if s in column:
                rows.append(r), cols.append(column[s]), vals.append(-1.0 if vec.binary else -float(n))
            if t in column:
                add = float(m == 0) if vec.binary else float(n)
                rows.append(r), cols.append(column[t]), vals.append(add)
        delta = sp.csr_matrix((vals, (rows, cols)), shape=base.shape)
        out = sp.csr_matrix(base + delta)
        out.eliminate_zeros()
        return out
    new_texts = [substitute(featurizer, texts[i], s, t) for i, s, t in zip(message, src_tok, tgt_tok)]
    return raw_counts(featurizer, new_texts)


def substitute(featurizer, text: str, source: str, target: str) -> str:
    """``text`` with every occurrence of the token ``source`` replaced by ``target`` (by the analyzer's spans)."""
    occ = featurizer.occurrences(text)
    if occ.spans is None:
        raise NbledgerError(f"term swaps with n-grams need token positions, and {occ.spans_note}")
    spans = sorted(span for tok, span in zip(occ.tokens, occ.spans) if tok == source)
    pieces, last = [], 0
    for a, b in spans:
        pieces.append(text[last:a])
        pieces.append(target)
        last = b
    pieces.append(text[last:])
    return "".join(pieces)


def _pairs(terms, group_name, src, tgt, message, lo_shift, p_shift, changed) -> tuple[PairShift, ...]:
    """Every ordered pair of every group; those whose source no message holds are untested (None figures)."""
    out = []
    for group in terms.groups:
        for a in group.terms:
            for b in group.terms:
                if a == b:
                    continue
                sel = (group_name == group.name) & (src == a) & (tgt == b)
                if not sel.any():
                    out.append(PairShift(group.name, a, b, 0, 0, None, None, None))
                    continue
                out.append(
                    PairShift(
                        group.name, a, b, int(len(np.unique(message[sel]))), int(changed[sel].sum()),
                        float(lo_shift[sel].mean()), float(p_shift[sel].mean()), float(np.abs(p_shift[sel]).mean()),
                    )
                )
    return tuple(out)


def _groups(terms, group_name, message, p_shift, changed) -> tuple[GroupFairness, ...]:
    out = []
    for group in terms.groups:
        sel = group_name == group.name
        held, which = np.unique(message[sel], return_inverse=True)
        # Garg et al.: each message's gap is the mean over its counterfactuals; the group's the mean over messages.
        gaps = np.bincount(which, weights=np.abs(p_shift[sel])) / np.bincount(which) if len(held) else np.zeros(0)
        out.append(
            GroupFairness(
                group.name, int(len(held)), int(sel.sum()), int(changed[sel].sum()),
                float(gaps.mean()) if len(gaps) else None,
            )
        )
    return tuple(out)
