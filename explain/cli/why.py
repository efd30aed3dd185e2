"""``nbledger why``: one message's decision told as a ledger."""

from __future__ import annotations

import os
import sys
from pathlib import Path
from typing import Optional

import typer

from explain.cli.common import (
    MAX_DATA_BYTES, THRESHOLD, THRESHOLD_LOG_ODDS, app, fail, note, one_threshold, read_messages_or_fail, warn,
    ID_KEY_FILE,
)
from explain.cli.mail_options import TEXT_VIEW
from explain.cli.option_sets import ModelOptions, with_option_sets
from explain.dates import record_date
from explain.present.token_display import for_terminal, make_console

#: Messages larger than this are refused unless --max-bytes raises it: a
#: direct message of megabytes is far more likely an attack than a message.
MAX_MESSAGE_BYTES = 1024 * 1024
COLOR_CHOICES = ("auto", "always", "never")


def read_message(text: Optional[str], file: Optional[Path], limit: int = MAX_MESSAGE_BYTES) -> bytes | str:
    """The message from the argument (as text), a file or standard input (``-``, as bytes)."""
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
        return raw
    if text == "-" or text is None:
        if sys.stdin is None or sys.stdin.closed:
            fail("standard input is closed; give the message as TEXT or with --file F")
        if text is None and sys.stdin.isatty():
            fail("give the message as TEXT, with --file F, on standard input with -, or --data F --id ID")
        try:
            raw = sys.stdin.buffer.read(limit + 1)
        except (OSError, ValueError) as exc:
            fail(f"cannot read standard input: {getattr(exc, 'strerror', None) or exc}")
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


def read_id_list(path: Path) -> list[str]:
    """Ids one a line; blank lines and lines starting with # are skipped."""
    from explain.model.input_files import term_text

    text = term_text(path, "id list")
    ids = [line.strip() for line in text.splitlines() if line.strip() and not line.strip().startswith("#")]
    if not ids:
        fail(f"the id list {path} has no ids")
    return ids


def pick_messages(messages, wanted: list[str], source: str) -> list[tuple[str, str]]:
    """``(id, text)`` of each wanted id; the first of duplicate ids is taken, with a warning."""
    first: dict[str, int] = {}
    repeats: dict[str, int] = {}
    for row, mid in enumerate(messages.ids):
        if mid in first:
            repeats[mid] = repeats.get(mid, 1) + 1
        else:
            first[mid] = row
    missing = [m for m in wanted if m not in first]
    if missing:
        more = f" (and {len(missing) - 1} more wanted ids)" if len(missing) > 1 else ""
        fail(f"no message with id {missing[0]!r} in {source}{more}; it has {len(first):,} distinct ids")
    for mid in dict.fromkeys(wanted):
        if mid in repeats:
            row = first[mid] + 1
            warn(f"id {mid!r} occurs {repeats[mid]} times in {source}; explaining the first (data row {row})")
    return [(mid, messages.texts[first[mid]]) for mid in wanted]


def support_labels(loaded, data: Path, label_col: Optional[str]) -> tuple[Optional[str], str]:
    """The label column that gives message counts of support, and how to name their source.

    When ``data`` is the very file the model card says the model was trained
    on (same SHA-256), its label column is known without ``--label-col``.
    """
    from explain.model.model_files import sha256_of

    recorded = (loaded.card or {}).get("data") or {}
    if data.is_file() and recorded.get("sha256") == sha256_of(data):
        held_out = " (held-out messages included)" if (loaded.card or {}).get("holdout") else ""
        return label_col or recorded.get("label_col"), f"{data.name}, the training data of the model card{held_out}"
    return label_col, data.name


def console_for(color: str):
    """The terminal console under ``--color``.

    ``auto`` styles only a terminal, and nothing at all when ``NO_COLOR`` is
    set (no colour, and no bold or faint either: no escape codes).
    """
    if color == "always":
        return make_console(highlight=False, force_terminal=True, no_color=False)
    plain = color == "never" or os.environ.get("NO_COLOR", "") != ""
    return make_console(highlight=False, color_system=None if plain else "auto")


def read_one(raw: bytes | str, as_email: bool, view: str, rules: str | None = None) -> tuple:
    """``(message id, text the model reads, mail facts or None, text view)`` of one message given directly.

    In the raw text view the message is explained exactly as given, with one note line
    when it looks like an e-mail; ``--email`` (``as_email``) reads it as one in the
    model card's view or, without one, the body view (an e-mail is read under the text
    ``rules`` of the model card, :func:`~explain.model.email_reader.text_rules_of`).
    """
    from explain.analysis.mail_facts import mail_facts
    from explain.model.email_reader import (
        CURRENT_RULES, DEFAULT_VIEW, RAW_VIEW, looks_like_email, mail_view_note, read_email,
    )

    data = raw.encode("utf-8", errors="surrogatepass") if isinstance(raw, str) else raw
    if view == RAW_VIEW and not as_email:
        if looks_like_email(data):
            note(mail_view_note())
        return None, plain_message(raw), None, RAW_VIEW
    if not (as_email or looks_like_email(data)):
        return None, plain_message(raw), None, view
    view = DEFAULT_VIEW if view == RAW_VIEW else view
    mail = read_email(data, rules=rules or CURRENT_RULES)
    if mail.raw_fallback:
        fail(f"the e-mail could not be read: {mail.problems[0]}")
    if not mail.text(view).strip():  # a reading limit met says why, in the same line
        why_not = "; ".join(mail.problems) or ("attachments only" if mail.attachments else "")
        fail(f"the e-mail has no text in the {view} view" + (f" ({why_not})" if why_not else ""))
    for problem in mail.problems:
        warn(f"e-mail: {problem}")
    return mail.message_id or None, mail.text(view), mail_facts(mail, view), view


def given_message(loaded, text, file, max_bytes: int, as_email: bool, text_view) -> tuple[list, str]:
    """``([(id, text, mail facts)], text view)`` of the one message given as TEXT, ``-`` or ``--file``."""
    from explain.model.email_reader import resolve_text_view, text_rules_of

    if as_email and text_view == "raw":
        fail("--email reads a mail view; --text-view raw explains the message as given: give one of them")
    mid, message, mail, view = read_one(
        read_message(text, file, max_bytes), as_email, resolve_text_view(loaded.card, text_view),
        text_rules_of(loaded.card),
    )
    # A message from a file is named by its file when it carries no id of its own.
    return [(mid or (file.name if file is not None else None), message, mail)], view


def member_out_ok(out: Optional[Path], ids: Optional[Path], output_format: str) -> None:
    """The checks of ``--audience member`` that need no model: one message, a letter's suffix, no JSON."""
    from explain.present.letter import LETTER_WRITERS

    if ids is not None:
        fail("a member letter is about one message: give --id, TEXT or --file, not --ids")
    if output_format != "text":
        fail("a member letter has no JSON form; leave out --format json")
    if out is not None and out.suffix.lower() not in LETTER_WRITERS:
        fail(f"--out {out.name!r}: a member letter is written as .txt, .html or .pdf")


def write_letter(ledger, settings, date: str, pseudonyms, out: Optional[Path], outputs) -> None:
    """The member's letter about ``ledger``, to ``out`` (by suffix) or standard output as text."""
    from explain.analysis.ledger import redacted
    from explain.analysis.member_letter import member_letter
    from explain.present.letter import LETTER_WRITERS, text_letter

    letter = member_letter(redacted(ledger), settings, date, pseudonyms(ledger.message_id))
    if out is not None:
        outputs.write(out, LETTER_WRITERS[out.suffix.lower()](letter))
    else:
        sys.stdout.write(text_letter(letter))


def two_classes_or_fail(loaded) -> None:
    """Refuse a model of one class: a score needs two classes to weigh against each other."""
    if loaded.view.n_classes < 2:
        fail(
            f"the model has one class ({loaded.view.classes[0]}); a score needs two classes to weigh "
            "against each other, so there is nothing to explain"
        )


def _check_choices(color, audience, out, data, text, file, message_id, ids, threshold, threshold_log_odds) -> None:
    """Refuse options that do not go together, before any work."""
    from explain.runs.ledger_records import WRITERS

    if color not in COLOR_CHOICES:
        fail(f"--color must be auto, always or never, got {color!r}")
    if audience == "team" and out is not None and out.suffix.lower() not in WRITERS:
        fail(f"--out {out.name!r} has an unknown suffix; records are written as {', '.join(WRITERS)}")
    if (message_id is not None or ids is not None) and data is None:
        fail("--id and --ids pick messages of a data file: give it with --data")
    if data is not None and message_id is None and ids is None:
        fail("--data needs --id ID or --ids FILE to pick the messages to explain")
    if data is not None and (text is not None or file is not None):
        fail("give the message as TEXT, with --file, or from --data, not several")
    if message_id is not None and ids is not None:
        fail("give --id or --ids, not both")
    one_threshold(threshold, threshold_log_odds)


@app.command()
@with_option_sets(opening=ModelOptions)
def why(
    model: Path = typer.Argument(..., help="Model file (.skops; pickle/joblib only with --allow-pickle)."),
    text: Optional[str] = typer.Argument(None, help="The message, or - to read standard input."),
    file: Optional[Path] = typer.Option(None, "--file", "-f", help="Read the message (text or a raw .eml e-mail) from this file."),
    data: Optional[Path] = typer.Option(None, "--data", help="Data file (.csv, .jsonl, .parquet) holding the message."),
    text_col: str = typer.Option("text", "--text-col", help="Column of --data holding the text."),
    id_col: str = typer.Option("id", "--id-col", help="Column of --data holding message ids."),
    message_id: Optional[str] = typer.Option(None, "--id", help="Explain the message of --data with this id."),
    ids: Optional[Path] = typer.Option(None, "--ids", help="File of ids (one a line): explain each into one output."),
    label_col: Optional[str] = typer.Option(
        None, "--label-col", help="Column of --data holding classes: support then counts training-like messages."
    ),
    top: int = typer.Option(10, "--top", min=1, help="Largest entries to keep when a long message is folded."),
    threshold: Optional[float] = THRESHOLD,
    threshold_log_odds: Optional[float] = THRESHOLD_LOG_ODDS,
    output_format: str = typer.Option("text", "--format", help="text | json (on standard output)."),
    out: Optional[Path] = typer.Option(None, "--out", help="Write a record to this file: .txt or .json."),
    redact: Optional[bool] = typer.Option(
        None, "--redact/--no-redact",
        help="Mask people's details (names, numbers, addresses) in the text and the entries (default: masked in a "
             "record written with --out, which circulates; shown as given on the screen).",
    ),
    watchlist: Optional[Path] = typer.Option(None, "--watchlist", help="Terms to flag as watchlist (one a line)."),
    color: str = typer.Option("auto", "--color", help="auto | always | never (auto honours NO_COLOR)."),
    max_bytes: int = typer.Option(MAX_MESSAGE_BYTES, "--max-bytes", min=1, help="Refuse larger messages."),
    as_email: bool = typer.Option(
        False, "--email", help="Read the message as a raw e-mail even if its headers are not recognised."
    ),
    text_view: Optional[str] = TEXT_VIEW,
    max_data_bytes: str = MAX_DATA_BYTES,
    audience: str = typer.Option(
        "team", "--audience", help="team (the ledger, with every figure) | member (a plain letter to the person whose message was held)."
    ),
    letter_settings_file: Optional[Path] = typer.Option(
        None, "--letter-settings", help="TOML file with organisation, contact and appeal for the member letter."
    ),
    organisation: Optional[str] = typer.Option(None, "--organisation", help="The member letter's sender."),
    contact: Optional[str] = typer.Option(None, "--contact", help="Where a member asks questions (member letter)."),
    appeal: Optional[str] = typer.Option(None, "--appeal", help="How a member asks for a person's review (member letter)."),
    id_key_file: Optional[Path] = ID_KEY_FILE,
    opening: ModelOptions = None,
):
    """Why did the filter decide this message the way it did? Told as a ledger, or as a letter to the member."""
    from explain.model.email_reader import resolve_text_view
    from explain.output_files import OutputSet
    from explain.runs.ledger_records import WRITERS

    if output_format not in ("text", "json"):
        fail(f"--format must be text or json, got {output_format!r}")
    if audience not in ("team", "member"):
        fail(f"--audience must be team or member, got {audience!r}")
    from explain.analysis.redaction import IdPseudonyms, read_id_key

    pseudonyms = IdPseudonyms(read_id_key(id_key_file) if id_key_file is not None else None)
    if audience == "member":
        from explain.analysis.member_letter import letter_settings

        settings = letter_settings(letter_settings_file, organisation=organisation, contact=contact, appeal=appeal)
        member_out_ok(out, ids, output_format)
    _check_choices(color, audience, out, data, text, file, message_id, ids, threshold, threshold_log_odds)
    if redact is None:  # papers circulate: masked unless asked otherwise; the analyst's own screen shows the text
        redact = out is not None
    with OutputSet(inputs=[*opening.inputs(model), data, ids, watchlist, file, letter_settings_file,
                           id_key_file]) as outputs:
        if out is not None:
            outputs.file(out)  # checked before any work: never an input, a link or a folder

        loaded = opening.load(model)
        two_classes_or_fail(loaded)
        # Imported after loading, so that their imports overlap the loading process.
        from explain.analysis.ledger import ledger_of, redacted
        from explain.analysis.risk import read_watchlist
        from explain.present.ledger_terminal import render

        terms = read_watchlist(watchlist) if watchlist is not None else None
        view = resolve_text_view(loaded.card, text_view)
        messages = documents = None
        if data is not None:
            wanted = read_id_list(ids) if ids is not None else [message_id]
            label_col, source = support_labels(loaded, data, label_col)
            from explain.cli.mail_options import mail_input

            # An .eml folder or mbox file is read in the card's view and text rules, as every data command reads it.
            messages = read_messages_or_fail(data, text_col, label_col, mail_input(loaded.card, text_view), id_col=id_col,
                                             max_data_bytes=max_data_bytes)
            chosen = pick_messages(messages, wanted, data.name)
            for mid, message in chosen:  # the same --max-bytes as a message given directly
                size = len(message.encode("utf-8", "surrogatepass"))
                if size > max_bytes:
                    fail(f"the message {mid!r} in {data.name} is {size:,} bytes, more than --max-bytes ({max_bytes:,})")
            if label_col is not None:
                from explain.analysis.vocab import document_counts

                features = loaded.featurizer.transform(messages.texts)
                documents = document_counts(loaded.view, features, messages.labels, source)
            chosen = [(mid, message, None) for mid, message in chosen]
        else:
            chosen, view = given_message(loaded, text, file, max_bytes, as_email, text_view)
        ledgers = []
        for mid, message, mail in chosen:
            ledger = ledger_of(
                loaded, message, threshold, threshold_log_odds=threshold_log_odds,
                message_id=mid, documents=documents, watchlist=terms, mail=mail, text_view=view,
            )
            ledgers.append(redacted(ledger) if redact else ledger)

        date = record_date()
        if audience == "member":
            write_letter(ledgers[0], settings, date, pseudonyms, out, outputs)
        elif out is not None:
            outputs.write(out, WRITERS[out.suffix.lower()](ledgers, date=date, top=top))
        elif output_format == "json":
            document = WRITERS[".json"](ledgers, date=date, top=top)
            sys.stdout.write(for_terminal(document, is_json=True) if sys.stdout.isatty() else document)
        else:
            screen = console_for(color)
            for n, ledger in enumerate(ledgers):
                if n:
                    screen.rule()
                render(ledger, screen, top, date)
