"""One message's decision told as a ledger: opening balance, entries, closing balance.

The *balance* is a log-odds of one side (the *credit* side) against the
other (the *debit* side), on the scale the decision rule reads:

- **argmax** (no threshold): the predicted class ``A`` against the runner-up
  ``B``, oriented so that credit is the flagged side. When ``A`` is the
  normal class the credit side is ``B``; otherwise (``B`` normal, or neither
  normal, or no normal class) it is ``A``. ``balance = jll[credit] -
  jll[debit]`` with ``jll`` scikit-learn's ``predict_joint_log_proba``; the
  credit side wins when the balance is above 0 (at exactly 0, the class
  listed first wins, as in ``predict``).
- **threshold** ``t`` on P(not normal): ``balance = log P(not normal) - log
  P(normal) = logsumexp(jll[flagged classes]) - jll[normal]`` and the message
  is flagged when ``balance >= logit(t)``.

*Opening balance*: the balance of a message with no known token, split
into the log-prior line and, for BernoulliNB, the evidence of every
vocabulary token being absent (see :mod:`explain.model.model_view`).

*Entries*: one per distinct known token, in the order the tokens first
appear in the message. With two classes on the balance (argmax, or a
threshold over two classes) the balance is ``b[credit] - b[debit] + sum_j
x_j (W[credit, j] - W[debit, j])`` and each entry is its token's exact share
``x_j (W[credit, j] - W[debit, j])`` taken from
:func:`explain.analysis.evidence.explain_message` (with the sign turned when
the credit side is the runner-up). With a threshold over several flagged
classes the logsumexp does not split into shares; the running balance is
then the exact balance of the message's first entries (the joint
log-likelihoods summed up to that entry), each entry is the change it
makes, and the entries are labelled approximate: their sizes depend on the
order, their sum does not. Either way ``opening + sum(entries) == closing``
up to floating-point rounding.

*Where it tipped*: the entry after which the running balance is on the
decided side of the decision line and stays there; ``None`` when the
opening balance is already on that side and no entry takes it across.

*Disguised words*: unknown tokens whose Unicode confusable skeleton (UTS
#39, :mod:`explain.analysis.lookalike`) equals a known token's, with the
exact change of the balance had the known token been written instead
(the message re-scored with those occurrences added to its counts). Only
for word tokens: with character n-grams a look-alike letter changes
n-grams, not words, and none is reported.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp
from scipy.special import logit, logsumexp

from explain.analysis.evidence import Explanation, FlipSet, explain_message
from explain.analysis.lookalike import lookalikes
from explain.analysis.mail_facts import decoding_flags
from explain.analysis.risk import (
    FLAGS,
    PERSONAL_KINDS,
    RiskThresholds,
    Watchlist,
    personal_spans,
    risk_flags,
    token_traits,
    watchlist_columns,
)
from explain.analysis.vocab import DocumentCounts, count_source

Span = tuple[int, int]


@dataclass(frozen=True)
class Entry:
    """One distinct known token of the message, as a line of the ledger.

    Attributes
    ----------
    token : str
        The token as the vectorizer made it (a placeholder such as
        ``[e-mail 1]`` in a redacted ledger).
    column : int
        Its feature column in the model.
    occurrences : int
        How many times it occurs in the message.
    value : float
        What the classifier multiplies: count, 0/1 or TF-IDF weight.
    amount : float
        Its entry in the balance (log-odds, natural log): positive is a
        credit (toward the credit side), negative a debit.
    per_occurrence : float
        ``amount / occurrences``.
    direction : str
        ``"credit"``, ``"debit"`` or ``"even"`` (an amount of exactly 0).
    toward : str
        The class the entry pushes toward: the credit class (with several
        flagged classes, the most probable flagged class) or the debit class.
    balance_after : float
        The running balance after this entry.
    spans : tuple of (start, end)
        Character offsets ``[start, end)`` of its occurrences in the text;
        empty when positions are unknown (see ``Ledger.spans_note``).
    first_at : int
        Where it first appears: the character offset of its first
        occurrence, or its position in the analyzer's token list when
        character positions are unknown.
    support : tuple of float, shape (C,)
        Training support per class, aligned with ``Ledger.classes``; what is
        counted is ``Ledger.support_kind``.
    flags : tuple of str
        Risk flags of :mod:`explain.analysis.risk` (``thin``, ``personal``,
        ``numeric``, ``mixed-script``, ``stopword``, ``watchlist``).
    exact : bool
        True when ``amount`` is the token's exact share of the balance; False
        when it is the change it makes at its place in the order.
    """

    token: str
    column: int
    occurrences: int
    value: float
    amount: float
    per_occurrence: float
    direction: str
    toward: str
    balance_after: float
    spans: tuple[Span, ...]
    first_at: int
    support: tuple[float, ...]
    flags: tuple[str, ...]
    exact: bool


@dataclass(frozen=True)
class Unknown:
    """A token of the message that the model does not know (it has no effect).

    ``looks_like`` is the known token it is a disguise of (same UTS #39
    skeleton), or None; ``avoided`` the change of the balance had
    ``looks_like`` been written instead (None when not a disguise);
    ``spans`` its character offsets (empty when unknown).
    """

    token: str
    count: int
    spans: tuple[Span, ...]
    looks_like: str | None
    avoided: float | None


@dataclass(frozen=True)
class Summary:
    """The largest entries by size, and the rest folded into one line."""

    largest: tuple[Entry, ...]
    folded_count: int
    folded_total: float


@dataclass(frozen=True, eq=False)
class Ledger:
    """The account of one decision; presenters (terminal, JSON, HTML) only read it.

    Attributes
    ----------
    text : str
        The message (masked in a redacted ledger).
    message_id : str or None
        The message's id, when it came from a data file.
    classes : tuple of str, shape (C,)
        The model's classes, in its order.
    normal_class : str or None
        The class that lets a message through.
    rule : str
        ``"argmax"`` or ``"threshold"``.
    threshold : float or None
        The threshold on P(not normal), None for argmax.
    decision_line : float
        The balance at which the decision changes: 0 for argmax,
        ``logit(threshold)`` for a threshold (may be infinite).
    line_inclusive : bool
        True when a balance exactly on the line goes to the credit side.
    credit_side : str
        What a credit pushes toward: a class, or ``"flagged"`` with a
        threshold over several flagged classes.
    credit_classes : tuple of str
        The classes on the credit side (one, or every flagged class).
    debit_class : str
        What a debit pushes toward: the normal class, or the runner-up.
    balance_method : str
        How the balance is computed, in words.
    exact : bool
        True when every entry is its token's exact share of the balance.
    opening_prior : float
        The log-prior line of the opening balance.
    opening_absence : float
        BernoulliNB's absence line (0 for the other variants).
    opening : float
        ``opening_prior + opening_absence``.
    entries : tuple of Entry
        In order of first appearance.
    closing : float
        The balance of the whole message, computed from the joint
        log-likelihoods directly (not by summing the entries).
    decision : str
        The class decided.
    credit_wins : bool
        True when the closing balance is on the credit side of the line.
    probabilities : tuple of float, shape (C,)
        ``predict_proba`` of the message.
    flag_probability : float or None
        P(not normal), None without a normal class.
    tipped_at : int or None
        Index into ``entries`` of the entry after which the running balance
        reached the decided side and stayed there; None when the opening
        balance already was there and never left it.
    unknown : tuple of Unknown
        Tokens not in the vocabulary, most frequent first.
    flip : FlipSet
        The token occurrences whose removal changes the decision
        (:class:`explain.analysis.evidence.FlipSet`); the plain-words form is
        :func:`explain.present.wording.flip_sentence`.
    support_kind : str
        What ``Entry.support`` counts: ``"documents"`` (training messages
        holding the token: known with binary features or a labelled file),
        ``"occurrences"`` or ``"tfidf-weights"``.
    support_source : str or None
        The labelled file the document counts come from, None otherwise.
    model_path : str or None
    model_sha256 : str
        SHA-256 of the model file ("" for a model built in memory).
    model_fingerprint : str or None
        SHA-256 of what decides (:mod:`explain.model.fingerprint`); None when unknown.
    card_date : str or None
        The model card's ``created`` timestamp, when there is a card.
    variant, feature_kind : str
        As in :class:`explain.model.model_view.ModelView`.
    spans_note : str or None
        Why character positions are unknown, or None.
    redacted : bool
        True when personal-looking values were masked.
    explanation : Explanation
        The per-token account the ledger was built from (masked alike when
        redacted); the ``nbledger.why/1`` keys come from it.
    """

    text: str
    message_id: str | None
    classes: tuple[str, ...]
    normal_class: str | None
    rule: str
    threshold: float | None
    decision_line: float
    line_inclusive: bool
    credit_side: str
    credit_classes: tuple[str, ...]
    debit_class: str
    balance_method: str
    exact: bool
    opening_prior: float
    opening_absence: float
    opening: float
    entries: tuple[Entry, ...]
    closing: float
    decision: str
    credit_wins: bool
    probabilities: tuple[float, ...]
    flag_probability: float | None
    tipped_at: int | None
    unknown: tuple[Unknown, ...]
    flip: FlipSet
    support_kind: str
    support_source: str | None
    model_path: str | None
    model_sha256: str
    card_date: str | None
    variant: str
    feature_kind: str
    spans_note: str | None
    redacted: bool
    explanation: Explanation
    #: True when the tokens are character n-grams (analyzer "char" or "char_wb"), which overlap
    character_ngrams: bool = False
    #: True when the model's view came from the cache of loaded models rather than the model file
    model_from_cache: bool = False
    model_fingerprint: str | None = None

    def character_heat(self) -> np.ndarray:
        """Evidence per character of ``text``, shape (len(text),), in log-odds.

        Each character carries the sum of the per-occurrence evidence of every
        token occurrence whose span covers it: for overlapping character n-grams,
        the heat of a letter is what every n-gram through it adds. Characters
        outside every span carry 0.
        """
        heat = np.zeros(len(self.text))
        for e in self.entries:
            for a, b in e.spans:
                heat[a : min(b, len(heat))] += e.per_occurrence
        return heat

    def on_credit_side(self, balance: float) -> bool:
        """Whether a balance lies on the credit side of the decision line."""
        return balance > self.decision_line or (self.line_inclusive and balance == self.decision_line)

    @property
    def disguised(self) -> tuple[Unknown, ...]:
        """The unknown tokens that are look-alikes of known tokens."""
        return tuple(u for u in self.unknown if u.looks_like is not None)

    def summary(self, n: int) -> Summary:
        """The ``n`` largest entries by size (in order of appearance) and the rest folded."""
        order = sorted(range(len(self.entries)), key=lambda i: (-abs(self.entries[i].amount), i))
        chosen = sorted(order[:n])
        rest = order[n:]
        return Summary(
            tuple(self.entries[i] for i in chosen),
            len(rest),
            math.fsum(self.entries[i].amount for i in rest),
        )


def ledger_of(
    model,
    text: str,
    threshold: float | None = None,
    *,
    threshold_log_odds: float | None = None,
    message_id: str | None = None,
    documents: DocumentCounts | None = None,
    watchlist: Watchlist | None = None,
    thresholds: RiskThresholds = RiskThresholds(),
    mail=None,
) -> Ledger:
    """The ledger of ``text`` under a loaded model (:class:`explain.model.loading.LoadedModel`).

    ``documents`` (from :func:`explain.analysis.vocab.document_counts`) makes
    the support of each entry a count of training messages. ``mail``
    (:class:`explain.analysis.mail_facts.MailFacts`) says what was read when
    ``text`` came from a raw e-mail; it travels on the explanation.
    """
    expl = explain_message(model, text, threshold, threshold_log_odds, mail=mail)
    if threshold_log_odds is not None:
        threshold = expl.threshold  # expit of it, for display; the line below stays exact
    view, featurizer = model.view, model.featurizer
    classes = list(expl.classes)
    normal = None if expl.normal_class is None else classes.index(expl.normal_class)
    a, b = classes.index(expl.predicted), classes.index(expl.runner_up)
    if threshold is not None:
        credit = [c for c in range(len(classes)) if c != normal]
        debit = normal
    else:
        credit, debit = ([b], a) if a == normal else ([a], b)
    additive = len(credit) == 1
    top_credit = credit[int(np.argmax(expl.jll[credit]))]

    def balance(jll: np.ndarray) -> np.ndarray:
        """The balance of each row of joint log-likelihoods, shape (n, C) -> (n,)."""
        return logsumexp(jll[:, credit], axis=1) - jll[:, debit]

    occ = featurizer.occurrences(text)
    first_index: dict[int, int] = {}
    for i, col in enumerate(occ.columns):
        first_index.setdefault(int(col), i)

    def first_at(t) -> int:
        return t.spans[0][0] if t.spans else first_index[t.column]

    tokens = sorted(expl.tokens, key=lambda t: (first_at(t), first_index[t.column]))
    cols = np.array([t.column for t in tokens], dtype=np.int64)
    values = np.array([t.value for t in tokens])
    if additive:
        sign = 1.0 if credit[0] == a else -1.0
        opening_prior, opening_absence = sign * expl.baseline_prior, sign * expl.baseline_absence
        amounts = np.array([sign * t.evidence for t in tokens])
        running = opening_prior + opening_absence + np.cumsum(amounts)
        ratio = view.weights[credit[0], cols] - view.weights[debit, cols]
    else:
        prior = balance(view.prior[None, :])[0]
        opening_prior = float(prior)
        opening_absence = float(balance(view.baseline[None, :])[0] - prior)
        partial = view.baseline + np.cumsum(values[:, None] * view.weights[:, cols].T, axis=0)
        running = balance(partial)
        amounts = np.diff(np.concatenate([[opening_prior + opening_absence], running]))
        ratio = view.weights[top_credit, cols] - view.weights[debit, cols]
    closing = float(balance(expl.jll[None, :])[0])

    if threshold is None:
        line = 0.0
    else:
        line = float(threshold_log_odds) if threshold_log_odds is not None else float(logit(threshold))
    inclusive = threshold is not None or credit[0] < debit

    def credit_side_of(x) -> np.ndarray:
        x = np.asarray(x)
        return (x > line) | (inclusive & (x == line))

    credit_wins = bool(credit_side_of(closing))
    tipped_at = None
    if len(tokens):
        off_side = np.flatnonzero(credit_side_of(running) != credit_wins)
        if len(off_side):
            # The last entry can sit off side only by rounding on a tie; it then tips there.
            tipped_at = min(int(off_side[-1]) + 1, len(tokens) - 1)
        elif bool(credit_side_of(opening_prior + opening_absence)) != credit_wins:
            tipped_at = 0

    # Training support: message counts when known, else the model's own totals.
    kind = count_source(view, documents).kind
    counts = documents.counts if documents is not None else view.feature_count
    sides = [top_credit, debit]
    flag_mask = risk_flags(
        token_traits([t.token for t in tokens]),
        ratio,
        view.feature_count[sides][:, cols].sum(axis=0),
        _watched(watchlist, [t.token for t in tokens]),
        thresholds,
    )
    entries = tuple(
        Entry(
            token=t.token,
            column=t.column,
            occurrences=t.occurrences,
            value=t.value,
            amount=float(amounts[i]),
            per_occurrence=float(amounts[i]) / max(t.occurrences, 1),
            direction="credit" if amounts[i] > 0 else "debit" if amounts[i] < 0 else "even",
            toward=classes[top_credit] if amounts[i] >= 0 else classes[debit],
            balance_after=float(running[i]),
            spans=t.spans,
            first_at=int(first_at(t)),
            support=tuple(float(v) for v in counts[:, t.column]),
            flags=decoding_flags(
                tuple(FLAGS[k] for k in np.flatnonzero(flag_mask[:, i])), t.spans, getattr(expl.mail, "fallback_ranges", ()),
            ),
            exact=additive,
        )
        for i, t in enumerate(tokens)
    )

    normal_name = None if normal is None else classes[normal]
    if threshold is None:
        c, d = classes[credit[0]], classes[debit]
        method = f"log-odds of {c} against {d} = jll[{c}] - jll[{d}]"
        credit_name = classes[credit[0]]
    elif additive:
        method = f"log P(flag) - log P({normal_name}) = jll[{classes[credit[0]]}] - jll[{normal_name}]"
        credit_name = classes[credit[0]]
    else:
        names = ", ".join(classes[c] for c in credit)
        # A logsumexp does not split into per-token shares: the entries say they are approximate.
        method = f"log P(flag) - log P({normal_name}) = logsumexp(jll[{names}]) - jll[{normal_name}]"
        credit_name = "flagged"

    card = getattr(model, "card", None) or {}
    return Ledger(
        text=text,
        message_id=None if message_id is None else str(message_id),
        classes=tuple(classes),
        normal_class=normal_name,
        rule="argmax" if threshold is None else "threshold",
        threshold=threshold,
        decision_line=line,
        line_inclusive=bool(inclusive),
        credit_side=credit_name,
        credit_classes=tuple(classes[c] for c in credit),
        debit_class=classes[debit],
        balance_method=method,
        exact=additive,
        opening_prior=float(opening_prior),
        opening_absence=float(opening_absence),
        opening=float(opening_prior + opening_absence),
        entries=entries,
        closing=closing,
        decision=expl.decision,
        credit_wins=credit_wins,
        probabilities=tuple(float(p) for p in expl.probabilities),
        flag_probability=expl.flag_probability,
        tipped_at=tipped_at,
        unknown=_unknown(model, occ, expl, balance, closing),
        flip=expl.flip,
        support_kind=kind,
        support_source=None if documents is None else documents.source,
        model_path=None if model.path is None else str(model.path),
        model_sha256=model.sha256,
        model_fingerprint=getattr(model, "fingerprint", None),
        card_date=card.get("created"),
        variant=expl.variant,
        feature_kind=expl.feature_kind,
        spans_note=expl.spans_note,
        redacted=False,
        explanation=expl,
        character_ngrams=str(model.featurizer.vectorizer.analyzer) in ("char", "char_wb"),
        model_from_cache=bool(getattr(model, "from_cache", False)),
    )


def _watched(watchlist: Watchlist | None, tokens: list[str]) -> np.ndarray:
    watched = np.zeros(len(tokens), dtype=bool)
    if watchlist is not None:
        found = watchlist_columns(watchlist.terms, tokens)
        watched[found[found >= 0]] = True
    return watched


def _unknown(model, occ, expl: Explanation, balance, closing: float) -> tuple[Unknown, ...]:
    """Unknown tokens, each with the known token it disguises and the balance it avoided."""
    view, featurizer = model.view, model.featurizer
    spans: dict[str, list[Span]] = {}
    if occ.spans is not None:
        for token, col, span in zip(occ.tokens, occ.columns, occ.spans):
            if col < 0:
                spans.setdefault(token, []).append(span)
    # Character n-grams are pieces of words: a look-alike piece is no disguised word.
    words = featurizer.vectorizer.analyzer == "word"
    disguises = lookalikes([t for t, _ in expl.unknown_tokens], view.tokens) if words else {}
    wanted = set(disguises.values())
    index = {t: j for j, t in enumerate(view.tokens) if t in wanted} if wanted else {}
    counts = occ.counts(view.n_features).toarray()
    found = []
    for token, n in expl.unknown_tokens:
        known = disguises.get(token)
        avoided = None
        if known is not None:
            # Re-score the message as if the known token had been written instead.
            plain = counts.copy()
            plain[0, index[known]] += n
            jll = view.joint_log_likelihood(view.prepare(featurizer.weigh(sp.csr_matrix(plain))))
            avoided = float(balance(jll)[0] - closing)
        found.append(Unknown(token, n, tuple(spans.get(token, ())), known, avoided))
    return tuple(found)


# --- redaction ----------------------------------------------------------------


def redacted(ledger: Ledger) -> Ledger:
    """The same ledger with personal-looking values masked in the text and every token list.

    Values found in the text (:func:`explain.analysis.risk.personal_spans`)
    become numbered placeholders such as ``[e-mail 1]``; a token is masked
    when every occurrence of it overlaps such a value, or when it looks
    personal itself (the ``personal`` flag); so is a personal-looking message id. Spans
    are moved to the masked text. Amounts and balances are unchanged.
    """
    if ledger.redacted:
        return ledger
    found = personal_spans(ledger.text)
    # One value, one placeholder: the same person (or number) is "[name 2]" everywhere in the text.
    numbers = placeholder_numbers(ledger.text, found)
    marks = [(s, e, f"[{kind} {n}]") for (s, e, kind), n in zip(found, numbers)]
    names: dict[str, str] = {}
    extra: list[str] = []

    def mask(token: str, spans=()) -> str:
        """The token's placeholder when it overlaps a masked value or looks personal itself."""
        if token not in names:
            # A word that also occurs outside every masked value reveals none of them.
            inside = [next((ph for s, e, ph in marks if a < e and s < b), None) for a, b in spans]
            hit = inside[0] if inside and all(inside) else None
            traits = token_traits([token])
            if hit is None and traits.personal[0]:
                hit = f"[{PERSONAL_KINDS[traits.personal_kind[0]]} {max(numbers, default=0) + len(extra) + 1}]"
                extra.append(hit)
            names[token] = hit or token
        return names[token]

    text, moved = _masked_text(ledger.text, marks)
    entries = tuple(
        replace(e, token=mask(e.token, e.spans), spans=moved(e.spans)) for e in ledger.entries
    )
    unknown = tuple(
        replace(u, token=mask(u.token, u.spans), spans=moved(u.spans),
                looks_like=None if u.looks_like is None else mask(u.looks_like))
        for u in ledger.unknown
    )
    flip = replace(ledger.flip, removals=tuple((mask(t), n) for t, n in ledger.flip.removals))
    expl = ledger.explanation
    expl = replace(
        expl,
        text=text,
        tokens=tuple(replace(t, token=mask(t.token, t.spans), spans=moved(t.spans)) for t in expl.tokens),
        unknown_tokens=tuple((mask(t), n) for t, n in expl.unknown_tokens),
        flip=flip,
    )
    # Ids identify messages, not people: kept as given (an id holding an address is pseudonymised by the caller).
    return replace(
        ledger, text=text, entries=entries, unknown=unknown, flip=flip, redacted=True,
        explanation=expl,
    )


def placeholder_numbers(text: str, found) -> list[int]:
    """The number of each found ``(start, end, kind)``: one value, one number; a name sharing a word with an
    earlier name ("Oksana" after "Oksana Petrenko") is the same person and keeps that name's number."""
    numbers: dict[tuple[str, str], int] = {}
    name_words: dict[str, int] = {}
    out = []
    for s, e, kind in found:
        value = " ".join(text[s:e].lower().split())
        if (kind, value) not in numbers:
            known = [name_words[w] for w in value.split() if kind == "name" and w in name_words]
            numbers[kind, value] = known[0] if known else max(numbers.values(), default=0) + 1
        if kind == "name":
            for w in value.split():
                name_words.setdefault(w, numbers[kind, value])
        out.append(numbers[kind, value])
    return out


def _masked_text(text: str, marks: list[tuple[int, int, str]]):
    """``text`` with each ``(start, end, placeholder)`` put in, and a function moving spans to it."""
    pieces, shift, moves, at = [], 0, [], 0
    for s, e, ph in marks:
        pieces += [text[at:s], ph]
        moves.append((s, e, s + shift, ph))
        shift += len(ph) - (e - s)
        at = e
    pieces.append(text[at:])

    def position(p: int) -> int:
        delta = 0
        for s, e, new, ph in moves:
            if e <= p:
                delta = new + len(ph) - e
        return p + delta

    def moved(spans) -> tuple[Span, ...]:
        out = []
        for a, b in spans:
            inside = next(((new, new + len(ph)) for s, e, new, ph in moves if a < e and s < b), None)
            out.append(inside or (position(a), position(b)))
        return tuple(dict.fromkeys(out))

    return "".join(pieces), moved
