"""How text from files is shown to a person: never interpreted by the terminal.

Message texts, tokens, labels and file names come from hostile files. Printed
raw, a control sequence can retitle or clear the terminal (``ESC ]0;...``,
``ESC [2J``) and a bidirectional override (U+202E) can reverse what a reader
sees. Everything such text reaches a terminal or text file through one of
these functions, which make those characters visible:

- C0 and C1 control characters and DEL become ``\\x1b``-style escapes
  (``\\n``, ``\\r``, ``\\t`` keep their short forms);
- bidirectional controls and line/paragraph separators become ``<U+202E>``.

``shown`` is for tokens: spaces at a token's edges become "␣", so that the
character n-grams ``"ns. "`` and ``"ns."`` look different. ``safe_text`` is for
message texts laid out over several lines (line breaks and tabs kept).
``safe_line`` is for one-line messages (errors, file names). Files meant for
programs (JSON, CSV) keep the text exactly.

One function per medium, for labels, tokens, file names and message text alike:

- terminal: :func:`make_console` (every presenter prints through it) and
  :func:`for_terminal` for text written to standard output directly;
- JSON on a terminal: :func:`json_for_terminal` writes what JSON allows as
  ASCII escapes (``\u202e``), so the document stays valid and exact;
- HTML (and the PDF rendered from it): :func:`html_visible` is the Jinja2
  ``finalize`` hook of every template environment: each value a template
  prints passes through :func:`safe_text` and then Jinja2's autoescaping, so
  no control or bidirectional character reaches the page raw and no markup
  from input becomes an element (nothing from input is marked safe).
"""

from __future__ import annotations

import re

# Unicode bidirectional formatting characters (UAX #9, "Explicit Directional
# Embeddings/Overrides/Isolates" and the implicit marks) and the separators
# U+2028/U+2029 that some terminals treat as line breaks.
_BIDI = "\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069\u2028\u2029"
_SHORT = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}
_UNSAFE = re.compile(f"[\x00-\x1f\x7f-\x9f{_BIDI}]")
_UNSAFE_KEEP_LINES = re.compile(f"[\x00-\x08\x0b-\x1f\x7f-\x9f{_BIDI}]")


def _visible(match: re.Match) -> str:
    ch = match.group()
    if ch in _SHORT:
        return _SHORT[ch]
    if ch in _BIDI:
        return f"<U+{ord(ch):04X}>"
    return f"\\x{ord(ch):02x}"


def safe_line(text: str) -> str:
    """``text`` on one line with every control and bidi character made visible."""
    return _UNSAFE.sub(_visible, str(text))


def safe_text(text: str) -> str:
    """``text`` with line breaks and tabs kept, other controls and bidi characters visible."""
    return _UNSAFE_KEEP_LINES.sub(_visible, str(text).replace("\r\n", "\n"))


# What JSON keeps raw inside strings even when it escapes C0 controls: DEL, C1 and the bidi characters.
_UNSAFE_IN_JSON = re.compile(f"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f{_BIDI}]")


def json_for_terminal(text: str) -> str:
    """A JSON document for a terminal: controls and bidi characters as ``\\uXXXX`` escapes (the same JSON value)."""
    return _UNSAFE_IN_JSON.sub(lambda m: f"\\u{ord(m.group()):04x}", str(text))


def for_terminal(text: str, is_json: bool = False) -> str:
    """Text bound for a terminal: JSON with ASCII escapes, anything else with controls made visible."""
    return json_for_terminal(text) if is_json else safe_text(text)


def html_visible(value):
    """Jinja2 ``finalize`` hook: strings printed by a template get controls and bidi characters visible.

    Autoescaping then escapes the result, so ``<U+202E>`` is shown as text.
    Values already marked safe (made by the templates themselves, never from
    input) and non-strings pass unchanged.
    """
    from markupsafe import Markup

    if isinstance(value, str) and not isinstance(value, Markup):
        return safe_text(value)
    return value


def shown(token: str) -> str:
    """``token`` for a terminal or picture: exact, but with invisible characters visible."""
    token = safe_line(token)
    if token != token.strip():
        return token.replace(" ", "␣")
    return token


def _safe_renderable(inner):
    from rich.segment import Segment

    class Visible:
        def __rich_console__(self, console, options):
            for segment in console.render(inner, options):
                if segment.control:
                    yield segment
                else:
                    yield Segment(safe_text(segment.text), segment.style)

    return Visible()


def make_console(**options):
    """A ``rich`` console that shows control and bidi characters instead of obeying them.

    Every presenter prints through such a console (the command line's own, and
    the one that renders ``--out`` text files), so no hostile text reaches the
    terminal raw whichever presenter printed it. Rich's own colours are styles,
    not text, and are unaffected.
    """
    from rich.console import Console, RenderHook

    class ShowControls(RenderHook):
        def process_renderables(self, renderables):
            return [_safe_renderable(r) for r in renderables]

    console = Console(**options)
    console.push_render_hook(ShowControls())
    return console
