"""``nbledger why``: the exact account of one message's score."""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import List, Optional

import typer

from explain.cli import LOAD_TIMEOUT, MAX_MODEL_MEMORY, NO_CACHE, app, console, fail, load_model_or_fail, warn

#: Messages larger than this are refused unless --max-bytes raises it: a
#: direct message of megabytes is far more likely an attack than a message.
MAX_MESSAGE_BYTES = 1024 * 1024


def read_message(text: Optional[str], file: Optional[Path], limit: int = MAX_MESSAGE_BYTES) -> str:
    """The message from the argument, a file, or standard input (``-``)."""
    from explain.model.data_io import decode_utf8

    too_big = f"the message is larger than {limit:,} bytes; raise --max-bytes if it is genuine"
    if text is not None and file is not None:
        fail("give the message as TEXT or with --file, not both")
    if file is not None:
        from explain.model.input_files import input_file

        input_file(file, "message file")
        with open(file, "rb") as handle:
            raw = handle.read(limit + 1)
        if len(raw) > limit:
            fail(too_big)
    elif text == "-" or text is None:
        if sys.stdin is None or sys.stdin.closed:
            fail("standard input is closed; give the message as TEXT or with --file F")
        if text is None and sys.stdin.isatty():
            fail("give the message as TEXT, with --file F, or on standard input with -")
        try:
            raw = sys.stdin.buffer.read(limit + 1)
        except (OSError, ValueError) as exc:
            fail(f"cannot read standard input: {getattr(exc, 'strerror', None) or exc}")
        if len(raw) > limit:
            fail(too_big)
    else:
        if len(text.encode("utf-8", errors="surrogatepass")) > limit:
            fail(too_big)
        return text
    decoded, replaced = decode_utf8(raw)
    if replaced:
        warn(f"{replaced} invalid UTF-8 byte sequences in the message were replaced by U+FFFD")
    return decoded


@app.command()
def why(
    model: Path = typer.Argument(..., help="Model file (.skops; pickle/joblib only with --allow-pickle)."),
    text: Optional[str] = typer.Argument(None, help="The message, or - to read standard input."),
    file: Optional[Path] = typer.Option(None, "--file", "-f", help="Read the message from this file."),
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
    max_model_memory: str = MAX_MODEL_MEMORY,
    load_timeout: float = LOAD_TIMEOUT,
    no_cache: bool = NO_CACHE,
):
    """Why did the filter score this message the way it did?"""
    if output_format not in ("text", "json"):
        fail(f"--format must be text or json, got {output_format!r}")
    message = read_message(text, file, max_bytes)
    loaded = load_model_or_fail(
        model, vectorizer=vectorizer, allow_pickle=allow_pickle, trust=trust, normal_class=normal_class,
        max_model_memory=max_model_memory, load_timeout=load_timeout, no_cache=no_cache,
    )
    if loaded.view.n_classes < 2:
        fail(
            f"the model has one class ({loaded.view.classes[0]}); a score needs two classes to weigh "
            "against each other, so there is nothing to explain"
        )
    # Imported after loading, so that their imports overlap the loading process.
    from explain.analysis.evidence import explain_message
    from explain.present.why import render, to_json

    explanation = explain_message(loaded, message, threshold)
    if output_format == "json":
        sys.stdout.write(json.dumps(to_json(explanation, loaded), indent=2, allow_nan=False) + "\n")
    else:
        render(explanation, console, top)
