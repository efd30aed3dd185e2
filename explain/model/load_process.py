"""The loading process seen from the parent: start it, bound it, read what it left.

:func:`load_in_child` opens a model file (and its vectorizer file) in a
separate process under :class:`LoadLimits`: a fork of this one where
:func:`explain.model.forking.can_fork` allows it and there is room under the
memory limit, else a new interpreter running ``python -m
explain.model.load_child``. The child (:mod:`explain.model.load_child`) writes
the plain form (:mod:`explain.model.plain_form`) and ``result.json`` into a
temporary folder; this side turns its exit, its time and its result into
plain data or a one-line :class:`~explain.errors.NbledgerError`.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from explain.errors import NbledgerError
from explain.model.forking import can_fork, flush_standard_streams

#: Defaults of ``--max-model-memory`` and ``--load-timeout`` (stated in the README).
DEFAULT_MAX_MODEL_MEMORY = 8 << 30


DEFAULT_LOAD_TIMEOUT = 300.0


@dataclass(frozen=True)
class LoadLimits:
    """Bounds on opening one model file.

    Attributes
    ----------
    memory : int, bytes of address space the loading process may use; also the
        most a skops archive may declare once inflated.
    timeout : float, seconds the loading process may take (wall clock).
    cache : bool, use and fill the cache of plain forms.
    """

    memory: int = DEFAULT_MAX_MODEL_MEMORY
    timeout: float = DEFAULT_LOAD_TIMEOUT
    cache: bool = True


def _package_root() -> str:
    import explain

    return str(Path(explain.__file__).resolve().parent.parent)


def load_in_child(files: list[Path], *, allow_pickle: bool, trust: tuple, limits: LoadLimits) -> dict:
    """Open the model (and vectorizer) file in a separate, limited process.

    Returns ``{"plain": (arrays, settings), "peak_bytes": n}``, or
    ``{"needs_code": reason}`` for a text step that runs code of its own.
    Everything else ends in an :class:`NbledgerError`. The process is a fork
    of this one where that is safe and leaves room under the memory limit
    (it starts in milliseconds), else a new interpreter.
    """
    name = files[0].name
    folder = Path(tempfile.mkdtemp(prefix="nbledger-load-"))
    request = {
        "model": str(files[0].resolve()),
        "vectorizer": str(files[1].resolve()) if len(files) > 1 else None,
        "allow_pickle": allow_pickle,
        "trust": list(trust),
        "memory": int(limits.memory),
        "cpu_seconds": max(1, int(limits.timeout) + 1),
        "out": str(folder),
    }
    child = None
    try:
        if _fork_fits(limits.memory):
            started, child = time.monotonic(), _fork_loader(request, folder)
            child.join(timeout=max(0.0, limits.timeout - (time.monotonic() - started)))
            if child.is_alive():
                raise NbledgerError(
                    f"loading {name} took longer than {limits.timeout:g} s (--load-timeout); it was stopped"
                )
            returncode = child.exitcode
        else:
            started, returncode = _spawned_loader(request, folder, name, limits)
        return _outcome(folder, name, limits, started, returncode)
    finally:
        if child is not None and child.is_alive():
            child.kill()
            child.join()
        shutil.rmtree(folder, ignore_errors=True)


#: Address space a fork must have left under the limit to load a file in (else a new interpreter is started).
FORK_HEADROOM = 256 << 20


def _fork_fits(memory: int) -> bool:
    """Whether to fork the loading process: safe here, and this process leaves room under ``memory``."""
    from explain.model.load_child import address_space_bytes

    return can_fork() and address_space_bytes() + FORK_HEADROOM <= memory


def _fork_loader(request: dict, folder: Path):
    """Start the loading process as a fork of this one (see :mod:`explain.model.forking`).

    Everything the loading imports is imported here first, so that the fork
    shares it instead of importing it again (this process needs most of it
    anyway, to rebuild the text step).
    """
    import multiprocessing

    import skops.io  # noqa: F401
    import sklearn.feature_extraction.text  # noqa: F401
    import sklearn.naive_bayes  # noqa: F401
    import sklearn.pipeline  # noqa: F401

    from explain.model import load_child, model_view, plain_form  # noqa: F401

    flush_standard_streams()
    child = multiprocessing.get_context("fork").Process(
        target=_run_forked, args=(request, folder), daemon=True, name="nbledger-loader"
    )
    child.start()
    return child


def _run_forked(request: dict, folder: Path) -> None:
    """The forked loading process: its own session, quiet standard streams, then :func:`load_child.serve`."""
    from explain.model import load_child

    os.setsid()
    for signum in (signal.SIGINT, signal.SIGTERM):
        signal.signal(signum, signal.SIG_DFL)
    with open(os.devnull, "rb") as nothing, open(folder / "stderr.txt", "wb") as errors:
        os.dup2(nothing.fileno(), 0)
        os.dup2(errors.fileno(), 1)
        os.dup2(errors.fileno(), 2)
    sys.stdout = sys.stderr = open(2, "w", closefd=False)
    load_child.serve(request)


def _spawned_loader(request: dict, folder: Path, name: str, limits: LoadLimits) -> tuple[float, int]:
    """Run the loading process as a new interpreter; returns (start time, exit status)."""
    env = dict(os.environ)
    # The child imports what this process would (a trusted custom type's module included).
    env["PYTHONPATH"] = os.pathsep.join([_package_root(), *(p for p in sys.path if p and os.path.isdir(p))])
    # One thread each: numerical libraries reserve address space per thread.
    env.update(OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1", MKL_NUM_THREADS="1")
    child = None
    try:
        with open(folder / "stderr.txt", "wb") as errors:
            child = subprocess.Popen(
                [sys.executable, "-m", "explain.model.load_child", json.dumps(request)],
                stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=errors,
                env=env, cwd=folder, start_new_session=True,
            )
            started = time.monotonic()
            # While the child starts its interpreter and imports, this process
            # imports what the rebuild needs: the two overlap on a second core.
            import sklearn.feature_extraction.text  # noqa: F401

            try:
                child.wait(timeout=max(0.0, limits.timeout - (time.monotonic() - started)))
            except subprocess.TimeoutExpired:
                raise NbledgerError(
                    f"loading {name} took longer than {limits.timeout:g} s (--load-timeout); it was stopped"
                ) from None
        return started, child.returncode
    finally:
        if child is not None and child.poll() is None:
            os.killpg(child.pid, signal.SIGKILL)
            child.wait()


def _outcome(folder: Path, name: str, limits: LoadLimits, started: float, returncode: int) -> dict:
    """What the loading process left in ``folder``, or the one-line error it comes to."""
    from explain.model import plain_form

    result_file = folder / "result.json"
    if not result_file.exists():
        how = f"signal {signal.Signals(-returncode).name}" if returncode < 0 else f"exit status {returncode}"
        tail = (folder / "stderr.txt").read_bytes()[-2000:].decode("utf-8", "replace").strip().splitlines()
        if returncode == -signal.SIGXCPU or (time.monotonic() - started) >= limits.timeout:
            raise NbledgerError(f"loading {name} took longer than {limits.timeout:g} s (--load-timeout); it was stopped")
        raise NbledgerError(
            f"loading {name} stopped ({how}{'; ' + tail[-1] if tail else ''}); "
            f"it may need more than {limits.memory:,} bytes (--max-model-memory)"
        )
    result = json.loads(result_file.read_text(encoding="utf-8"))
    if result.get("memory"):
        raise NbledgerError(
            f"loading {name} needed more than {limits.memory:,} bytes (--max-model-memory); it was stopped"
        )
    if "error" in result:
        raise NbledgerError(result["error"])
    if "needs_code" in result:
        return result
    result["plain"] = plain_form.load(folder)
    return result

