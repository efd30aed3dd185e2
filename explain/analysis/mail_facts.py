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


def redact_line(line: str, header: str = "From") -> str:
    """``line`` (a header's value) with every personal value replaced by ``[<kind> <n>]``.

    The value is read as the header ``header`` (From, To, Subject ...) by the one
    detector (:func:`explain.analysis.personal_data.find_personal`), so the
    display names of address headers are masked too.

    >>> redact_line('Marta Quill <marta@example.org>')
    '[name 1] <[e-mail 2]>'
    """
    from explain.analysis.personal_data import find_personal

    prefix = f"{header}: "
    found = [(s - len(prefix), e - len(prefix), k) for s, e, k in find_personal(prefix + line) if s >= len(prefix)]
    numbers: dict[tuple[str, str], int] = {}
    out, last = [], 0
    for start, end, kind in found:
        n = numbers.setdefault((kind, line[start:end].lower()), len(numbers) + 1)
        out.append(line[last:start] + f"[{kind} {n}]")
        last = end
    return "".join(out) + line[last:]


def mail_facts(email: EmailText, view: str) -> MailFacts:
    """The facts of ``email`` read in ``view``, subject and sender redacted."""
    return MailFacts(
        view=view,
        subject=redact_line(email.subject, "Subject"),
        sender=redact_line(email.sender, "From"),
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
