"""Reading and tokenising on a second core: a helper process that streams featurised chunks.

Tokenising is Python code that holds the interpreter lock, so a thread cannot
run it beside the array work of the previous chunk; a process can. The
helper is a fork of this process, so it shares the loaded model without
pickling it. It reads the input chunk by chunk (the same reader, with the
same limits and errors) and runs :meth:`Featurizer.counts_and_features` on
each chunk: its results are the ones this process would compute, to the last
bit. It queues each chunk with its features and reads the next one while
this process computes the evidence of the last; at most
:data:`CHUNKS_AHEAD` chunks wait in the queue, so memory stays bounded.

The helper ignores SIGINT and SIGTERM (this process decides how a run stops),
is ended when this process leaves early, and is ended by the kernel if this
process dies. It is used only
where :func:`explain.model.forking.can_fork` says a fork is safe; otherwise
this process reads and tokenises.
"""

from __future__ import annotations

import multiprocessing
import os
import queue
import signal
from typing import Callable, Iterable

from explain.errors import NbledgerError
from explain.model.forking import can_fork, flush_standard_streams

#: Pieces the helper may have ready before the caller takes them (memory grows with this and the chunk size).
CHUNKS_AHEAD = 2
#: A chunk is read as this many pieces when the helper reads: a 2-stage pipeline idles while it fills
#: and drains, for one piece each (200,000 messages: 1.18-1.24 x predict_proba with whole chunks,
#: 1.00-1.09 with quarters).
PIECES = 4


def featured(make_chunks: Callable[[int], Iterable], featurizer, chunk_rows: int, helper: bool = True):
    """``(chunk, (counts, features))`` for each chunk ``make_chunks(rows)`` yields (chunks have ``.texts``).

    With ``helper`` (and where a fork is safe) a :class:`StreamWorker` reads
    and tokenises chunks of ``chunk_rows / PIECES`` messages: smaller pieces
    keep both processes busy from the start to the end of the run, and the
    pieces in flight hold fewer messages than one chunk. Without it this
    process reads chunks of ``chunk_rows``. Close the generator
    (``contextlib.closing``) so that an early stop ends the helper.
    """
    if not (helper and can_fork()):
        for chunk in make_chunks(chunk_rows):
            yield chunk, featurizer.counts_and_features(chunk.texts)
        return
    with StreamWorker(lambda: make_chunks(max(1, chunk_rows // PIECES)), featurizer) as worker:
        yield from worker


def _serve(make_chunks, featurizer, out, parent: int) -> None:
    _end_with_parent(parent)
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_IGN)
    with open(os.devnull, "wb") as nothing:  # what goes wrong travels as a message, never as a traceback
        os.dup2(nothing.fileno(), 1)
        os.dup2(nothing.fileno(), 2)
    try:
        for chunk in make_chunks():
            out.put(("chunk", chunk, featurizer.counts_and_features(chunk.texts)))
        reply = ("end", None)
    except NbledgerError as exc:
        reply = ("error", str(exc))
    except MemoryError:
        reply = ("error", "out of memory while reading and tokenising the input")
    except Exception as exc:  # a defect; the caller reports it as one line
        reply = ("defect", f"{type(exc).__name__}: {exc}")
    out.put(reply)


def _end_with_parent(parent: int) -> None:
    """Have the kernel end this process when its parent dies (Linux ``PR_SET_PDEATHSIG``)."""
    try:
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL)  # 1: PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        pass
    if os.getppid() != parent:  # the parent died before the request took effect
        os._exit(0)


class StreamWorker:
    """A forked helper that reads and featurises the chunks of ``make_chunks()`` (see the module note).

    Iterate over it for ``(chunk, (counts, features))`` in input order; use it
    as a context manager: leaving stops the helper.
    """

    def __init__(self, make_chunks: Callable[[], Iterable], featurizer):
        flush_standard_streams()
        context = multiprocessing.get_context("fork")
        self._queue = context.Queue(maxsize=CHUNKS_AHEAD)
        self._process = context.Process(
            target=_serve, args=(make_chunks, featurizer, self._queue, os.getpid()), daemon=True,
            name="nbledger-reader",
        )
        self._process.start()
        self._done = False

    def __iter__(self):
        while True:
            try:
                message = self._queue.get(timeout=0.5)
            except queue.Empty:
                if not self._process.is_alive():
                    raise self._gone() from None
                continue
            except (EOFError, OSError):
                raise self._gone() from None
            kind = message[0]
            if kind == "chunk":
                yield message[1], message[2]
            elif kind == "end":
                self._done = True
                return
            elif kind == "error":
                self._done = True
                raise NbledgerError(message[1])
            else:
                self._done = True
                raise RuntimeError(message[1])  # a defect in the helper: reported as one

    def _gone(self) -> NbledgerError:
        self._process.join(timeout=1.0)
        return NbledgerError(
            f"the helper process that reads and tokenises stopped unexpectedly (exit code {self._process.exitcode})"
        )

    def close(self) -> None:
        """Stop the helper: wait for it when it has finished, else end it at once (a run that stops early)."""
        if self._done:
            self._process.join(timeout=2.0)
        if self._process.is_alive():
            self._process.kill()
            self._process.join()
        self._queue.close()

    def __enter__(self) -> "StreamWorker":
        return self

    def __exit__(self, *exc) -> None:
        self.close()
