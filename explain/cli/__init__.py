"""The ``nbledger`` command line: thin wrappers that parse, call the library, print.

Every command lives in its own module here and registers itself on ``app``.
Errors the user can fix arrive as :class:`~explain.errors.NbledgerError` and
end as one ``error: ...`` line on stderr with exit status 2; anything else is
a defect and still ends as one line (exit status 3), never a traceback.
"""

from __future__ import annotations

import io
import sys
from pathlib import Path
from typing import NoReturn

import typer
from rich.console import Console
from typer._click.exceptions import NoArgsIsHelpError
from typer.exceptions import TyperException

from explain.errors import NbledgerError
from explain.output_files import write_atomic

app = typer.Typer(
    name="nbledger",
    help="Explain, review and assess a trained naive Bayes message filter.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)
console = Console(highlight=False)
err_console = Console(stderr=True, highlight=False)

EXIT_USER_ERROR = 2
EXIT_DEFECT = 3


def fail(message: str) -> NoReturn:
    """End the command with one error line and a non-zero exit."""
    err_console.print(f"error: {message}", markup=False, soft_wrap=True)
    raise typer.Exit(EXIT_USER_ERROR)


def warn(message: str) -> None:
    err_console.print(f"warning: {message}", markup=False, soft_wrap=True)


def read_messages_or_fail(data: Path, text_col: str, label_col: str | None = None):
    """Read a data file; say how many invalid UTF-8 sequences were replaced."""
    from explain.model.data_io import read_messages

    messages = read_messages(data, text_col, label_col)
    if messages.replaced_chars:
        warn(f"{messages.replaced_chars} invalid UTF-8 byte sequences in {data.name} were replaced by U+FFFD")
    return messages


def plain_text(render, result, width: int) -> str:
    """What ``render(result, console)`` prints, as plain text of a given width (for --out)."""
    buffer = io.StringIO()
    render(result, Console(file=buffer, width=width, no_color=True, highlight=False))
    return buffer.getvalue()


def deliver(*, text: str | None, out: Path | None, pictures: dict, images: Path | None, show) -> None:
    """Write the pictures and the output; call only once everything is computed.

    ``text`` goes to ``out`` (or standard output); with neither, ``show()``
    prints to the terminal.
    """
    for name, png in pictures.items():
        write_atomic(images / name, png)
    if out is not None:
        write_atomic(out, text)
    elif text is not None:
        typer.echo(text, nl=False)
    else:
        show()


def load_model_or_fail(model: Path, *, vectorizer=None, allow_pickle=False, trust=(), normal_class=None):
    """The CLI's one way to load a model: warnings to stderr, errors as one line."""
    from explain.model.loading import load_model

    return load_model(
        model,
        vectorizer_path=vectorizer,
        allow_pickle=allow_pickle,
        trust=tuple(trust or ()),
        normal_class=normal_class,
        on_warning=warn,
    )


def run(argv: list[str]) -> int:
    """Run the command line on ``argv`` and return its exit status (never raises)."""
    try:
        result = app(args=list(argv), prog_name="nbledger", standalone_mode=False)
        return result if isinstance(result, int) else 0
    except NbledgerError as exc:
        err_console.print(f"error: {exc}", markup=False, soft_wrap=True)
        return EXIT_USER_ERROR
    except typer.Exit as exc:
        return exc.exit_code
    except (typer.Abort, KeyboardInterrupt):
        err_console.print("error: interrupted", markup=False)
        return 130
    except NoArgsIsHelpError:
        return 0  # the help has been printed
    except TyperException as exc:  # usage errors: unknown option, missing argument
        err_console.print(f"error: {exc.format_message()}", markup=False, soft_wrap=True)
        return EXIT_USER_ERROR
    except MemoryError:
        err_console.print("error: out of memory", markup=False)
        return EXIT_DEFECT
    except Exception as exc:  # a defect: still one line, never a traceback
        first = str(exc).splitlines()[0] if str(exc) else ""
        err_console.print(
            f"error: internal problem ({type(exc).__name__}: {first}); please report it",
            markup=False,
            soft_wrap=True,
        )
        return EXIT_DEFECT


def main() -> None:
    """Console-script entry point."""
    sys.exit(run(sys.argv[1:]))


# Command modules register themselves on import; keep these lines last.
from explain.cli import train, why  # noqa: E402,F401
from explain.cli import ledger  # noqa: E402,F401
from explain.cli import assess  # noqa: E402,F401
from explain.cli import vocab  # noqa: E402,F401
