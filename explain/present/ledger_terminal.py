"""The ledger of one message on the terminal (or as a plain-text record).

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
"""

from __future__ import annotations

import numpy as np
from rich import box
from rich.console import Console
from rich.table import Table
from rich.text import Text

from explain.analysis.ledger import Ledger
from explain.analysis.risk import FLAG_LABELS
from explain.present import ledger_words as words
from explain.present.drawing import class_colours
from explain.present.email_lines import email_header_lines
from explain.present.tint import MARKS, heat_runs, tint
from explain.present.token_display import shown
from explain.present.wording import amount

DISPLAY_LIMIT = 4000


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


def _legend(ledger: Ledger, rows, mode: str, families) -> Text:
    shown_directions = {r.direction for r in rows if not isinstance(r, tuple)}
    legend = Text()
    for direction, side in (("credit", words.credit_colour_class(ledger)), ("debit", ledger.debit_class)):
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
        families[ledger.credit_side] = families[words.credit_colour_class(ledger)]
    for line in _head(ledger, date):
        console.print(line)
    if ledger.explanation.mail is not None:
        for line in email_header_lines(ledger.explanation.mail):
            console.print(line, markup=False, highlight=False)
    decision = Text("decision ", style="bold")
    decision.append(ledger.decision, style="bold")
    decision.append(f"   {words.probability_line(ledger)}")
    console.print(decision)
    console.print(Text(f"balance = {ledger.balance_method}"))
    if words.versus_note(ledger):
        console.print(Text(words.versus_note(ledger)))
    console.print()

    rows = words.shown_rows(ledger, top)
    table = _book(ledger, rows, mode, families)
    console.print(table)
    console.print("═" * min(console.measure(table).maximum, console.width))
    closing = Text("closing balance ", style="bold")
    closing.append(words.closing_figure(ledger), style="bold")
    closing.append(f"   {words.closing_odds(ledger)}")
    console.print(closing)
    console.print(Text(words.rule_line(ledger) + f"; decision: {ledger.decision}"))
    if ledger.beat is not None:
        console.print(Text(words.beat_line(ledger)))
    console.print(_legend(ledger, rows, mode, families))
    for note in words.ledger_notes(ledger, folding=len(rows) < len(ledger.entries), top=top):
        console.print(Text(note, style="dim" if mode != "none" else ""))
    console.print()
    for line in words.word_notes(ledger):
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
    console.print(Text(words.CAUTION, style="dim" if mode != "none" else ""))


def _book(ledger: Ledger, rows, mode: str, families) -> Table:
    """The entries in debit and credit columns: opening lines, then each shown entry or fold."""
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

    for label, change, after in words.opening_lines(ledger):
        table.add_row("", Text(label, style="italic"), "", "", *words.money(change), f"{after:+.2f}")
    table.add_section()
    number = {id(e): i for i, e in enumerate(ledger.entries)}
    for row in rows:
        if isinstance(row, tuple):
            count, total, after = row
            label = Text(f"… {count:,} smaller", style="italic")  # their sum is in its column
            table.add_row("", label, "", "", *words.money(total), f"{after:+.2f}")
            continue
        i = number[id(row)]
        tipped = " ◀" if i == ledger.tipped_at else ""
        table.add_row(
            str(i + 1),
            _word(row, largest, mode, families),
            str(row.occurrences),
            amount(row.per_occurrence),
            *words.money(row.amount),
            f"{row.balance_after:+.2f}{tipped}",
            words.support_cell(row, ledger),
            *([", ".join(FLAG_LABELS.get(f, f) for f in row.flags)] if flagged else []),  # watchlist-strong
        )
    if not rows:
        table.add_row("", Text("(no word the model knows)", style="italic"))
    return table


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
                family = families[words.credit_colour_class(ledger) if direction == "credit" else ledger.debit_class]
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
