"""One message's decision told as a ledger: opening balance, entries, closing balance.

The *balance* is a log-odds of one side (the *credit* side) against the
other (the *debit* side), on the scale the decision rule reads:

- **argmax** (no threshold), a normal class known: the balance answers the
  decision's question. A flagged message is its decided class ``d`` against
  the normal class ``n``: ``balance = jll[d] - jll[n]`` (``beat`` adds how far
  ``d`` also led the strongest other flagged class). A message let through is
  the normal class against the strongest flagged class ``f``: ``balance =
  jll[n] - jll[f]``. ``jll`` is scikit-learn's ``predict_joint_log_proba``;
  the credit side wins when the balance is above 0 (at exactly 0, the class
  listed first wins, as in ``predict``).
- **argmax without a normal class**: the predicted class against the
  runner-up, and the ledger says so (``versus``).
- **threshold** ``t`` on P(not normal): ``balance = log P(not normal) - log
  P(normal) = logsumexp(jll[flagged classes]) - jll[normal]`` and the message
  is flagged when ``balance >= logit(t)``.

The comparison per message is :meth:`explain.model.decision.DecisionRule.sides`,
the same one the ledger of many messages and the error review use, so a
message has one set of entries everywhere.

*Opening balance*: the balance of a message with no known token, split
into the log-prior line and, for BernoulliNB, the evidence of every
vocabulary token being absent (see :mod:`explain.model.model_view`).

*Entries*: one per distinct known token, in the order the tokens first
appear in the message. With two classes on the balance (argmax, or a
threshold over two classes) the balance is ``b[credit] - b[debit] + sum_j
x_j (W[credit, j] - W[debit, j])`` and each entry is its token's exact share
``x_j (W[credit, j] - W[debit, j])`` of the values in the explanation
(:func:`explain.analysis.evidence.explain_message`). With a threshold over several flagged
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
from scipy.special import logsumexp

from explain.analysis.evidence import Explanation, FlipSet, explain_message
from explain.model.decision import VERSUS, DecisionRule
from explain.model.featurizer import Occurrences
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
        What a debit pushes toward: the normal class, the strongest flagged
        class (a message let through by the most probable class), or the
        runner-up (no normal class).
    credit_class : str
        The class credits push toward: the credit side, or with a threshold
        over several flagged classes the most probable flagged class.
        Presenters read it; they never work it out from probabilities.
    versus : str
        What the balance compares, a key of
        :data:`explain.model.decision.VERSUS` (glossary: versus).
    beat : (str, float) or None
        A flagged decision by the most probable class with other flagged
        classes: the strongest other flagged class and the decided class's
        lead over it, ``jll[decided] - jll[other]``; else None.
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
    credit_class: str
    versus: str
    beat: tuple[str, float] | None
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
    #: the text view the message was read in: ``raw`` (as given) or a mail view; None when not said
    text_view: str | None = None

    @property
    def versus_words(self) -> str:
        """What the balance compares, in words (:data:`explain.model.decision.VERSUS`)."""
        return VERSUS[self.versus]

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
    text_view: str | None = None,
) -> Ledger:
    """The ledger of ``text`` under a loaded model (:class:`explain.model.loading.LoadedModel`).

    Tokenises ``text`` once, explains it (:func:`explain.analysis.evidence.explain_message`)
    and tells the explanation as a ledger (:func:`ledger_from`); the arguments are theirs.
    ``mail`` (:class:`explain.analysis.mail_facts.MailFacts`) says what was read when
    ``text`` came from a raw e-mail; it travels on the explanation.
    """
    # Hashed features: no stored vocabulary, so columns are named by the message's own tokens.
    model = model.named_for([text])
    occ = model.featurizer.occurrences(text)
    expl = explain_message(model, text, threshold, threshold_log_odds, mail=mail, occurrences=occ)
    return ledger_from(
        model, expl, occ, threshold_log_odds=threshold_log_odds, message_id=message_id, documents=documents,
        watchlist=watchlist, thresholds=thresholds, text_view=text_view,
    )


@dataclass(frozen=True)
class _Sides:
    """The comparison a ledger tells, as class indices.

    ``credit``: one class, or every flagged class (a threshold over several);
    ``top``: the credit class the entries point toward; ``beat``: for a
    flagged decision by the most probable class, the strongest other flagged
    class and the decided class's lead over it.
    """

    credit: tuple[int, ...]
    debit: int
    top: int
    versus: str
    beat: tuple[int, float] | None

    def balance(self, jll: np.ndarray) -> np.ndarray:
        """The balance of each row of joint log-likelihoods, shape (n, C) -> (n,)."""
        return logsumexp(jll[:, list(self.credit)], axis=1) - jll[:, self.debit]


def _sides(rule: DecisionRule, jll: np.ndarray) -> _Sides:
    credit, debit = (int(a[0]) for a in rule.sides(jll[None, :]))
    versus = rule.versus(credit)
    if rule.threshold is not None:
        return _Sides(tuple(int(c) for c in rule.flagged_indices), debit, credit, str(versus), None)
    beat = None
    others = [int(c) for c in rule.flagged_indices if c != credit]
    if versus == "flagged-against-normal" and others:
        rival = others[int(np.argmax(jll[others]))]
        beat = (rival, float(jll[credit] - jll[rival]))
    return _Sides((credit,), debit, credit, str(versus), beat)


def _book(view, expl: Explanation, tokens, sides: _Sides):
    """Opening lines, entry amounts, running balances and per-occurrence ratios of the credit class.

    Two classes on the balance: each amount is its token's exact share
    ``x_j (W[credit, j] - W[debit, j])``. Several flagged classes: the running
    balance is the exact balance of the first entries, each amount the change it makes.
    """
    cols = np.array([t.column for t in tokens], dtype=np.int64)
    values = np.array([t.value for t in tokens])
    c, d = sides.top, sides.debit
    ratio = view.weights[c, cols] - view.weights[d, cols]
    if len(sides.credit) == 1:
        opening_prior, opening_absence = view.prior[c] - view.prior[d], view.absence[c] - view.absence[d]
        amounts = values * ratio
        running = opening_prior + opening_absence + np.cumsum(amounts)
    else:
        opening_prior = sides.balance(view.prior[None, :])[0]
        opening_absence = sides.balance(view.baseline[None, :])[0] - opening_prior
        partial = view.baseline + np.cumsum(values[:, None] * view.weights[:, cols].T, axis=0)
        running = sides.balance(partial)
        amounts = np.diff(np.concatenate([[opening_prior + opening_absence], running]))
    return float(opening_prior), float(opening_absence), amounts, running, ratio


def _tipped(on_credit_side, running: np.ndarray, opening: float, credit_wins: bool) -> int | None:
    """The entry after which the running balance reached the decided side and stayed there."""
    if len(running):
        off_side = np.flatnonzero(on_credit_side(running) != credit_wins)
        if len(off_side):
            # The last entry can sit off side only by rounding on a tie; it then tips there.
            return min(int(off_side[-1]) + 1, len(running) - 1)
    if len(running) and bool(on_credit_side(opening)) != credit_wins:
        return 0
    return None


def _method(classes, sides: _Sides, rule: DecisionRule) -> tuple[str, str]:
    """(credit side's name, how the balance is computed in words)."""
    c, d = classes[sides.credit[0]], classes[sides.debit]
    if rule.threshold is None:
        return c, f"log-odds of {c} against {d} = jll[{c}] - jll[{d}]"
    if len(sides.credit) == 1:
        return c, f"log P(flag) - log P({d}) = jll[{c}] - jll[{d}]"
    # A logsumexp does not split into per-token shares: the entries say they are approximate.
    names = ", ".join(classes[k] for k in sides.credit)
    return "flagged", f"log P(flag) - log P({d}) = logsumexp(jll[{names}]) - jll[{d}]"


def _entries(model, expl, tokens, first_at, book, sides: _Sides, documents, watchlist, thresholds) -> tuple[Entry, ...]:
    """The ledger's lines, one per token, with training support and risk flags (``decoding`` from ``expl.mail``)."""
    view = model.view
    _, _, amounts, running, ratio = book
    cols = np.array([t.column for t in tokens], dtype=np.int64)
    counts = documents.counts if documents is not None else view.feature_count
    names = [t.token for t in tokens]
    flag_mask = risk_flags(
        token_traits(names), ratio, view.feature_count[[sides.top, sides.debit]][:, cols].sum(axis=0),
        _watched(watchlist, names), thresholds,
    )
    classes = [str(c) for c in view.classes]
    return tuple(
        Entry(
            token=t.token,
            column=t.column,
            occurrences=t.occurrences,
            value=t.value,
            amount=float(amounts[i]),
            per_occurrence=float(amounts[i]) / max(t.occurrences, 1),
            direction="credit" if amounts[i] > 0 else "debit" if amounts[i] < 0 else "even",
            toward=classes[sides.top] if amounts[i] >= 0 else classes[sides.debit],
            balance_after=float(running[i]),
            spans=t.spans,
            first_at=int(first_at(t)),
            support=tuple(float(v) for v in counts[:, t.column]),
            flags=decoding_flags(
                tuple(FLAGS[k] for k in np.flatnonzero(flag_mask[:, i])), t.spans,
                getattr(expl.mail, "fallback_ranges", ()),
            ),
            exact=len(sides.credit) == 1,
        )
        for i, t in enumerate(tokens)
    )


def ledger_from(
    model, expl: Explanation, occ: Occurrences, *, threshold_log_odds: float | None = None,
    message_id: str | None = None, documents: DocumentCounts | None = None, watchlist: Watchlist | None = None,
    thresholds: RiskThresholds = RiskThresholds(), text_view: str | None = None,
) -> Ledger:
    """The ledger of an explanation ``expl`` of a message whose tokens are ``occ``, no featurizing again.

    ``model`` is the loaded model the explanation came from (named for the
    message when features are hashed); ``threshold_log_odds`` the exact
    threshold when one was given so. ``documents`` (from
    :func:`explain.analysis.vocab.document_counts`) makes the support of each
    entry a count of training messages; ``text_view`` names the text view
    the message was read in (``raw`` for text as given).
    """
    view = model.view
    classes = tuple(expl.classes)
    rule = DecisionRule.for_view(view, expl.threshold if threshold_log_odds is None else None, threshold_log_odds)
    sides = _sides(rule, expl.jll)
    first_index: dict[int, int] = {}
    for i, col in enumerate(occ.columns):
        first_index.setdefault(int(col), i)

    def first_at(t) -> int:
        return t.spans[0][0] if t.spans else first_index[t.column]

    tokens = sorted(expl.tokens, key=lambda t: (first_at(t), first_index[t.column]))
    book = _book(view, expl, tokens, sides)
    opening_prior, opening_absence, _, running, _ = book
    closing = float(sides.balance(expl.jll[None, :])[0])
    line = 0.0 if rule.threshold is None else float(rule.threshold_log_odds)
    inclusive = rule.threshold is not None or sides.credit[0] < sides.debit

    def on_credit_side(x) -> np.ndarray:
        x = np.asarray(x)
        return (x > line) | (inclusive & (x == line))

    credit_wins = bool(on_credit_side(closing))
    credit_name, method = _method(classes, sides, rule)
    card = getattr(model, "card", None) or {}
    return Ledger(
        text=expl.text,
        message_id=None if message_id is None else str(message_id),
        classes=classes,
        normal_class=expl.normal_class,
        rule="argmax" if rule.threshold is None else "threshold",
        threshold=rule.threshold,
        decision_line=line,
        line_inclusive=bool(inclusive),
        credit_side=credit_name,
        credit_classes=tuple(classes[c] for c in sides.credit),
        debit_class=classes[sides.debit],
        credit_class=classes[sides.top],
        versus=sides.versus,
        beat=None if sides.beat is None else (classes[sides.beat[0]], sides.beat[1]),
        balance_method=method,
        exact=len(sides.credit) == 1,
        opening_prior=opening_prior,
        opening_absence=opening_absence,
        opening=opening_prior + opening_absence,
        entries=_entries(model, expl, tokens, first_at, book, sides, documents, watchlist, thresholds),
        closing=closing,
        decision=expl.decision,
        credit_wins=credit_wins,
        probabilities=tuple(float(p) for p in expl.probabilities),
        flag_probability=expl.flag_probability,
        tipped_at=_tipped(on_credit_side, running, opening_prior + opening_absence, credit_wins),
        unknown=_unknown(model, occ, expl, sides.balance, closing),
        flip=expl.flip,
        support_kind=count_source(view, documents).kind,
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
        text_view=text_view,
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
    unknown = _one_per_mask(tuple(
        replace(u, token=mask(u.token, u.spans), spans=moved(u.spans),
                looks_like=None if u.looks_like is None else mask(u.looks_like))
        for u in ledger.unknown
    ), set(names.values()) - set(names))
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


def _one_per_mask(unknown: tuple[Unknown, ...], placeholders: set[str]) -> tuple[Unknown, ...]:
    """Unknown words that became the same placeholder as one word: "[card 2] x4", not "[card 2] x3, [card 2]"."""
    at: dict[str, int] = {}
    out: list[Unknown] = []
    for u in unknown:
        if u.token not in placeholders or u.looks_like is not None:
            out.append(u)
        elif u.token not in at:
            at[u.token] = len(out)
            out.append(u)
        else:
            first = out[at[u.token]]
            spans = tuple(sorted(set(first.spans + u.spans)))
            out[at[u.token]] = replace(first, count=first.count + u.count, spans=spans)
    return tuple(out)


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
