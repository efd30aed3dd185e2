"""Records of ``nbledger why --out``: the ledgers of the chosen messages in one file, by its suffix.

``.txt`` is the terminal ledger as plain text, ``.json`` the ``nbledger.why/3``
object (several messages: ``nbledger.why-set/3``), ``.html`` and ``.pdf`` the
one-page sheet of the printable report. The presenters format; this table
picks one and runs it.
"""

from __future__ import annotations

import io
import json

from explain.present.ledger_json import to_json
from explain.present.ledger_terminal import render
from explain.present.ledger_words import INTERNAL_MARK
from explain.present.report_pages import sheet_html, sheet_pdf
from explain.present.token_display import make_console

#: Width of a plain-text record, the width the terminal ledger is designed for.
RECORD_WIDTH = 80


SET_SCHEMA = "nbledger.why-set/3"


def text_record(ledgers, *, date: str, top: int = 10) -> str:
    """The terminal ledger of each message as plain text, one after another (form feed between), each page
    headed by the Internal mark of team papers."""
    parts = []
    for ledger in ledgers:
        buffer = io.StringIO(f"{INTERNAL_MARK}\n\n")
        buffer.seek(0, io.SEEK_END)
        render(ledger, make_console(file=buffer, width=RECORD_WIDTH, no_color=True, highlight=False), top, date)
        parts.append(buffer.getvalue())
    return "\f\n".join(parts)


def json_record(ledgers, *, date: str, top: int = 10) -> str:
    """One ``nbledger.why/3`` object, or for several messages ``{schema, messages: [...]}``."""
    docs = [to_json(ledger, date=date, top=top) for ledger in ledgers]
    doc = docs[0] if len(docs) == 1 else {"schema": SET_SCHEMA, "date": date, "circulation": "internal", "messages": docs}
    return json.dumps(doc, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


#: Record writers by file suffix: ``writer(ledgers, *, date, top) -> str | bytes``.
#: ``.html`` and ``.pdf`` are the one-page sheet of the printable report.
WRITERS = {".txt": text_record, ".json": json_record, ".html": sheet_html, ".pdf": sheet_pdf}

