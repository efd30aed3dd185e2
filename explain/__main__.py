"""``python -m explain`` and the ``nbledger`` console script.

SIGINT and SIGTERM are answered from the first moment: before the command
starts, with one line and exit 130 / 143 (nothing has been written yet); once
it runs, by :func:`explain.cli.run`, which lets every cleanup finish first.
The process ends with ``os._exit`` once the command's outputs are in place,
so that a late signal during the interpreter's teardown cannot change the
outcome of a finished run.
"""

import os
import signal
import sys


def _before_start(signum, frame):
    os.write(2, b"error: interrupted before the command started; nothing was written\n")
    os._exit(128 + signum)


def main() -> None:
    signal.signal(signal.SIGINT, _before_start)
    signal.signal(signal.SIGTERM, _before_start)
    if sys.stdout is None or sys.stderr is None:  # started with a standard stream closed (``>&-``)
        _closed_stream()
    from explain.cli import run

    code = run(sys.argv[1:])
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except OSError:  # a closed pipe: nothing more to say
        pass
    os._exit(code)


def _closed_stream() -> None:
    """One line (where standard error is open) and exit 2 when standard output or error was closed at start."""
    which = "output" if sys.stdout is None else "error"
    if sys.stderr is not None:
        os.write(2, f"error: standard {which} is closed; give it somewhere to write (a file, a pipe or /dev/null)\n".encode())
    os._exit(2)


if __name__ == "__main__":
    main()
