"""The ledger's words, shared by the terminal ledger and its HTML fragment.

:mod:`explain.present.ledger_terminal` prints them and
:mod:`explain.present.ledger_html` hands them to the template, so screen and
paper say the same thing. Nothing here computes a figure: every value comes
from the :class:`~explain.analysis.ledger.Ledger`.
"""

from __future__ import annotations

import math

from explain.analysis.ledger import Ledger
from explain.present.token_display import shown
from explain.present.wording import amount, flip_sentence, folded, odds_factor, plural, probability, stated

#: Messages with more entries than this show their largest and fold the rest.
SHOW_ALL = 40


UNKNOWN_SHOWN = 15


CAUTION = (
    "This ledger describes what the model computed, not whether the message is truly what it "
    "was taken for; error rates are estimates. The message is personal data. Decisions stay "
    "with trained staff, under local law and qualified advice."
)


#: The mark every team paper carries (glossary: circulation): first line of each page of a plain-text record.
INTERNAL_MARK = "Internal: a team paper, not for the member or outside circulation."


SUPPORT_WORDS = {
    "documents": "training messages holding the word",
    "occurrences": "training occurrences of the word",
    "tfidf-weights": "summed TF-IDF weights of the word in training",
    "normalised-weights": "summed normalised counts of the word in training",
}


def support_cell(entry, ledger: Ledger) -> str:
    c, d = ledger.classes.index(credit_colour_class(ledger)), ledger.classes.index(ledger.debit_class)

    def n(x: float) -> str:
        return f"{x:,.0f}" if ledger.support_kind not in ("tfidf-weights", "normalised-weights") else f"{x:,.1f}"

    return f"{n(entry.support[c])}/{n(entry.support[d])}"


def credit_colour_class(ledger: Ledger) -> str:
    """The class credits are drawn in: the ledger's credit class (read, never worked out here)."""
    return ledger.credit_class


def shown_rows(ledger: Ledger, top: int):
    """Entries to show, with ``(count, total, balance_after)`` folds standing between them."""
    entries = ledger.entries
    if len(entries) <= max(SHOW_ALL, top):
        return list(entries)
    keep = {id(e) for e in ledger.summary(top).largest}
    rows, run = [], []
    for e in entries:
        if id(e) in keep:
            if run:
                rows.append((len(run), math.fsum(r.amount for r in run), run[-1].balance_after))
                run = []
            rows.append(e)
        else:
            run.append(e)
    if run:
        rows.append((len(run), math.fsum(r.amount for r in run), run[-1].balance_after))
    return rows


def probability_line(ledger: Ledger) -> str:
    probs = dict(zip(ledger.classes, ledger.probabilities))
    if ledger.normal_class is not None and ledger.flag_probability is not None:
        # the glossary's one name, said once in the normal class's own words
        return stated(f"P(flag) = P(not {ledger.normal_class})",
                      probability(ledger.flag_probability, probs[ledger.normal_class]))
    top = ledger.explanation.predicted
    return stated(f"P({top})", probability(probs[top]))


def rule_line(ledger: Ledger) -> str:
    if ledger.rule == "threshold":
        return (
            f"rule: flag when P(flag) >= {ledger.threshold:g}, that is when the "
            f"balance is at least logit({ledger.threshold:g}) = {ledger.decision_line:+.2f}"
        )
    tie = "or equal to " if ledger.line_inclusive else ""
    return f"rule: the most probable class; {ledger.credit_side} when the balance is above {tie}0"


def versus_note(ledger: Ledger) -> str | None:
    """Without a normal class, the line saying what the balance compares instead; else None."""
    if ledger.versus != "predicted-against-runner-up":
        return None
    return f"balance: {ledger.versus_words} (--normal-class names one)"


def beat_line(ledger: Ledger) -> str:
    """The second question a flagged decision answered: how far it led the strongest other flagged class."""
    other, by = ledger.beat
    return f"and beat {other} by {by:.2f} (log-odds of {ledger.decision} against {other})"


def money(x: float) -> tuple[str, str]:
    """The (debit, credit) cells of an amount: its size in the column of its side."""
    return (f"{-x:.2f}", "") if x < 0 else ("", f"{x:.2f}")


def opening_lines(ledger: Ledger) -> list[tuple[str, float, float]]:
    """``(label, amount, balance after)`` of the opening balance's lines."""
    lines = [("opening: priors", ledger.opening_prior, ledger.opening_prior)]
    if ledger.variant == "bernoulli":
        lines.append(("opening: absent words", ledger.opening_absence, ledger.opening))
    return lines


def decided_side(ledger: Ledger) -> str:
    return ledger.credit_side if ledger.credit_wins else ledger.debit_class


def closing_odds(ledger: Ledger) -> str:
    """The odds the closing balance gives, named for the side it favours (which a threshold may still overrule).

    A balance exactly on the decision line says so, and which side the rule gives it to.
    """
    if ledger.closing == ledger.decision_line:
        side = ledger.credit_side if ledger.line_inclusive else ledger.debit_class
        return f"exactly on the decision line; the rule gives a balance on the line to {side}"
    side = ledger.credit_side if ledger.closing > 0 else ledger.debit_class
    return f"odds {odds_factor(ledger.closing)} for {side}"


def closing_figure(ledger: Ledger) -> str:
    """The closing balance with two decimals, or as many more as it takes to tell it from the decision line."""
    x, line = ledger.closing, ledger.decision_line
    if not (math.isfinite(x) and math.isfinite(line)) or x == line:
        return f"{x:+.2f}"
    digits = 2
    while digits < 17 and round(x, digits) == round(line, digits):
        digits += 1
    return f"{x:+.{digits}f}"


def counted_elsewhere(ledger: Ledger) -> str | None:
    """The file the "seen" counts come from when they are not the model's training messages, else None.

    The training file itself counts as training messages only when the model
    card holds none of its messages out: held-out messages are not training
    messages, so such a file is named like any other.
    """
    source = ledger.support_source
    if not source or ("training data" in source and "held-out" not in source):
        return None
    return source


def support_words(ledger: Ledger) -> str:
    """What a "seen" count counts, naming its true source (a file that is not the training data is named)."""
    words = SUPPORT_WORDS[ledger.support_kind]
    source = counted_elsewhere(ledger)
    if source:
        words = (words.replace("training messages", f"messages of {source}")
                 .replace("training occurrences", f"occurrences in {source}").replace(" in training", f" in {source}"))
    return words


def _whole(x: float) -> str:
    return f"{x:,.0f}"


def _times(x: float) -> str:
    """A whole count of occurrences in words: "never", "once", "twice", "70 times"."""
    n = round(x)
    return {0: "never", 1: "once", 2: "twice"}.get(n, f"{n:,} times")


def seen_sentence(entry, ledger: Ledger) -> str:
    """One entry's support in words, in the order of the "seen" column (credit class first):
    "'parcel' was seen in 166 scam and 133 ok training messages"; counts from another file name it."""
    c, d = ledger.classes.index(credit_colour_class(ledger)), ledger.classes.index(ledger.debit_class)
    credit, debit = credit_colour_class(ledger), ledger.debit_class
    source = counted_elsewhere(ledger)
    unit = f"messages of {source}" if source else "training messages"
    if ledger.support_kind == "documents":
        return (f"'{shown(entry.token)}' was seen in {_whole(entry.support[c])} {credit} and "
                f"{_whole(entry.support[d])} {debit} {unit}")
    if ledger.support_kind == "occurrences":
        return (f"'{shown(entry.token)}' occurs {_times(entry.support[c])} in {credit} and "
                f"{_times(entry.support[d])} in {debit} {unit}")
    return (f"'{shown(entry.token)}' weighs {entry.support[c]:,.1f} in {credit} and {entry.support[d]:,.1f} in "
            f"{debit} ({support_words(ledger)})")


def collision_note(collisions) -> str:
    """One sentence naming the hashed columns that several tokens share."""
    listed = "; ".join(
        f"column {c}: " + ", ".join(f"'{shown(t)}'" for t in tokens) for c, tokens in collisions
    )
    return f"Hashed features: these tokens share a column, so the model cannot tell them apart ({listed})."


def ledger_notes(ledger: Ledger, *, folding: bool, top: int) -> list[str]:
    """The sentences under the closing balance: where it tipped, exactness, what "seen" counts, folding."""
    side = decided_side(ledger)
    notes = []
    if ledger.tipped_at is not None:
        e = ledger.entries[ledger.tipped_at]
        notes.append(
            f"◀ the balance crosses the decision line at '{shown(e.token)}' (entry {ledger.tipped_at + 1}) "
            f"and stays on the {side} side."
        )
    else:
        notes.append(f"The opening balance is already on the {side} side and no entry takes it across.")
    if not ledger.exact:
        notes.append(
            "Entries are approximate: a logsumexp over several classes does not split into shares, so each "
            "entry is the change it makes where it first appears (its size depends on the order, the sum does not)."
        )
    notes.append(
        f"seen: {support_words(ledger)}, {credit_colour_class(ledger)}/{ledger.debit_class}"
        + (f" (counted in {ledger.support_source})" if ledger.support_source else "")
        + (f"; for example {seen_sentence(max(ledger.entries, key=lambda e: abs(e.amount)), ledger)}."
           if ledger.entries else ".")
    )
    if ledger.explanation.collisions:
        notes.append(collision_note(ledger.explanation.collisions))
    if folding:
        s = ledger.summary(top)
        notes.append(
            f"Largest {plural(len(s.largest), 'entry', 'entries')} shown; "
            f"{folded(s.folded_count, s.folded_total)} are folded between them."
        )
    return notes


def word_notes(ledger: Ledger) -> list[str]:
    """Disguised words, unknown words and the flip set, in sentences."""
    lines = []
    for u in ledger.disguised:
        toward = credit_colour_class(ledger) if u.avoided > 0 else ledger.debit_class
        lines.append(
            f"disguised word: '{shown(u.token)}' looks like '{shown(u.looks_like)}' (Unicode look-alike "
            f"letters, UTS #39); written plainly it would have moved the balance {amount(u.avoided)}, "
            f"toward {toward}."
        )
    plain_unknown = [u for u in ledger.unknown if u.looks_like is None]
    if plain_unknown:
        names = ", ".join(
            shown(u.token) + (f" x{u.count}" if u.count > 1 else "") for u in plain_unknown[:UNKNOWN_SHOWN]
        )
        more = len(plain_unknown) - UNKNOWN_SHOWN
        lines.append(
            f"not in the vocabulary (no effect): {names}" + (f" and {plural(more, 'more word')}" if more > 0 else "")
        )
    lines.append(flip_sentence(ledger.flip))
    return lines

