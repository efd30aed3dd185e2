"""Presenting a :class:`~explain.analysis.ledger.Ledger`: the terminal ledger and JSON.

Nothing here computes a score; every figure comes from the ledger.

The terminal ledger
-------------------
A head (message id, model fingerprint and card date, the date of the
record), the decision and what the balance is; then the book itself in
debit and credit columns: the opening balance (class priors, and
BernoulliNB's absent words as their own line), one entry per word in the
order the words first appear, each with its running balance, and under a
double rule the closing balance with the decision rule applied to it. Long
messages show their largest entries and fold the others, between them, into
lines that keep the running balance right. Each word is tinted by
:mod:`explain.present.tint` and always carries its ▲/▼ mark.

key                    meaning
=====================  ==========================================================
``schema``             ``"nbledger.why/1"``
``model``              ``{path, sha256, fingerprint, from_cache}``: the model file, its SHA-256, the
                       model's fingerprint and whether its view came from the cache of loaded models
``classes``            class labels in the model's order
``predicted``          most probable class (scikit-learn's ``predict``)
``runner_up``          second most probable class
``probabilities``      class -> posterior probability (``predict_proba``)
``log_odds``           ``jll[predicted] - jll[runner_up]`` (natural log)
``baseline``           ``b[predicted] - b[runner_up]``: prior + absence evidence
``baseline_prior``     the log-prior part of ``baseline``
``baseline_absence``   BernoulliNB's absent-token part of ``baseline`` (else 0)
``threshold``          threshold on P(flag), or null for argmax
``normal_class``       the class that lets a message through, or null
``flag_probability``   P(flag) = P(not normal), or null without a normal class
``decision``           the class decided under the threshold (or argmax)
``tokens``             list of ``{token, occurrences, value, per_unit, evidence,
                       odds_factor, spans}``; ``baseline + sum(evidence) ==
                       log_odds``; ``spans`` are ``[start, end)`` character
                       offsets into the message, ``null`` when unknown
``spans_note``         why spans are unknown, or null
``unknown_tokens``     list of ``{token, count}``: not in the vocabulary, no effect
``flip_set``           list of ``{token, occurrences}`` whose removal changes
                       the decision (empty when none can)
``flip_exact``         true when the flip set is the proven minimum
``flip_method``        ``"exact"`` or ``"greedy"``
``flip_decision``      the decision after the removals, or null
``flip_reason``        why the flip set is empty, or null
``feature_kind``       ``counts``, ``binary``, ``tfidf`` or ``normalised``
``variant``            ``multinomial``, ``complement`` or ``bernoulli``
``collisions``         hashed features: list of ``{column, tokens}`` where two
                       or more of the message's tokens share one column (their
                       evidence is one entry); empty otherwise
``email``              for a raw e-mail, what was read (``text_view``, redacted
                       ``subject`` and ``sender``, ``attachments``,
                       ``undecodable_parts``, ``problems``); null for plain text
=====================  ==========================================================
=======
JSON schema (``nbledger why --format json``)
--------------------------------------------
Schema ``nbledger.why/2`` keeps every key of ``nbledger.why/1`` with its
meaning (listed in the README) and adds ``message_id``, ``date``,
``card_date``, ``redacted``, ``ledger`` (see :func:`to_json`) and ``email``
(for a raw e-mail, what was read: ``text_view``, redacted ``subject`` and
``sender``, ``attachments``, ``undecodable_parts``, ``problems``; null for
plain text).
"""

from __future__ import annotations

import numpy as np

import math

from rich import box
from rich.console import Console
from rich.table import Table
from rich.text import Text

from explain.analysis.ledger import Ledger
from explain.present.drawing import class_colours
from explain.present.email_lines import email_header_lines, email_json
from explain.present.tint import MARKS, heat_runs, tint
from explain.present.token_display import make_console, shown
from explain.present.wording import (
    amount,
    flip_sentence,
    folded,
    odds_factor,
    plural,
    probability,
)

SCHEMA = "nbledger.why/2"
DISPLAY_LIMIT = 4000
#: Messages with more entries than this show their largest and fold the rest.
SHOW_ALL = 40
UNKNOWN_SHOWN = 15
CAUTION = (
    "This ledger describes what the model computed, not whether the message is truly what it "
    "was taken for; error rates are estimates. The message is personal data. Decisions stay "
    "with trained staff, under local law and qualified advice."
)
SUPPORT_WORDS = {
    "documents": "training messages holding the word",
    "occurrences": "training occurrences of the word",
    "tfidf-weights": "summed TF-IDF weights of the word in training",
    "normalised-weights": "summed normalised counts of the word in training",
}


# --- JSON -----------------------------------------------------------------


def _finite(x: float) -> float | None:
    return x if math.isfinite(x) else None


def to_json(ledger: Ledger, *, date: str | None = None, top: int = 10) -> dict:
    """The documented JSON object: the ``nbledger.why/1`` keys and the ledger's keys beside them."""
    expl = ledger.explanation
    spans_known = expl.spans_note is None
    summary = ledger.summary(top)
    index = {id(e): i for i, e in enumerate(ledger.entries)}
    return {
        "schema": SCHEMA,
        "model": None if ledger.model_path is None else {
            "path": ledger.model_path, "sha256": ledger.model_sha256, "fingerprint": ledger.model_fingerprint,
            "from_cache": ledger.model_from_cache,
        },
        "classes": list(expl.classes),
        "predicted": expl.predicted,
        "runner_up": expl.runner_up,
        "probabilities": {c: float(p) for c, p in zip(expl.classes, expl.probabilities)},
        "log_odds": expl.log_odds,
        "baseline": expl.baseline,
        "baseline_prior": expl.baseline_prior,
        "baseline_absence": expl.baseline_absence,
        "threshold": expl.threshold,
        "normal_class": expl.normal_class,
        "flag_probability": expl.flag_probability,
        "decision": expl.decision,
        "tokens": [
            {
                "token": t.token,
                "occurrences": t.occurrences,
                "value": t.value,
                "per_unit": t.per_unit,
                "evidence": t.evidence,
                "odds_factor": _finite(t.odds_factor),
                "spans": [list(s) for s in t.spans] if spans_known else None,
            }
            for t in sorted(expl.tokens, key=lambda t: -abs(t.evidence))
        ],
        "spans_note": expl.spans_note,
        "unknown_tokens": [{"token": t, "count": n} for t, n in expl.unknown_tokens],
        "flip_set": [{"token": t, "occurrences": n} for t, n in expl.flip.removals],
        "flip_exact": expl.flip.exact,
        "flip_method": expl.flip.method,
        "flip_decision": expl.flip.new_decision,
        "flip_reason": expl.flip.reason,
        "collisions": [{"column": c, "tokens": list(t)} for c, t in expl.collisions],
        "feature_kind": expl.feature_kind,
        "variant": expl.variant,
        "email": email_json(expl.mail),
        # nbledger.why/2 adds:
        "message_id": ledger.message_id,
        "date": date,
        "card_date": ledger.card_date,
        "redacted": ledger.redacted,
        "ledger": {
            "credit_side": ledger.credit_side,
            "credit_classes": list(ledger.credit_classes),
            "debit_class": ledger.debit_class,
            "balance_method": ledger.balance_method,
            "exact": ledger.exact,
            "rule": ledger.rule,
            "decision_line": _finite(ledger.decision_line),
            "line_inclusive": ledger.line_inclusive,
            "opening_prior": ledger.opening_prior,
            "opening_absence": ledger.opening_absence,
            "opening": ledger.opening,
            "entries": [
                {
                    "token": e.token,
                    "occurrences": e.occurrences,
                    "value": e.value,
                    "amount": e.amount,
                    "per_occurrence": e.per_occurrence,
                    "direction": e.direction,
                    "toward": e.toward,
                    "balance_after": e.balance_after,
                    "spans": [list(s) for s in e.spans] if spans_known else None,
                    "support": dict(zip(ledger.classes, e.support)),
                    "flags": list(e.flags),
                    "exact": e.exact,
                }
                for e in ledger.entries
            ],
            "closing": ledger.closing,
            "credit_wins": ledger.credit_wins,
            "tipped_at": ledger.tipped_at,
            "largest": [index[id(e)] for e in summary.largest],
            "folded_count": summary.folded_count,
            "folded_total": summary.folded_total,
            "support_kind": ledger.support_kind,
            "support_source": ledger.support_source,
            "disguised": [
                {"token": u.token, "count": u.count, "looks_like": u.looks_like, "avoided": u.avoided}
                for u in ledger.disguised
            ],
            "flip_sentence": flip_sentence(ledger.flip),
        },
    }


# --- terminal ---------------------------------------------------------------


def colour_mode(console: Console) -> str:
    """``"shades"`` (256 colours or more), ``"weights"`` (16 colours) or ``"none"``."""
    if console.no_color or console.color_system is None:
        return "none"
    return "shades" if console.color_system in ("256", "truecolor") else "weights"


def _style(entry, largest: float, mode: str, families) -> str:
    """The rich style of an entry's word: a shade (256+ colours), a weight (16 colours) or nothing."""
    return _tint_style(entry.direction, families[entry.toward], entry.per_occurrence, largest, mode)


def _tint_style(direction: str, family, size: float, largest: float, mode: str) -> str:
    look = tint(direction, family, size, largest)
    if mode == "shades":
        return f"{look.foreground} on {look.background}"
    if mode == "weights":
        return f"{family.base} {('dim', '', 'bold')[look.level]}".strip()
    return ""


def _word(entry, largest: float, mode: str, families) -> Text:
    word = Text(MARKS[entry.direction] + " ")
    word.append(shown(entry.token), style=_style(entry, largest, mode, families))
    return word


def support_cell(entry, ledger: Ledger) -> str:
    c, d = ledger.classes.index(credit_colour_class(ledger)), ledger.classes.index(ledger.debit_class)

    def n(x: float) -> str:
        return f"{x:,.0f}" if ledger.support_kind not in ("tfidf-weights", "normalised-weights") else f"{x:,.1f}"

    return f"{n(entry.support[c])}/{n(entry.support[d])}"


def credit_colour_class(ledger: Ledger) -> str:
    """The class credits are drawn in: the credit class, or the most probable flagged class."""
    if len(ledger.credit_classes) == 1:
        return ledger.credit_classes[0]
    probs = dict(zip(ledger.classes, ledger.probabilities))
    return max(ledger.credit_classes, key=lambda c: probs[c])


def ledger_rows(ledger: Ledger, top: int):
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


def _head(ledger: Ledger, date: str | None) -> list[Text]:
    # stacked, one fact a line: an id and a date side by side fold at 80 columns
    lines = [Text("LEDGER OF ONE DECISION", style="bold")]
    if ledger.message_id is not None:
        lines.append(Text(f"message {ledger.message_id}"))
    if date is not None:
        lines.append(Text(f"recorded {date}"))
    if ledger.model_path is not None:
        name = ledger.model_path.replace("\\", "/").rsplit("/", 1)[-1]
        card = f"card of {ledger.card_date}" if ledger.card_date else "no model card"
        lines.append(Text(f"model {name} ({card})"))
        lines.append(Text(f"sha256 {ledger.model_sha256}"))
        lines.append(Text(f"fingerprint {ledger.model_fingerprint or 'none'}"))
    if ledger.redacted:
        lines.append(Text("personal-looking values are masked ([e-mail 1], [phone 2] ...)"))
    return lines


def probability_line(ledger: Ledger) -> str:
    probs = dict(zip(ledger.classes, ledger.probabilities))
    if ledger.normal_class is not None and ledger.flag_probability is not None:
        # the glossary's one name, said once in the normal class's own words
        return f"P(flag) = P(not {ledger.normal_class}) = " + probability(
            ledger.flag_probability, probs[ledger.normal_class]
        )
    top = ledger.explanation.predicted
    return f"P({top}) = {probability(probs[top])}"


def rule_line(ledger: Ledger) -> str:
    if ledger.rule == "threshold":
        return (
            f"rule: flag when P(flag) >= {ledger.threshold:g}, that is when the "
            f"balance is at least logit({ledger.threshold:g}) = {ledger.decision_line:+.2f}"
        )
    tie = "or equal to " if ledger.line_inclusive else ""
    return f"rule: the most probable class; {ledger.credit_side} when the balance is above {tie}0"


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
    """The odds the closing balance gives, named for the side it favours (which a threshold may still overrule)."""
    side = ledger.credit_side if ledger.closing > 0 else ledger.debit_class
    return f"odds {odds_factor(ledger.closing)} for {side}"


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
        f"seen: {SUPPORT_WORDS[ledger.support_kind]}, {credit_colour_class(ledger)}/{ledger.debit_class}"
        + (f" (counted in {ledger.support_source})" if ledger.support_source else "") + "."
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


def _legend(ledger: Ledger, rows, mode: str, families) -> Text:
    shown_directions = {r.direction for r in rows if not isinstance(r, tuple)}
    legend = Text()
    for direction, side in (("credit", credit_colour_class(ledger)), ("debit", ledger.debit_class)):
        if direction not in shown_directions:
            continue
        if legend:
            legend.append("   ")
        legend.append(f"{MARKS[direction]} {direction}, toward {side}")
        if mode != "none":
            legend.append(f" ({families[side].name})", style=families[side].base)
    if "even" in shown_directions:
        legend.append(f"   {MARKS['even']} no effect either way")
    if mode == "shades":
        legend.append("; darker is stronger")
    elif mode == "weights":
        legend.append("; bold is stronger, faint weaker")
    return legend


def render(ledger: Ledger, console: Console, top: int = 10, date: str | None = None) -> None:
    """Print the ledger for a person at a terminal (or into a plain-text record)."""
    mode = colour_mode(console)
    families = class_colours(ledger.classes, ledger.normal_class)
    if ledger.credit_side not in families:
        families[ledger.credit_side] = families[credit_colour_class(ledger)]
    for line in _head(ledger, date):
        console.print(line)
    if ledger.explanation.mail is not None:
        for line in email_header_lines(ledger.explanation.mail):
            console.print(line, markup=False, highlight=False)
    decision = Text("decision ", style="bold")
    decision.append(ledger.decision, style="bold")
    decision.append(f"   {probability_line(ledger)}")
    console.print(decision)
    console.print(Text(f"balance = {ledger.balance_method}"))
    console.print()

    rows = ledger_rows(ledger, top)
    largest = max((abs(e.per_occurrence) for e in ledger.entries), default=0.0)
    table = Table(
        box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False, collapse_padding=True, header_style="bold", padding=(0, 1)
    )
    table.add_column("#", justify="right")
    table.add_column("word", overflow="fold", min_width=16, max_width=24)
    table.add_column("n", justify="right")
    table.add_column("each", justify="right")
    table.add_column("debit", justify="right")
    table.add_column("credit", justify="right")
    table.add_column("balance", justify="right")
    table.add_column("seen", justify="right")
    flagged = any(e.flags for e in ledger.entries)
    if flagged:
        table.add_column("flags", overflow="fold")

    for label, change, after in opening_lines(ledger):
        table.add_row("", Text(label, style="italic"), "", "", *money(change), f"{after:+.2f}")
    table.add_section()
    number = {id(e): i for i, e in enumerate(ledger.entries)}
    for row in rows:
        if isinstance(row, tuple):
            count, total, after = row
            label = Text(f"… {count:,} smaller", style="italic")  # their sum is in its column
            table.add_row("", label, "", "", *money(total), f"{after:+.2f}")
            continue
        i = number[id(row)]
        tipped = " ◀" if i == ledger.tipped_at else ""
        table.add_row(
            str(i + 1),
            _word(row, largest, mode, families),
            str(row.occurrences),
            amount(row.per_occurrence),
            *money(row.amount),
            f"{row.balance_after:+.2f}{tipped}",
            support_cell(row, ledger),
            *([", ".join(row.flags)] if flagged else []),
        )
    if not rows:
        table.add_row("", Text("(no word the model knows)", style="italic"))
    console.print(table)
    console.print("═" * min(console.measure(table).maximum, console.width))
    closing = Text("closing balance ", style="bold")
    closing.append(f"{ledger.closing:+.2f}", style="bold")
    closing.append(f"   {closing_odds(ledger)}")
    console.print(closing)
    console.print(Text(rule_line(ledger) + f"; decision: {ledger.decision}"))
    console.print(_legend(ledger, rows, mode, families))
    for note in ledger_notes(ledger, folding=len(rows) < len(ledger.entries), top=top):
        console.print(Text(note, style="dim" if mode != "none" else ""))
    console.print()
    for line in word_notes(ledger):
        console.print(Text(line))
    console.print()
    console.print(Text("message", style="bold"))
    console.print(tinted_text(ledger, mode, families))
    if len(ledger.text) > DISPLAY_LIMIT:
        more = len(ledger.text) - DISPLAY_LIMIT
        console.print(f"[... {more:,} more characters not shown; the ledger covers them all]", markup=False)
    if ledger.spans_note is not None:
        console.print(Text(f"(not tinted: {ledger.spans_note})"))
    console.print()
    console.print(Text(CAUTION, style="dim" if mode != "none" else ""))


def tinted_text(ledger: Ledger, mode: str, families, limit: int = DISPLAY_LIMIT) -> Text:
    """The message with each known word tinted like its entry (weaker first, so stronger tints win overlaps).

    Disguised words (unknown, so untinted) are underlined.
    """
    text = Text(ledger.text[:limit])
    if mode == "none" or ledger.spans_note is not None:
        return text
    if ledger.character_ngrams:
        heat = ledger.character_heat()
        largest = float(np.abs(heat).max(initial=0.0))
        for start, end, direction, _, size in heat_runs(heat, largest):
            if start < limit:
                family = families[credit_colour_class(ledger) if direction == "credit" else ledger.debit_class]
                text.stylize(_tint_style(direction, family, size, largest, mode), start, min(end, limit))
        return text
    largest = max((abs(e.per_occurrence) for e in ledger.entries), default=0.0)
    for e in sorted(ledger.entries, key=lambda e: abs(e.per_occurrence)):
        style = _style(e, largest, mode, families)
        for start, end in e.spans:
            if start < limit:
                text.stylize(style, start, min(end, limit))
    for u in ledger.disguised:  # unknown to the model, so untinted: underlined, named below the book
        for start, end in u.spans:
            if start < limit:
                text.stylize("underline", start, min(end, limit))
    return text



# --- records (--out) ----------------------------------------------------------

#: Width of a plain-text record, the width the terminal ledger is designed for.
RECORD_WIDTH = 80
SET_SCHEMA = "nbledger.why-set/2"


def text_record(ledgers, *, date: str, top: int = 10) -> str:
    """The terminal ledger of each message as plain text, one after another (form feed between)."""
    import io

    parts = []
    for ledger in ledgers:
        buffer = io.StringIO()
        render(ledger, make_console(file=buffer, width=RECORD_WIDTH, no_color=True, highlight=False), top, date)
        parts.append(buffer.getvalue())
    return "\f\n".join(parts)


def json_record(ledgers, *, date: str, top: int = 10) -> str:
    """One ``nbledger.why/2`` object, or for several messages ``{schema, messages: [...]}``."""
    import json

    docs = [to_json(ledger, date=date, top=top) for ledger in ledgers]
    doc = docs[0] if len(docs) == 1 else {"schema": SET_SCHEMA, "date": date, "messages": docs}
    return json.dumps(doc, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


#: Record writers by file suffix: ``writer(ledgers, *, date, top) -> str | bytes``.
#: The printable report registers ``.html`` and ``.pdf`` here.
WRITERS = {".txt": text_record, ".json": json_record}


def _sheet(kind: str):
    """The one-page sheet of the printable report (:mod:`explain.present.report`), imported when used."""

    def write(ledgers, *, date: str, top: int = 10):
        from explain.present import report

        return (report.sheet_html if kind == "html" else report.sheet_pdf)(ledgers, date=date, top=top)

    return write


WRITERS.update({".html": _sheet("html"), ".pdf": _sheet("pdf")})
