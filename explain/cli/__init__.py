"""The ``nbledger`` command line: thin wrappers that parse, call the library, print.

Every command lives in its own module here and registers itself on ``app``.
Errors the user can fix arrive as :class:`~explain.errors.NbledgerError` and
end as one ``error: ...`` line on stderr with exit status 2; anything else is
a defect and still ends as one line (exit status 3), never a traceback.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path
from typing import NoReturn

import typer
from rich.console import Console
from typer._click.exceptions import NoArgsIsHelpError
from typer.exceptions import TyperException

from explain.errors import NbledgerError

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


def write_atomic(path, data: bytes | str) -> None:
    """Write a file whole or not at all (temp file in the same folder, then rename)."""
    path = Path(path)
    payload = data.encode("utf-8") if isinstance(data, str) else data
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(payload)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def load_model_or_fail(model: Path, *, vectorizer=None, allow_pickle=False, trust=(), normal_class=None):
    """The CLI's one way to load a model: warnings to stderr, errors as one line."""
    from explain.loading import load_model

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
from explain.cli import assess  # noqa: E402,F401
from explain.cli import vocab  # noqa: E402,F401
