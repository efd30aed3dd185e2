"""``nbledger why``: the exact account of one message's score."""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import List, Optional

import typer

from explain.cli import app, console, fail, load_model_or_fail, warn
from explain.cli.mail_options import TEXT_VIEW

#: Messages larger than this are refused unless --max-bytes raises it: a
#: direct message of megabytes is far more likely an attack than a message.
MAX_MESSAGE_BYTES = 1024 * 1024


def read_message(text: Optional[str], file: Optional[Path], limit: int = MAX_MESSAGE_BYTES) -> bytes | str:
    """The message from the argument (as text), a file or standard input (``-``, as bytes)."""
    too_big = f"the message is larger than {limit:,} bytes; raise --max-bytes if it is genuine"
    if text is not None and file is not None:
        fail("give the message as TEXT or with --file, not both")
    if file is not None:
        if not file.is_file():
            fail(f"no message file at {file}")
        if file.stat().st_size > limit:
            fail(too_big)
        return file.read_bytes()
    if text == "-" or text is None:
        if text is None and sys.stdin.isatty():
            fail("give the message as TEXT, with --file F, or on standard input with -")
        raw = sys.stdin.buffer.read(limit + 1)
        if len(raw) > limit:
            fail(too_big)
        return raw
    if len(text.encode("utf-8", errors="surrogatepass")) > limit:
        fail(too_big)
    return text


def plain_message(raw: bytes | str) -> str:
    """A message that is not an e-mail, as UTF-8 text (invalid bytes replaced, and said)."""
    from explain.model.data_io import decode_utf8

    if isinstance(raw, str):
        return raw
    decoded, replaced = decode_utf8(raw)
    if replaced:
        warn(f"{replaced} invalid UTF-8 byte sequences in the message were replaced by U+FFFD")
    return decoded


@app.command()
def why(
    model: Path = typer.Argument(..., help="Model file (.skops; pickle/joblib only with --allow-pickle)."),
    text: Optional[str] = typer.Argument(None, help="The message, or - to read standard input."),
    file: Optional[Path] = typer.Option(None, "--file", "-f", help="Read the message (text or a raw .eml e-mail) from this file."),
    top: int = typer.Option(10, "--top", min=1, help="Tokens to list for and against."),
    threshold: Optional[float] = typer.Option(
        None, "--threshold", help="Flag when P(not normal) >= P (default: the most probable class)."
    ),
    normal_class: Optional[str] = typer.Option(None, "--normal-class", help="The class that lets a message through."),
    output_format: str = typer.Option("text", "--format", help="text | json"),
    vectorizer: Optional[Path] = typer.Option(None, "--vectorizer", help="Vectorizer file, when MODEL is a bare classifier."),
    allow_pickle: bool = typer.Option(False, "--allow-pickle", help="Allow pickle/joblib files (runs code from the file)."),
    trust: Optional[List[str]] = typer.Option(None, "--trust", help="Accept this type from a skops file (repeatable)."),
    max_bytes: int = typer.Option(MAX_MESSAGE_BYTES, "--max-bytes", min=1, help="Refuse larger messages."),
    as_email: bool = typer.Option(
        False, "--email", help="Read the message as a raw e-mail even if its headers are not recognised."
    ),
    text_view: Optional[str] = TEXT_VIEW,
):
    """Why did the filter score this message the way it did?"""
    from explain.analysis.evidence import explain_message
    from explain.analysis.mail_facts import explain_email
    from explain.model.email_reader import looks_like_email, read_email, resolve_text_view
    from explain.present.why import render, to_json

    if output_format not in ("text", "json"):
        fail(f"--format must be text or json, got {output_format!r}")
    raw = read_message(text, file, max_bytes)
    loaded = load_model_or_fail(
        model, vectorizer=vectorizer, allow_pickle=allow_pickle, trust=trust, normal_class=normal_class
    )
    view = resolve_text_view(loaded.card, text_view)
    data = raw.encode("utf-8", errors="surrogatepass") if isinstance(raw, str) else raw
    if as_email or looks_like_email(data):
        mail = read_email(data)
        if mail.raw_fallback:
            fail(f"the e-mail could not be read: {mail.problems[0]}")
        for problem in mail.problems:
            warn(f"e-mail: {problem}")
        if not mail.text(view).strip():
            fail(f"the e-mail has no text in the {view} view" + (" (attachments only)" if mail.attachments else ""))
        explanation = explain_email(loaded, mail, view, threshold)
    else:
        explanation = explain_message(loaded, plain_message(raw), threshold)
    if output_format == "json":
        sys.stdout.write(json.dumps(to_json(explanation, loaded), indent=2) + "\n")
    else:
        render(explanation, console, top)
