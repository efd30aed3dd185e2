"""Reading one raw e-mail (RFC 5322 / MIME) into the text a filter sees.

Parsing uses the standard library's ``email`` package. The policy, applied to every
message whatever its source (a ``.eml`` file, an mbox, a table of raw messages, the
public mail corpus of the tests):

- **Body text**: the text leaves of the MIME tree in order. Of a ``multipart/alternative``
  one rendering is kept, so that words are not counted twice: ``text/plain`` if it has any
  text (some spam sends it empty), else the last non-empty rendering. HTML becomes its
  visible text (:func:`html_to_text`, the standard library's ``html.parser`` with our choice
  of which tags break a line). A Markdown renderer such as ``html2text`` would add link and
  emphasis syntax that a vectorizer turns into tokens, and inserting breaks at inline tags
  would split the words spam hides behind them; keeping this renderer also keeps the
  corpus texts the tests and benchmarks rest on unchanged. Transfer encodings (RFC 2045 section 6:
  base64, quoted-printable) are decoded by ``email``.
- **Attachments**: every non-text leaf is listed (name, content type, decoded size in
  bytes) and never parsed. Text leaves are read as text even when they are attachments.
- **Charsets**, in this order: the part's declared charset (``us-ascii`` when none is
  declared, per RFC 2045 section 5.2, read here as UTF-8, its superset); a charset Python
  does not know is read as UTF-8; bytes that do not decode in the charset used become
  U+FFFD. Each part that needed a fallback is listed in ``EmailText.undecodable``, so a
  caller can count it in a warning; nothing raises.
- **Headers**: decoded per RFC 2047 with ``email.header``, which keeps each value as written
  (the policy's structured header classes would drop comments such as ``(EDT)`` and re-quote
  names); Subject and From come first, the rest in order.
- **Limits** (:class:`Limits`): multipart declarations, parts visited, nesting depth,
  decoded bytes. A message past a limit is read as far as the limit and says so in
  ``EmailText.problems``; one whose structure cannot be read at all falls back to its raw
  text, split at the first blank line, and says so too.

Views (``VIEWS``) say which of the message a filter reads: ``body``, ``subject+body`` or
``headers+body``; the ``raw`` text view (:data:`RAW_VIEW`) reads no mail at all: the text
exactly as given, headers included, what a pipeline trained on whole raw messages
receives. The view is a training setting recorded in the model card;
:func:`resolve_text_view` is the one place that decides which view applies: the card's,
or ``raw`` when the card records none.

Example::

    >>> email = read_email(b"Subject: =?utf-8?q?Caf=C3=A9?=\\n\\nHarbour meeting at 7\\n")
    >>> email.subject, email.text("subject+body")
    ('Café', 'Café\\n\\nHarbour meeting at 7\\n')
"""

from __future__ import annotations

import email
import email.policy
import functools
import html
import re
from dataclasses import dataclass, field
from email.header import decode_header, make_header
from email.headerregistry import HeaderRegistry
from email.message import Message
from html.parser import HTMLParser

from explain.errors import NbledgerError
from explain.model.text_blobs import looks_like_html, split_blobs

VIEWS: tuple[str, ...] = ("body", "subject+body", "headers+body")
#: The mail view read when a message is read as e-mail and nothing names a view (``--email``, ``train``).
DEFAULT_VIEW = "body"
#: The text exactly as given, headers included: the view without a model card that records one.
RAW_VIEW = "raw"
TEXT_VIEWS: tuple[str, ...] = (RAW_VIEW, *VIEWS)

#: Versions of the reader's text rules, recorded in the model card as ``settings.text_rules``.
#: ``"1"``: the parts' text as decoded. ``"2"``: also HTML in ``text/plain`` parts read as
#: visible text, and uuencoded files and long base64 or hex runs cut out of text parts and
#: listed as attachments (:data:`CLEANING`). A card without the setting was trained under ``"1"``.
TEXT_RULES: tuple[str, ...] = ("1", "2")
CURRENT_RULES = "2"
#: The rules of text-rules ``"2"``, as counted per message (``EmailText.cleaned``).
#: The content type an encoded file cut out of a text part is listed with.
_BLOB_TYPES = {"uuencode": "uuencoded in the text", "base64-run": "base64 in the text", "hex-run": "hex digits in the text"}
CLEANING = {
    "html-in-plain": "HTML in a text/plain part, read as its visible text",
    "uuencode": "uuencoded file cut out of the text",
    "base64-run": "long base64 run cut out of the text",
    "hex-run": "long hex run cut out of the text",
}

# Header fields that mark the start of a raw message (RFC 5322 section 3.6), with the
# MIME and trace fields that mail servers add. Two of them before the first blank line
# make a file an e-mail rather than a note that happens to start with "Subject:".
_MAIL_FIELDS = frozenset(
    b"from to cc subject date message-id received return-path reply-to sender "
    b"mime-version content-type content-transfer-encoding delivered-to".split()
)
_FIELD_LINE = re.compile(rb"([!-9;-~]+)[ \t]*:")
_MULTIPART_DECLARATION = re.compile(rb"^content-type:[ \t]*(?:\r?\n[ \t]+)?multipart/", re.I | re.M)


@dataclass(frozen=True)
class Limits:
    """How much of one message is read.

    ``max_multiparts`` caps the ``Content-Type: multipart/...`` declarations counted in
    the raw bytes before parsing: the standard parser recurses once per nesting level
    and a message of thousands of nested parts would exhaust the stack. ``max_parts``
    and ``max_depth`` cap the parts visited and their nesting; ``max_decoded_bytes``
    caps the decoded bytes of all parts together (text and attachments).
    """

    max_multiparts: int = 1000
    max_parts: int = 1000
    max_depth: int = 64
    max_decoded_bytes: int = 16 * 1024 * 1024
    #: bytes read from one message file of a data set; the rest is cut off, and said.
    max_message_bytes: int = 32 * 1024 * 1024


@dataclass(frozen=True)
class Attachment:
    """A non-text part: listed, never parsed. ``size`` is its decoded size in bytes, or
    None when it was not decoded (past the decoded-size limit)."""

    name: str
    content_type: str
    size: int | None


#: Kinds of :class:`UndecodablePart`, and what was done instead of decoding.
FALLBACKS = {
    "unknown-charset": "unknown charset, read as UTF-8",
    "invalid-bytes": "invalid bytes became U+FFFD",
    "bad-encoded-word": "RFC 2047 word not decodable, kept as written",
}


@dataclass(frozen=True)
class UndecodablePart:
    """A part or header read with a fallback: ``where`` it is, the ``charset`` it
    declared, and ``kind``, a key of :data:`FALLBACKS` saying what was done instead."""

    where: str
    charset: str
    kind: str

    @property
    def fallback(self) -> str:
        return FALLBACKS[self.kind]


@dataclass(frozen=True)
class EmailText:
    """What was read from one raw message.

    ``header_text`` holds one ``Name: value`` line per header field, RFC 2047 words
    decoded (Subject and From first); ``body`` the decoded text of the body; ``subject``,
    ``sender`` and ``message_id`` the decoded values of those fields ("" when absent).
    """

    header_text: str
    body: str
    subject: str = ""
    sender: str = ""
    message_id: str = ""
    #: the Date and List-Id header values as written ("" when absent)
    date: str = ""
    list_id: str = ""
    attachments: tuple[Attachment, ...] = ()
    undecodable: tuple[UndecodablePart, ...] = ()
    problems: tuple[str, ...] = ()
    #: True when the MIME structure could not be read and the raw text stands in for it
    raw_fallback: bool = False
    #: the rules of :data:`CLEANING` that changed this message's text, in order
    cleaned: tuple[str, ...] = ()
    #: ``(start, end)`` character ranges of ``body`` read from parts decoded with a fallback
    fallback_spans: tuple[tuple[int, int], ...] = ()

    def _prefix(self, view: str) -> str:
        check_view(view)
        if view == "body":
            return ""
        if view == "subject+body":
            return f"{self.subject}\n\n"
        return f"{self.header_text}\n\n"

    def text(self, view: str = DEFAULT_VIEW) -> str:
        """The text a filter reads in ``view`` (one of :data:`VIEWS`)."""
        return self._prefix(view) + self.body

    def fallback_ranges(self, view: str = DEFAULT_VIEW) -> tuple[tuple[int, int], ...]:
        """``fallback_spans`` as character ranges of ``text(view)``."""
        shift = len(self._prefix(view))
        return tuple((a + shift, b + shift) for a, b in self.fallback_spans)

    @property
    def attachment_only(self) -> bool:
        """True when the message carries attachments and no body text at all."""
        return bool(self.attachments) and not self.body.strip()


def check_rules(rules: str) -> str:
    if rules not in TEXT_RULES:
        raise NbledgerError(
            f"unknown text rules {rules!r} (a model card of a newer nbledger?); known: {', '.join(TEXT_RULES)}"
        )
    return rules


def text_rules_of(card: dict | None) -> str:
    """The reader's text rules a model was trained under: the card's ``settings.text_rules``;
    ``"1"`` for a card that trained on raw e-mail before the setting existed; else the current rules."""
    settings = (card or {}).get("settings") or {}
    recorded = settings.get("text_rules")
    if recorded is not None:
        return check_rules(str(recorded))
    return "1" if settings.get("text_view") is not None else CURRENT_RULES


def check_view(view: str, raw: bool = False) -> str:
    """``view`` when it is a mail view (or, with ``raw``, the ``raw`` text view); else one error line."""
    allowed = TEXT_VIEWS if raw else VIEWS
    if view not in allowed:
        raise NbledgerError(f"unknown text view {view!r}; choose one of {', '.join(allowed)}")
    return view


def resolve_text_view(card: dict | None, explicit: str | None = None) -> str:
    """The text view that applies to every message read for a model with this card.

    The model card records the view the model was trained on (``settings.text_view``);
    an explicit ``--text-view`` must agree with it, since a filter trained on bodies
    scores headers as noise. Without either, :data:`RAW_VIEW`: the text exactly as
    given, headers included, since nothing says the filter was trained on a mail view.
    Every command that reads messages for a model calls this one function.
    """
    recorded = ((card or {}).get("settings") or {}).get("text_view")
    if explicit is not None:
        check_view(explicit, raw=True)
        if recorded is not None and explicit != recorded:
            raise NbledgerError(
                f"--text-view {explicit} differs from the model card, which records training on "
                f"the {recorded} view; leave --text-view out or give {recorded}"
            )
    return explicit or recorded or RAW_VIEW


def mail_view_note(count: int = 1, total: int = 1) -> str:
    """The one note line for text explained as given that looks like raw e-mail."""
    what = "the message looks" if total == 1 else f"{count:,} of {total:,} messages look"
    return (
        f"{what} like e-mail, explained as given (raw text view, headers included); "
        "--text-view body|subject+body|headers+body reads a mail view"
    )


def looks_like_email(data: bytes) -> bool:
    """True when ``data`` starts with a header block of at least two mail fields.

    Reads only up to the first blank line (and at most 64 KiB): every line there must be
    a header field or its continuation, and an mbox ``From `` line may lead.
    """
    head = data[: 64 * 1024].replace(b"\r\n", b"\n")
    head = head.split(b"\n\n", 1)[0]
    lines = head.split(b"\n")
    if lines and lines[0].startswith(b"From "):
        lines = lines[1:]
    known = 0
    for line in lines:
        if line[:1] in (b" ", b"\t"):
            continue
        match = _FIELD_LINE.match(line)
        if match is None:
            return False
        known += match[1].lower() in _MAIL_FIELDS
    return known >= 2


# ---------------------------------------------------------------------------- parsing


class _MemoHeaderRegistry(HeaderRegistry):
    """The standard header registry, remembering the headers it has already parsed.

    The parser and the MIME walk re-read ``Content-Type`` many times per message, and
    the standard library parses it from scratch each time (most of the load time).
    Header objects are immutable, and on the public mail corpus fewer than a thousand
    distinct ``(name, value)`` pairs are fetched, so sharing them makes parsing about
    three times faster without changing any result (checked on every message).
    """

    def __init__(self) -> None:
        super().__init__()
        self._parse = functools.lru_cache(maxsize=4096)(super().__call__)

    def __call__(self, name: str, value: str):
        return self._parse(name, value)


#: ``email.policy.default`` in every rule; only the header factory is memoised.
_POLICY = email.policy.default.clone(header_factory=_MemoHeaderRegistry())


class _HtmlText(HTMLParser):
    """Collects the visible text of an HTML document.

    Only block-level tags break the text: spam often splits words with inline tags
    (``v<b></b>iagra``), and inserting spaces there would invent tokens.
    """

    _HIDDEN = frozenset({"script", "style"})
    _BLOCK = frozenset(
        "address article blockquote br dd div dl dt footer form h1 h2 h3 h4 h5 h6 header hr "
        "li ol p pre section table tbody td tfoot th thead title tr ul".split()
    )

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self._chunks: list[str] = []
        self._hidden_depth = 0

    def handle_starttag(self, tag: str, attrs) -> None:
        if tag in self._HIDDEN:
            self._hidden_depth += 1
        elif tag in self._BLOCK:
            self._chunks.append("\n")

    def handle_startendtag(self, tag: str, attrs) -> None:
        if tag in self._BLOCK:
            self._chunks.append("\n")

    def handle_endtag(self, tag: str) -> None:
        if tag in self._HIDDEN:
            self._hidden_depth = max(0, self._hidden_depth - 1)
        elif tag in self._BLOCK:
            self._chunks.append("\n")

    def handle_data(self, data: str) -> None:
        if not self._hidden_depth:
            self._chunks.append(data)

    def text(self) -> str:
        lines = (" ".join(line.split()) for line in "".join(self._chunks).splitlines())
        return "\n".join(line for line in lines if line)


def html_to_text(markup: str) -> str:
    """Visible text of ``markup``: tags, comments, scripts and styles removed, entities unescaped.

    The standard library's ``html.parser`` tokenises (it is lenient with broken markup);
    only the choice of which tags break a line is ours.
    """
    parser = _HtmlText()
    try:
        parser.feed(markup)
        parser.close()
    except Exception:  # html.parser is lenient, but a broken document must not lose the message
        return html.unescape(re.sub(r"<[^>]*>", " ", markup))
    return parser.text()


@dataclass
class _Walk:
    """What the MIME walk has found and spent so far (one per message)."""

    limits: Limits
    rules: str = CURRENT_RULES
    parts: int = 0
    decoded: int = 0
    attachments: list = field(default_factory=list)
    undecodable: list = field(default_factory=list)
    problems: list = field(default_factory=list)
    cleaned: list = field(default_factory=list)

    def touched(self, rule: str) -> None:
        if rule not in self.cleaned:
            self.cleaned.append(rule)

    def note(self, problem: str) -> None:
        if problem not in self.problems:
            self.problems.append(problem)

    def payload(self, part: Message) -> bytes | None:
        """The part's decoded bytes, or None when they would pass the decoded-size limit."""
        encoded = part.get_payload()
        room = self.limits.max_decoded_bytes - self.decoded
        # Decoding never makes a payload longer than its encoded form, so the encoded
        # length bounds the memory spent before anything is decoded.
        if isinstance(encoded, str) and len(encoded) > room:
            self.note(f"parts past the reading limit of {self.limits.max_decoded_bytes:,} decoded bytes were not read")
            return None
        payload = part.get_payload(decode=True)
        self.decoded += len(payload or b"")
        return payload

    def decode(self, part: Message, payload: bytes, where: str) -> str:
        """``payload`` as text, in the charset order of the module policy."""
        declared = part.get_content_charset()
        charset = declared or "utf-8"
        try:
            return payload.decode(charset)
        except LookupError:  # unknown charset name (common in spam), or not a text codec
            self.undecodable.append(UndecodablePart(where, charset, "unknown-charset"))
            charset = "utf-8"
            try:
                return payload.decode(charset)
            except UnicodeDecodeError:
                pass
        except UnicodeDecodeError:
            pass
        self.undecodable.append(
            UndecodablePart(where, declared or "none declared", "invalid-bytes")
        )
        return payload.decode(charset, errors="replace")

    def text_parts(self, part: Message, depth: int = 0) -> list[tuple[str, bool]]:
        """``(text, read with a fallback)`` of the text leaves under ``part``, in order; HTML rendered to text."""
        self.parts += 1
        if self.parts > self.limits.max_parts:
            self.note(f"parts past the first {self.limits.max_parts:,} were not read")
            return []
        if depth > self.limits.max_depth:
            self.note(f"parts nested deeper than {self.limits.max_depth} levels were not read")
            return []
        content_type = part.get_content_type()
        if part.is_multipart():
            children = part.get_payload()
            if content_type != "multipart/alternative":
                return [text for child in children for text in self.text_parts(child, depth + 1)]
            renderings = [(child.get_content_type(), self.text_parts(child, depth + 1)) for child in children]
            filled = [(kind, texts) for kind, texts in renderings if "".join(t for t, _ in texts).strip()]
            plain = [texts for kind, texts in filled if kind == "text/plain"]
            return plain[0] if plain else (filled[-1][1] if filled else [])
        maintype, _, subtype = content_type.partition("/")
        # Other text subtypes (including malformed ones such as "text/plain charset=...")
        # read as plain text, and so does a multipart whose boundary is missing: the
        # parser leaves it as one leaf whose raw text is still the message.
        if maintype not in ("text", "multipart"):
            self._list_attachment(part, content_type)
            return []
        payload = self.payload(part)
        if payload is None:  # past the size limit, or a defective multipart left as a list
            return [("", False)] if isinstance(part.get_payload(), list) else []
        before = len(self.undecodable)
        text = self.decode(part, payload, f"{content_type} part {self.parts}")
        fallback = len(self.undecodable) > before
        if maintype == "text" and subtype.startswith("html"):
            return [(html_to_text(text), fallback)]
        if self.rules != "1":
            text = self.cut_blobs(text)
            if looks_like_html(text):
                self.touched("html-in-plain")
                text = html_to_text(text)
        return [(text, fallback)]

    def cut_blobs(self, text: str) -> str:
        """``text`` with uuencoded files and long base64 or hex runs cut out, each listed as an attachment."""
        text, blobs = split_blobs(text)
        for blob in blobs:
            self.touched(blob.kind)
            self.attachments.append(Attachment(blob.name, _BLOB_TYPES[blob.kind], blob.size))
        return text

    def _list_attachment(self, part: Message, content_type: str) -> None:
        payload = self.payload(part)
        try:
            name = part.get_filename(failobj="") or ""
        except Exception:  # a malformed filename parameter must not lose the message's text
            name = ""
        self.attachments.append(
            Attachment(" ".join(str(name).split()), content_type, None if payload is None else len(payload))
        )


def _header_lines(message: Message, walk: _Walk) -> list[str]:
    """``Name: value`` lines, RFC 2047 words decoded; Subject and From first."""
    first, rest = [], []
    for name, raw_value in message.raw_items():
        try:
            value = str(make_header(decode_header(raw_value)))
        except Exception:  # unknown charset or malformed encoded word: keep it as it came
            value = raw_value
            walk.undecodable.append(UndecodablePart(f"{name} header", "", "bad-encoded-word"))
        line = _valid_unicode(f"{name}: {' '.join(value.split())}")
        (first if name.lower() in ("subject", "from") else rest).append(line)
    return first + rest


def _valid_unicode(text: str) -> str:
    """``text`` with undecodable bytes (kept by the parser as surrogates) replaced by U+FFFD."""
    return text.encode("utf-8", errors="surrogateescape").decode("utf-8", errors="replace")


def _field(lines: list[str], name: str) -> str:
    prefix = f"{name.lower()}:"
    for line in lines:
        if line[: len(prefix)].lower() == prefix:
            return line[len(prefix):].strip()
    return ""


def _joined(pieces: list[tuple[str, bool]]) -> tuple[str, tuple[tuple[int, int], ...]]:
    """The body (pieces joined by line breaks) and the ranges of the pieces read with a fallback."""
    spans, at = [], 0
    for text, fallback in pieces:
        if fallback and text:
            spans.append((at, at + len(text)))
        at += len(text) + 1
    return "\n".join(text for text, _ in pieces), tuple(spans)


def read_email(data: bytes, limits: Limits = Limits(), rules: str = CURRENT_RULES) -> EmailText:
    """Read one raw message (bytes as stored) under ``limits`` and text ``rules``; never raises on bad input."""
    check_rules(rules)
    walk = _Walk(limits, rules)
    declared = len(_MULTIPART_DECLARATION.findall(data))
    if declared > limits.max_multiparts:
        walk.note(f"more than {limits.max_multiparts:,} multipart parts; the MIME structure was not read")
        return _raw_fallback(data, walk)
    try:
        message = email.message_from_bytes(data, policy=_POLICY)
        lines = _header_lines(message, walk)
        body, spans = _joined(walk.text_parts(message))
    except RecursionError:
        walk.note("the MIME structure is nested too deeply to read")
        return _raw_fallback(data, walk)
    except Exception as exc:  # the parser records most defects itself; this guards the rest
        walk.note(f"the MIME structure could not be read ({type(exc).__name__}); the raw text is used")
        return _raw_fallback(data, walk)
    return EmailText(
        header_text="\n".join(lines),
        body=body,
        subject=_field(lines, "subject"),
        sender=_field(lines, "from"),
        message_id=_field(lines, "message-id"),
        date=_field(lines, "date"),
        list_id=_field(lines, "list-id"),
        attachments=tuple(walk.attachments),
        undecodable=tuple(walk.undecodable),
        problems=tuple(walk.problems),
        cleaned=tuple(walk.cleaned),
        fallback_spans=spans,
    )


def _raw_fallback(data: bytes, walk: _Walk) -> EmailText:
    text = data[: walk.limits.max_decoded_bytes].decode("utf-8", errors="replace")
    head, _, body = text.partition("\n\n")
    return EmailText(
        head, body, undecodable=tuple(walk.undecodable), problems=tuple(walk.problems), raw_fallback=True
    )


def summarise(emails, total: int | None = None) -> tuple[str, ...]:
    """One line per kind of fallback or limit met among ``emails``, with its count.

    For the warnings of a data set: ``"3 of 120 messages: unknown charset, read as UTF-8"``.
    """
    emails = list(emails)
    total = len(emails) if total is None else total
    lines = []
    for kind, fallback in FALLBACKS.items():
        hit = sum(any(u.kind == kind for u in e.undecodable) for e in emails)
        if hit:
            lines.append(f"{hit} of {total} messages: {fallback}")
    only = sum(e.attachment_only for e in emails)
    if only:
        lines.append(f"{only} of {total} messages carry attachments and no text")
    problems: dict[str, int] = {}
    for e in emails:
        for problem in e.problems:
            problems[problem] = problems.get(problem, 0) + 1
    lines.extend(f"{n} of {total} messages: {problem}" for problem, n in problems.items())
    return tuple(lines)
