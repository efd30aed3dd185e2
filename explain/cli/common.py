"""What every command shares: the Typer ``app``, the consoles, one-line errors and warnings, common options.

Each command module (``explain/cli/<command>.py``) imports from here and
registers itself on :data:`app`; :mod:`explain.cli` runs the app
(:func:`explain.cli.run`) and imports every command module.
"""

from __future__ import annotations

import io
import sys
from pathlib import Path
from typing import NoReturn

import typer

from explain.errors import NbledgerError
from explain.output_files import OutputSet
from explain.present.token_display import for_terminal, make_console, safe_line

app = typer.Typer(
    name="nbledger",
    help="Explain, review and assess a trained naive Bayes message filter.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)
console = make_console(highlight=False)
err_console = make_console(stderr=True, highlight=False)

EXIT_USER_ERROR = 2
EXIT_DEFECT = 3
EXIT_SIGINT = 130  # 128 + signal number, as shells report it
EXIT_SIGTERM = 143


class Interrupted(BaseException):
    """SIGINT or SIGTERM, raised so that every cleanup runs.

    Not a KeyboardInterrupt: the command-line library would turn that into a
    silent exit status.
    """

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def say(prefix: str, message: str) -> None:
    """One ``prefix: message`` line on standard error (the form of every error and warning)."""
    # File names and message texts inside errors are hostile: controls made visible.
    err_console.print(f"{prefix}: {safe_line(str(message))}", markup=False, soft_wrap=True)


def fail(message: str) -> NoReturn:
    """End the command with one error line and a non-zero exit."""
    say("error", message)
    raise typer.Exit(EXIT_USER_ERROR)


def one_threshold(threshold, threshold_log_odds) -> None:
    """Check the threshold options before any work: :func:`explain.model.decision.check_threshold`, the one check."""
    from explain.model.decision import check_threshold

    try:
        check_threshold(threshold, threshold_log_odds)
    except NbledgerError as exc:
        fail(str(exc))


def warn(message: str) -> None:
    say("warning", message)


def note(message: str) -> None:
    """One line of information on standard error that needs no action (``note: ...``)."""
    say("note", message)


def model_inputs(model: Path, vectorizer: Path | None = None) -> list[Path]:
    """The model file, its card and the vectorizer file: inputs no output may replace."""
    from explain.model.model_files import card_path_for

    return [model, card_path_for(model), vectorizer]


def read_messages_or_fail(
    data: Path,
    text_col: str | None,
    label_col: str | None = None,
    mail=None,
    id_col: str | None = None,
    *,
    max_data_bytes="1G",
    max_bytes: int | None = None,
):
    """Read a table, a folder of .eml files or an mbox file within the size limits; say what was replaced or cut.

    ``mail`` is an ``explain.model.mail_data.MailInput``; when ``label_col`` is given
    (or the e-mail options give labels) every message must have a label.
    """
    from explain.model.mail_data import MailInput, read_data

    messages = read_data(
        data, text_col, label_col, mail or MailInput(), id_col=id_col,
        max_bytes=parse_size(max_data_bytes, "--max-data-bytes"), max_message_bytes=max_bytes,
    )
    if messages.replaced_chars:
        warn(f"{messages.replaced_chars} invalid UTF-8 byte sequences in {data.name} were replaced by U+FFFD")
    for line in messages.notes:
        warn(f"{data.name}: {line}")
    if mail is not None:
        raw_mail_note(messages.texts, mail.view)
    return messages


def raw_mail_note(texts, view: str) -> None:
    """In the raw text view, one note line when messages look like e-mail (explained as given all the same)."""
    from explain.model.email_reader import RAW_VIEW, looks_like_email, mail_view_note

    if view != RAW_VIEW:
        return
    found = sum(looks_like_email(t[: 64 * 1024].encode("utf-8", "surrogatepass")) for t in texts)
    if found:
        note(mail_view_note(found, len(texts)))


def labelled_or_fail(messages, data: Path):
    """``messages`` if they carry labels, else one error line saying how to give them."""
    if messages.labels is None:
        fail(
            f"{data.name} gives no labels: use --label-col for a table, "
            "--labels-from-folders or --label for e-mail"
        )
    return messages


def plain_text(render, result, width: int) -> str:
    """What ``render(result, console)`` prints, as plain text of a given width (for --out)."""
    buffer = io.StringIO()
    render(result, make_console(file=buffer, width=width, no_color=True, highlight=False))
    return buffer.getvalue()


def deliver(
    outputs: OutputSet, *, text: str | None, out: Path | None, pictures: dict, images: Path | None, show,
    is_json: bool = False,
) -> None:
    """Stage the pictures and the output in ``outputs``; call once everything is computed.

    ``text`` goes to ``out`` (or standard output); with neither, ``show()``
    prints to the terminal. ``out`` and ``images`` must have been declared on
    ``outputs`` (``outputs.file(out)``, ``outputs.folder(images)``) before computing.
    """
    for name, png in pictures.items():
        outputs.write(images / name, png)
    if out is not None:
        outputs.write(out, text)
    elif text is not None:
        # Files keep the text exactly; a terminal gets controls made visible.
        typer.echo(for_terminal(text, is_json) if sys.stdout.isatty() else text, nl=False)
    else:
        show()


def parse_size(text: str, option: str) -> int:
    """``"4G"``, ``"512M"``, ``"64K"`` or a number of bytes -> bytes (powers of 1024)."""
    raw = str(text).strip().upper().removesuffix("B").removesuffix("I")
    scale = {"K": 1 << 10, "M": 1 << 20, "G": 1 << 30, "T": 1 << 40}.get(raw[-1:], 1)
    try:
        value = float(raw[:-1] if scale > 1 else raw) * scale
    except ValueError:
        fail(f"{option} takes a size such as 512M or 4G, got {text!r}")
    if not 0 < value < float(1 << 62):
        fail(f"{option} must be a positive size, got {text!r}")
    return int(value)


# Options shared by every command that loads a model (one definition, many commands).
MAX_MODEL_MEMORY = typer.Option(
    "8G", "--max-model-memory", help="Memory the separate process that opens the model file may use (e.g. 2G)."
)
LOAD_TIMEOUT = typer.Option(300.0, "--load-timeout", help="Seconds the model file may take to open.")
NO_CACHE = typer.Option(False, "--no-cache", help="Open the model file afresh, without the cache of loaded models.")
# Options every command that opens a model or applies the decision rule shares: one declaration each.
VECTORIZER = typer.Option(None, "--vectorizer", help="Vectorizer file, when MODEL is a bare classifier.")
ALLOW_PICKLE = typer.Option(False, "--allow-pickle", help="Allow pickle/joblib files (runs code from the file).")
TRUST = typer.Option(None, "--trust", help="Accept this type from a skops file (repeatable).")
NORMAL_CLASS = typer.Option(None, "--normal-class", help="The class that lets a message through.")
THRESHOLD = typer.Option(None, "--threshold", help="Flag when P(flag) >= P (default: the most probable class).")
THRESHOLD_LOG_ODDS = typer.Option(
    None, "--threshold-log-odds",
    help="Flag when the flag log-odds >= L, exactly (as printed for each operating point).",
)
MAX_BYTES = typer.Option(1 << 20, "--max-bytes", min=1, help="Refuse data files holding a message larger than this (bytes).")
MAX_DATA_BYTES = typer.Option("1G", "--max-data-bytes", help="Refuse data files larger than this once decompressed.")
# Message ids: one wording for every command that shows them.
ID_KEY_FILE = typer.Option(
    None, "--id-key-file",
    help="The organisation's secret: ids holding an e-mail address are shown as their HMAC-SHA-256 pseudonym.",
)


def id_col_option(of: str):
    """The ``--id-col`` option of a command whose messages come from ``of`` (``DATA``, ``--data`` ...)."""
    return typer.Option(None, "--id-col", help=f"Column of {of} holding message ids (default: id, if present).")
