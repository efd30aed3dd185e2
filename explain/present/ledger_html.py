"""One ledger as an HTML fragment, for the printable report and the one-page sheet.

:func:`ledger_context` turns a :class:`~explain.analysis.ledger.Ledger` into
already-formatted strings; the template ``templates/partials/ledger.html.j2``
only lays them out, styled by ``templates/ledger.css``. Include it with the
context under the name ``lv``::

    {% with lv = ledger_view %}{% include "partials/ledger.html.j2" %}{% endwith %}

The words are those of the terminal ledger (:mod:`explain.present.ledger_words`) and
the tints those of :mod:`explain.present.tint`, so screen and paper agree.
"""

from __future__ import annotations

from pathlib import Path

from explain.analysis.ledger import Ledger, redacted
from explain.analysis.risk import FLAG_LABELS
from explain.present import ledger_words as words
from explain.present.drawing import class_colours
from explain.present.tint import MARKS, heat_runs, tint
from explain.present.token_display import shown
from explain.present.wording import amount, folded

REDACTIONS = ("none", "personal", "bodies")
TEMPLATE = "partials/ledger.html.j2"
STYLESHEET = "ledger.css"


def _money(x: float) -> dict:
    debit, credit = words.money(x)
    return {"debit": debit, "credit": credit}


def _segments(ledger: Ledger, looks: dict) -> list[dict]:
    """The text cut at the entries' spans: plain pieces ``{text}``, words ``{text, mark, style, level}``,
    disguised words ``{text, looks_like}``.

    Where character n-grams overlap, the stronger entry's tint wins the
    shared characters.
    """
    text = ledger.text
    if ledger.character_ngrams:
        return _heat_segments(ledger)
    owner = [None] * len(text)
    for u in ledger.disguised:
        for a, b in u.spans:
            owner[a:b] = [("disguised", u.looks_like)] * (min(b, len(text)) - a)
    for e in sorted(ledger.entries, key=lambda e: abs(e.per_occurrence)):
        for a, b in e.spans:
            owner[a:b] = [e.column] * (min(b, len(text)) - a)
    segments, at = [], 0
    while at < len(text):
        end = at
        while end < len(text) and owner[end] == owner[at]:
            end += 1
        key = owner[at]
        piece = {"text": text[at:end]}
        if isinstance(key, tuple):
            piece["looks_like"] = key[1]
        elif key is not None:
            piece.update(looks[key])
        segments.append(piece)
        at = end
    return segments


def _heat_segments(ledger: Ledger) -> list[dict]:
    """Character n-grams: the text tinted by its character heat (each character carries the sum of
    the n-grams covering it), cut into runs of one direction and strength."""
    text, heat = ledger.text, ledger.character_heat()
    largest = float(abs(heat).max(initial=0.0))
    families = class_colours(ledger.classes, ledger.normal_class)
    segments, at = [], 0
    for start, end, direction, _, size in heat_runs(heat, largest):
        if start > at:
            segments.append({"text": text[at:start]})
        family = families[words.credit_colour_class(ledger) if direction == "credit" else ledger.debit_class]
        t = tint(direction, family, size, largest)
        segments.append({"text": text[start:end], "mark": t.mark, "direction": direction, "level": t.level_name,
                         "style": f"background-color: {t.background}; color: {t.foreground}"})
        at = end
    if at < len(text):
        segments.append({"text": text[at:]})
    return segments


def _row_views(ledger: Ledger, rows, looks: dict) -> list[dict]:
    """The book's rows as the fragment shows them: entries ``{kind: "entry", ...}`` and folds ``{kind: "fold", ...}``."""
    number = {id(e): i for i, e in enumerate(ledger.entries)}
    row_views = []
    for row in rows:
        if isinstance(row, tuple):
            count, total, after = row
            row_views.append(
                {"kind": "fold", "label": folded(count, total), **_money(total), "balance": f"{after:+.2f}"}
            )
            continue
        i = number[id(row)]
        row_views.append({
            "kind": "entry",
            "number": str(i + 1),
            "token": shown(row.token),
            **looks[row.column],
            "times": str(row.occurrences),
            "each": amount(row.per_occurrence),
            **_money(row.amount),
            "balance": f"{row.balance_after:+.2f}",
            "tipped": i == ledger.tipped_at,
            "seen": words.support_cell(row, ledger),
            "flags": [FLAG_LABELS.get(f, f) for f in row.flags],  # one spelling on every screen: watchlist-strong
        })
    return row_views


def ledger_context(ledger: Ledger, redaction: str = "none", *, top: int = 10, date: str | None = None) -> dict:
    """Everything the ledger fragment shows, formatted.

    ``redaction``: ``"none"``; ``"personal"`` masks personal-looking values
    (:func:`explain.analysis.ledger.redacted`); ``"bodies"`` also withholds
    the message text.
    """
    if redaction not in REDACTIONS:
        raise ValueError(f"redaction must be one of {REDACTIONS}")
    if redaction != "none":
        ledger = redacted(ledger)
    families = class_colours(ledger.classes, ledger.normal_class)
    credit_class = words.credit_colour_class(ledger)
    largest = max((abs(e.per_occurrence) for e in ledger.entries), default=0.0)

    def look(e) -> dict:
        t = tint(e.direction, families[e.toward], e.per_occurrence, largest)
        return {
            "mark": t.mark,
            "direction": e.direction,
            "level": t.level_name,
            "style": f"background-color: {t.background}; color: {t.foreground}",
        }

    looks = {e.column: look(e) for e in ledger.entries}
    rows = words.shown_rows(ledger, top)
    row_views = _row_views(ledger, rows, looks)
    opening = [
        {"label": label, **_money(change), "balance": f"{after:+.2f}"} for label, change, after in words.opening_lines(ledger)
    ]
    directions = {r["direction"] for r in row_views if r["kind"] == "entry"}
    legend = [
        {"mark": MARKS[d], "text": f"{d}, toward {side}", "swatch": families[side].shade(0.55)}
        for d, side in (("credit", credit_class), ("debit", ledger.debit_class))
        if d in directions
    ]
    model_name = None if ledger.model_path is None else Path(ledger.model_path).name
    return {
        "message_id": ledger.message_id,
        "date": date,
        "model_file": model_name,
        "model_sha256": ledger.model_sha256,
        "model_fingerprint": ledger.model_fingerprint or "none",
        "card_date": ledger.card_date,
        "redaction": redaction,
        "decision": ledger.decision,
        "probability": words.probability_line(ledger),
        "balance_method": ledger.balance_method,
        "credit_label": credit_class if len(ledger.credit_classes) == 1 else ledger.credit_side,
        "debit_label": ledger.debit_class,
        "seen_label": f"{credit_class}/{ledger.debit_class}",
        "has_flags": any(r.get("flags") for r in row_views),
        "opening": opening,
        "rows": row_views,
        "closing": words.closing_figure(ledger),
        "closing_odds": words.closing_odds(ledger),
        "rule": words.rule_line(ledger),
        "beat": None if ledger.beat is None else words.beat_line(ledger),
        "versus_note": words.versus_note(ledger),
        "legend": legend,
        "notes": words.ledger_notes(ledger, folding=len(rows) < len(ledger.entries), top=top),
        "word_notes": words.word_notes(ledger),
        "segments": [] if redaction == "bodies" else _segments(ledger, looks),
        "text_withheld": redaction == "bodies",
        "spans_note": ledger.spans_note,
        "caution": words.CAUTION,
    }
