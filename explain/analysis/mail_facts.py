"""What was read from a raw e-mail, beside the explanation of its text.

:class:`MailFacts` carries, for presenters, the view the model read, the subject and
sender lines with personal values redacted, the attachments (listed, never parsed), the
parts and headers read with a fallback, and the reading limits met. Redaction uses the
personal-value detection of the vocabulary review (:func:`explain.analysis.risk.token_traits`):
each whitespace-separated piece of the line, stripped of the punctuation that frames
addresses (``<>"(),;``), that looks like an e-mail address, URL, IP address or phone
number becomes a numbered placeholder, ``[e-mail 1]``, ``[url 2]`` ..., as redaction does
in the vocabulary review.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from explain.analysis.risk import PERSONAL_KINDS, token_traits
from explain.model.email_reader import Attachment, EmailText, UndecodablePart

_PIECE = re.compile(r"\S+")
_FRAME = "<>\"'(),;[]"


@dataclass(frozen=True)
class MailFacts:
    """The e-mail side of one explanation: what was read, not how it scored."""

    view: str
    subject: str
    sender: str
    attachments: tuple[Attachment, ...]
    undecodable: tuple[UndecodablePart, ...]
    problems: tuple[str, ...]
    #: ``(start, end)`` character ranges of the text read (in ``view``) that came from parts decoded with a fallback
    fallback_ranges: tuple[tuple[int, int], ...] = ()


def redact_line(line: str) -> str:
    """``line`` with every piece that looks personal replaced by ``[<kind> <n>]``.

    >>> redact_line('Harbour Office <office@example.org>')
    'Harbour Office <[e-mail 1]>'
    """
    pieces = [(m.start(), m.end(), m.group().strip(_FRAME)) for m in _PIECE.finditer(line)]
    if not pieces:
        return line
    kinds = token_traits([core for _, _, core in pieces]).personal_kind
    out, last = [], 0
    for (start, end, core), kind in zip(pieces, kinds):
        if kind < 0 or not core:
            continue
        at = line.index(core, start, end)
        out.append(line[last:at] + f"[{PERSONAL_KINDS[kind]} {len(out) + 1}]")
        last = at + len(core)
    return "".join(out) + line[last:]


def mail_facts(email: EmailText, view: str) -> MailFacts:
    """The facts of ``email`` read in ``view``, subject and sender redacted."""
    return MailFacts(
        view=view,
        subject=redact_line(email.subject),
        sender=redact_line(email.sender),
        attachments=email.attachments,
        undecodable=email.undecodable,
        problems=email.problems,
        fallback_ranges=email.fallback_ranges(view),
    )


def decoding_flags(flags: tuple[str, ...], spans, ranges) -> tuple[str, ...]:
    """An entry's risk flags, with ``decoding`` for a token read from a part decoded with a fallback.

    A token all of whose occurrences (``spans``, character ranges, or None when unknown)
    lie in ``ranges`` came from such a part: its letters may be an accident of the
    decoding, so ``mixed_script`` (a sign of disguise) is replaced by ``decoding``.
    """
    if not ranges or not spans:
        return flags
    inside = all(any(a <= s and e <= b for a, b in ranges) for s, e in spans)
    if not inside:
        return flags
    return tuple(f for f in flags if f != "mixed_script") + ("decoding",)
