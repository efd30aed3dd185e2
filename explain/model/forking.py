"""When this process may fork a helper instead of starting a new interpreter.

A fork starts in milliseconds and shares what this process has imported and
loaded; a new interpreter takes a second or more to import the numerical
libraries again. But a fork copies only the calling thread: locks that other
threads hold stay locked in the child. So a fork is used only on Linux and
only while this process runs a single Python thread; otherwise callers start a
new interpreter (or work in this process). Threads that native libraries start
on their own (pyarrow's allocator keeps one) are not seen here; those
libraries re-arm their locks and thread pools in a forked child themselves.
"""

from __future__ import annotations

import sys
import threading


def can_fork() -> bool:
    """Whether a helper can be forked safely: Linux, and no other thread runs."""
    return sys.platform.startswith("linux") and threading.active_count() == 1


def flush_standard_streams() -> None:
    """Flush this process's buffered output, so that a child cannot write it a second time."""
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (AttributeError, OSError, ValueError):
            pass
