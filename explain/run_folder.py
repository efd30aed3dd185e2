"""One temporary folder per run, for the scratch files of the libraries a run uses.

Dask's workers spill and lock into a scratch folder (``dask-scratch-space``),
and matplotlib makes a configuration and font-cache folder of its own in the
system's temporary folder when its usual one (``$XDG_CONFIG_HOME/matplotlib``,
``$XDG_CACHE_HOME/matplotlib``) cannot be written, printing two lines about it
and leaving it behind after an interrupt. Both go into :func:`run_folder`
instead: ``nbledger-run-XXXX`` in the system's temporary folder, made when
first needed and removed by :func:`run_scope` on every ending of the run,
interrupts included.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from pathlib import Path

_folder: list[Path] = []


def run_folder() -> Path:
    """The run's own temporary folder (made on first use, private to the user)."""
    if not _folder:
        _folder.append(Path(tempfile.mkdtemp(prefix="nbledger-run-")))
    return _folder[0]


@contextlib.contextmanager
def run_scope():
    """Remove the run's temporary folder, if one was made, when the block ends in any way."""
    try:
        _settle_matplotlib()
        yield
    finally:
        while _folder:
            shutil.rmtree(_folder.pop(), ignore_errors=True)


def _writable_folder(path: Path) -> bool:
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError:
        return False
    return path.is_dir() and os.access(path, os.W_OK | os.X_OK)


def _xdg(variable: str, default: str) -> Path:
    base = os.environ.get(variable, "")
    return Path(base) if os.path.isabs(base) else Path.home() / default


def _settle_matplotlib() -> None:
    """Point matplotlib at the run's folder when its own folders cannot be written (and the user set none)."""
    if os.environ.get("MPLCONFIGDIR"):
        return
    wanted = (_xdg("XDG_CONFIG_HOME", ".config") / "matplotlib", _xdg("XDG_CACHE_HOME", ".cache") / "matplotlib")
    if not all(_writable_folder(path) for path in wanted):
        folder = run_folder() / "matplotlib"
        folder.mkdir(exist_ok=True)
        os.environ["MPLCONFIGDIR"] = str(folder)
