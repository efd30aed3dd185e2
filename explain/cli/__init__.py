"""The ``nbledger`` command line: thin wrappers that parse, call the library, print.

Every command lives in its own module here and registers itself on ``app``
(:mod:`explain.cli.common`, with what the commands share); :func:`run` runs it.
Errors the user can fix arrive as :class:`~explain.errors.NbledgerError` and
end as one ``error: ...`` line on stderr with exit status 2; anything else is
a defect and still ends as one line (exit status 3), never a traceback.
"""

from __future__ import annotations

import os
import signal
import sys
import threading
import warnings

import typer
from typer._click.exceptions import NoArgsIsHelpError
from typer.exceptions import TyperException

from explain.cli.common import (
    EXIT_DEFECT, EXIT_SIGINT, EXIT_SIGTERM, EXIT_USER_ERROR, Interrupted, app, say, warn,
)
from explain.errors import NbledgerError
from explain.run_folder import run_scope


def _library_warning(message, category, filename, lineno, file=None, line=None) -> None:
    """A warning from numpy, scikit-learn ... as one line of ours, without source paths."""
    text = str(message).strip().splitlines()
    warn(f"{category.__name__}: {text[0] if text else ''}")


def _on_signal(signum, frame) -> None:
    raise Interrupted(signum)


def _unraisable(unraisable) -> None:
    """An exception Python could not raise (in a weakref callback, a ``__del__``, ...).

    A signal that arrives while such a callback runs raises :class:`Interrupted`
    there, where Python swallows it: send the signal again, so that it is raised
    at the next ordinary point and the run still stops. Anything else is one
    warning line, never a traceback.
    """
    if isinstance(unraisable.exc_value, Interrupted):
        _send_again(unraisable.exc_value.signum)
        return
    warn(f"ignored {unraisable.exc_type.__name__} in {getattr(unraisable.object, '__qualname__', 'cleanup')}")


#: Seconds before a swallowed signal is sent again: long enough for the hook to have returned.
RESEND_DELAY = 0.05


def _send_again(signum: int) -> None:
    """Send ``signum`` to this process again, from a timer thread, once the unraisable hook has returned.

    A signal arriving while the timer starts (another Ctrl-C) is caught here and
    the timer started anew, so that nothing escapes the hook as a traceback.
    """
    for _ in range(5):
        timer = threading.Timer(RESEND_DELAY, os.kill, args=(os.getpid(), signum))
        timer.daemon = True
        try:
            timer.start()
            return
        except Interrupted as again:
            signum = again.signum


def run(argv: list[str]) -> int:
    """Run the command line on ``argv`` and return its exit status (never raises)."""
    in_main = threading.current_thread() is threading.main_thread()
    old = {s: signal.signal(s, _on_signal) for s in (signal.SIGINT, signal.SIGTERM)} if in_main else {}
    old_hook, sys.unraisablehook = sys.unraisablehook, _unraisable
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("default")
            # Unclosed files after an interrupt are the interpreter's housekeeping, not the user's concern.
            warnings.simplefilter("ignore", ResourceWarning)
            warnings.showwarning = _library_warning
            with run_scope():
                return _run(argv)
    finally:
        sys.unraisablehook = old_hook
        for s, handler in old.items():
            signal.signal(s, handler)


def _run(argv: list[str]) -> int:
    try:
        result = app(args=list(argv), prog_name="nbledger", standalone_mode=False)
        return result if isinstance(result, int) else 0
    except NbledgerError as exc:
        say("error", exc)
        return EXIT_USER_ERROR
    except typer.Exit as exc:
        return exc.exit_code
    except (typer.Abort, KeyboardInterrupt):
        say("error", "interrupted by SIGINT; no output was left half-written")
        return EXIT_SIGINT
    except Interrupted as stop:
        return _stopped(stop)
    except NoArgsIsHelpError:
        return 0  # the help has been printed
    except TyperException as exc:  # usage errors: unknown option, missing argument
        say("error", exc.format_message())
        return EXIT_USER_ERROR
    except MemoryError:
        say("error", "out of memory")
        return EXIT_DEFECT
    except OSError as exc:  # the environment: permissions, missing paths, special files, full disks
        where = f"{exc.filename}: " if exc.filename else ""
        say("error", f"{where}{exc.strerror or type(exc).__name__}")
        return EXIT_USER_ERROR
    except Exception as exc:  # a defect: still one line, never a traceback
        stop = _interrupt_behind(exc)
        if stop is not None:
            return _stopped(stop)
        first = str(exc).splitlines()[0] if str(exc) else ""
        say("error", f"internal problem ({type(exc).__name__}: {first}); please report it")
        return EXIT_DEFECT


def _stopped(stop: Interrupted) -> int:
    name = signal.Signals(stop.signum).name
    say("error", f"interrupted by {name}; no output was left half-written")
    return EXIT_SIGTERM if stop.signum == signal.SIGTERM else EXIT_SIGINT


def _interrupt_behind(exc: BaseException) -> Interrupted | None:
    """The :class:`Interrupted` another exception wraps, if any.

    A signal that arrives while Python runs ``__set_name__`` during a class
    definition (an import of a plotting module, say) comes out as a
    ``RuntimeError`` whose cause is our ``Interrupted``: still a stop, not a defect.
    """
    seen = set()
    while exc is not None and id(exc) not in seen:
        if isinstance(exc, Interrupted):
            return exc
        seen.add(id(exc))
        exc = exc.__cause__ or exc.__context__
    return None


# Command modules register themselves on import; keep these lines last.
from explain.cli import train, why  # noqa: E402,F401
from explain.cli import ledger  # noqa: E402,F401
from explain.cli import assess  # noqa: E402,F401
from explain.cli import vocab  # noqa: E402,F401
from explain.cli import report  # noqa: E402,F401
from explain.cli import demo  # noqa: E402,F401
from explain.cli import compare  # noqa: E402,F401
from explain.cli import probe  # noqa: E402,F401
from explain.cli import serve, user, reviews  # noqa: E402,F401
