"""Markup and encoded files inside the text parts of an e-mail (the reader's text rules ``"2"``).

A vectorizer reads whatever is in a text part. Two things there are not words:

- **HTML sent as** ``text/plain`` (or with no content type at all, which RFC 2045
  section 5.2 reads as ``text/plain``): its tags (``br``, ``td``, ``font``, ``nbsp`` ...)
  become tokens. :func:`looks_like_html` says when a part holds a document's markup
  rather than a mention of a tag; the reader then takes its visible text as it does
  for ``text/html``.
- **Encoded files** pasted into the text: uuencoded blocks (``begin 644 name`` ...
  ``end``, the format of POSIX ``uuencode``; each line starts with a length character,
  decoded here with the standard library's ``binascii.a2b_uu``), and long runs of base64
  (RFC 4648 section 4 alphabet) or hexadecimal digits. Their pieces (``8s``, ``b9``,
  ``5n``) become tokens that carry chance evidence. :func:`split_blobs` cuts them out
  and lists each (name, kind, decoded size) so that the reader shows them as attachments.

The thresholds are ours (common practice, no source): markup is a document when it has
an ``<html>``, ``<body>`` or doctype tag or at least five tags of HTML's vocabulary; a
base64 block is three or more lines of 40+ alphabet characters (the usual line is 60 to
76), or one unbroken run of 200+; a hex run is 128+ digits (longer than any common
digest: SHA-512 is 128); a run must mix letters and digits.
"""

from __future__ import annotations

import binascii
import re
from dataclasses import dataclass

_HTML_TAG = re.compile(
    r"<\s*/?\s*(?:html|head|body|br|p|div|span|font|table|tbody|thead|tr|td|th|a|img|b|i|u|center|"
    r"ul|ol|li|hr|h[1-6]|meta|title|style|script|strong|em|blockquote|pre|map|area|form|input)\b[^<>]{0,2000}>",
    re.I,
)
_HTML_DOCUMENT = re.compile(r"<\s*(?:html|body|!doctype\s+html)\b", re.I)
_MIN_TAGS = 5

_UU_BEGIN = re.compile(r"^begin[ \t]+[0-7]{3,4}[ \t]+([^\r\n]*\S)[ \t]*\r?$", re.M)
_B64_LINE = r"[ \t]*[A-Za-z0-9+/]{40,}={0,2}[ \t]*\r?"
_BLOCK = re.compile(
    rf"^{_B64_LINE}(?:\n{_B64_LINE}){{2,}}(?:\n[ \t]*[A-Za-z0-9+/]{{2,39}}={{0,2}}[ \t]*\r?(?=\n|\Z))?$", re.M
)
_RUN = re.compile(r"(?<![A-Za-z0-9+/])[A-Za-z0-9+/]{128,}={0,2}(?![A-Za-z0-9+/=])")
_HEX = frozenset("0123456789abcdefABCDEF")
_SPACE = re.compile(r"\s+")


@dataclass(frozen=True)
class Blob:
    """An encoded file found in a text: ``kind`` (``uuencode``, ``base64-run``, ``hex-run``),
    ``name`` (the uuencoded file's name, else ""), ``size`` (decoded bytes), ``start``/``end``
    (its character range in the text)."""

    kind: str
    name: str
    size: int
    start: int
    end: int


def looks_like_html(text: str) -> bool:
    """True when ``text`` holds an HTML document's markup rather than a mention of a tag."""
    if "<" not in text:
        return False
    if _HTML_DOCUMENT.search(text):
        return True
    count = 0
    for _ in _HTML_TAG.finditer(text):
        count += 1
        if count >= _MIN_TAGS:
            return True
    return False


def _uu_line(line: str) -> bytes | None:
    """The bytes of one uuencoded line, or None when the line is not one.

    The first character gives the byte count n; the line holds ceil(n / 3) * 4 more
    characters between space and backquote. Mailers strip trailing spaces (which encode
    zero bits), so a short line is padded back with spaces before ``binascii.a2b_uu``.
    """
    if not line or any(not " " <= c <= "`" for c in line):
        return None
    n = (ord(line[0]) - 32) & 63
    expected = (n + 2) // 3 * 4
    if not expected - 4 < len(line) - 1 <= expected + 2:
        return None
    try:
        data = binascii.a2b_uu(line[: expected + 1].ljust(expected + 1))
    except binascii.Error:
        return None
    return data if len(data) == n else None


def _uu_blocks(text: str) -> list[Blob]:
    found = []
    for begin in _UU_BEGIN.finditer(text):
        if found and begin.start() < found[-1].end:
            continue
        at, size, end, lines = begin.end() + 1, 0, None, 0
        while at <= len(text):
            stop = text.find("\n", at)
            stop = len(text) if stop < 0 else stop
            line = text[at:stop].rstrip("\r")
            if line.strip() == "end":
                end = stop
                break
            data = _uu_line(line) if line.strip() else b""
            if data is None:
                break
            size += len(data)
            lines += bool(data)
            end = stop
            at = stop + 1
        if lines:
            found.append(Blob("uuencode", begin.group(1).strip(), size, begin.start(), end))
    return found


def _decoded_base64(run: str) -> int:
    """Bytes that ``run`` decodes to: 3 per 4 characters, 1 or 2 for a final group of 2 or 3 (RFC 4648 section 4)."""
    n = len(_SPACE.sub("", run).rstrip("="))
    return n // 4 * 3 + (0, 0, 1, 2)[n % 4]


def _mixed(run: str) -> bool:
    return any(c.isdigit() for c in run) and any(c.isalpha() for c in run)


def _runs(text: str, taken: list[Blob]) -> list[Blob]:
    found = []

    def free(a: int, b: int) -> bool:
        return not any(a < t.end and t.start < b for t in [*taken, *found])

    for pattern in (_BLOCK, _RUN):
        for match in pattern.finditer(text):
            run = match.group()
            chars = _SPACE.sub("", run)
            if not _mixed(chars) or not free(match.start(), match.end()):
                continue
            if set(chars) <= _HEX and len(chars) >= 128:
                found.append(Blob("hex-run", "", len(chars) // 2, match.start(), match.end()))
            elif pattern is _BLOCK or len(chars) >= 200:
                if not (any(c.isupper() for c in chars) and any(c.islower() for c in chars)):
                    continue
                if chars.count("/") > len(chars) // 10:  # a long path, not an encoding
                    continue
                found.append(Blob("base64-run", "", _decoded_base64(run), match.start(), match.end()))
    return found


def split_blobs(text: str) -> tuple[str, tuple[Blob, ...]]:
    """``text`` with every encoded file cut out (each replaced by a line break), and the files found."""
    has_begin = "begin" in text
    if len(text) < 128 and not has_begin:
        return text, ()
    blobs = _uu_blocks(text) if has_begin else []
    blobs = sorted([*blobs, *_runs(text, blobs)], key=lambda b: b.start)
    if not blobs:
        return text, ()
    pieces, at = [], 0
    for blob in blobs:
        pieces.append(text[at:blob.start])
        at = blob.end
    pieces.append(text[at:])
    return "\n".join(pieces), tuple(blobs)
