"""Tokenising on a second core: a helper process that featurises chunks of texts.

Tokenising is Python code that holds the interpreter lock, so a thread cannot
run it beside the array work of the previous chunk; a process can. The
helper is a fork of this process, so it shares the loaded model without
pickling it, and it runs nothing but :meth:`Featurizer.counts_and_features`:
its results are the ones this process would compute, to the last bit.

One chunk is in the helper at a time, and a chunk is sent only while the
helper waits for one, so neither side ever blocks on the other's full pipe.
The helper ignores SIGINT and SIGTERM (this process decides how a run stops)
and ends when its pipe closes, also when this process dies.

It is used only where :func:`explain.model.forking.can_fork` says a fork is
safe; otherwise this process tokenises.
"""

from __future__ import annotations

import multiprocessing
import signal

from explain.errors import NbledgerError
from explain.model.forking import can_fork, flush_standard_streams


def _serve(featurizer, conn, other_end) -> None:
    other_end.close()  # else the pipe never reports the caller's end closed
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_IGN)
    while True:
        try:
            texts = conn.recv()
        except (EOFError, OSError):
            return
        try:
            reply = ("ok", featurizer.counts_and_features(texts))
        except MemoryError:
            reply = ("error", "out of memory while tokenising")
        except Exception as exc:  # the caller reports it as one line
            reply = ("error", f"{type(exc).__name__}: {exc}")
        try:
            conn.send(reply)
        except (EOFError, OSError):
            return


def featured(chunks, featurizer, helper: bool = True):
    """``(chunk, (counts, features))`` for each chunk of an iterable of chunks with ``.texts``.

    From the second chunk on, a :class:`FeatureWorker` tokenises the next
    chunk while the caller works on the one yielded (the first chunk is
    tokenised here while the helper takes the second); with a single chunk, or
    where :func:`can_fork` says no or ``helper`` is False, this process
    tokenises. Close the
    generator (``contextlib.closing``) so that an early stop ends the helper.
    """
    chunks = iter(chunks)
    first = next(chunks, None)
    if first is None:
        return
    second = next(chunks, None)
    if second is None or not helper or not can_fork():
        for chunk in ([first] if second is None else [first, second]):
            yield chunk, featurizer.counts_and_features(chunk.texts)
        for chunk in chunks:
            yield chunk, featurizer.counts_and_features(chunk.texts)
        return
    with FeatureWorker(featurizer) as worker:
        # The helper takes the second chunk while this process tokenises the first.
        worker.submit(second.texts)
        yield first, featurizer.counts_and_features(first.texts)
        pending = second
        for chunk in chunks:
            features = worker.result()
            worker.submit(chunk.texts)
            yield pending, features
            pending = chunk
        yield pending, worker.result()


class FeatureWorker:
    """A forked helper featurising one chunk at a time (see the module note).

    ``submit(texts)`` hands it a chunk; ``result()`` waits for that chunk's
    ``(counts, features)``. Use as a context manager: leaving stops the helper.
    """

    def __init__(self, featurizer):
        flush_standard_streams()
        context = multiprocessing.get_context("fork")
        self._conn, child = context.Pipe()
        self._process = context.Process(target=_serve, args=(featurizer, child, self._conn), daemon=True, name="nbledger-tokeniser")
        self._process.start()
        child.close()
        self._busy = False

    def submit(self, texts: list) -> None:
        if self._busy:
            raise RuntimeError("the helper holds a chunk already; take its result first")
        try:
            self._conn.send(texts)
        except OSError:
            raise self._gone() from None
        self._busy = True

    def result(self):
        self._busy = False
        try:
            kind, payload = self._conn.recv()
        except (EOFError, OSError):
            raise self._gone() from None
        if kind == "error":
            raise NbledgerError(f"tokenising failed: {payload}")
        return payload

    def _gone(self) -> NbledgerError:
        self._process.join(timeout=1.0)
        return NbledgerError(
            f"the helper process that tokenises stopped unexpectedly (exit code {self._process.exitcode})"
        )

    def close(self) -> None:
        """Stop the helper: at once if it still holds a chunk (a run that stops early), else when its pipe closes."""
        self._conn.close()
        if not self._busy:
            self._process.join(timeout=2.0)
        if self._process.is_alive():
            self._process.kill()
            self._process.join()

    def __enter__(self) -> "FeatureWorker":
        return self

    def __exit__(self, *exc) -> None:
        self.close()
