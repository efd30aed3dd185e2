"""A run's output files appear all together, whole, or not at all.

Every command that writes files uses one :class:`OutputSet`::

    with OutputSet(inputs=[model, data]) as outputs:
        report = outputs.file(out)          # checked now, before any computing
        pictures = outputs.folder(images)   # checked now
        ...compute...
        outputs.write(report, text)
        outputs.write(pictures / "roc.png", png)
        tmp = outputs.staged(model_out)     # a temporary path to write to yourself

Checks made when a path is declared (so a run never computes for nothing):

- an output that is, or resolves to, one of the run's inputs (the model, its
  card, the data, a symbolic link to one of them) is refused;
- an existing symbolic link, folder, device or other special file at the
  target is refused (never replaced by a plain file);
- a folder that does not exist is created at the end, but the nearest existing
  folder above it must be a folder in which we can write: a staging folder
  (``.nbledger-XXXX``) is made there at once, which also proves it is writable.

Files are written into the staging folder. When the ``with`` block ends
normally, they are moved into place with ``os.replace`` while SIGINT and
SIGTERM are held back, so an interrupt leaves either the old files or the new
complete set; on an error or interrupt inside the block nothing new reaches
the targets. The staging folder is always removed. A replaced file keeps its
permission bits; a new one gets the usual ``0666`` less the umask.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import signal
import stat
import tempfile
from pathlib import Path

from explain.errors import NbledgerError

_HELD = {signal.SIGINT, signal.SIGTERM}


def _usual_mode() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


@contextlib.contextmanager
def signals_held():
    """Hold back SIGINT and SIGTERM (delivered when the block ends)."""
    try:
        old = signal.pthread_sigmask(signal.SIG_BLOCK, _HELD)
    except (ValueError, OSError):  # not the main thread
        old = None
    try:
        yield
    finally:
        if old is not None:
            signal.pthread_sigmask(signal.SIG_SETMASK, old)


def _same_file(a: Path, b: Path) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return os.path.realpath(a) == os.path.realpath(b)


def _existing_ancestor(path: Path) -> Path:
    """The nearest existing path at or above ``path``; refuses a file where a folder must be."""
    probe = path
    while not os.path.lexists(probe):
        probe = probe.parent
    if not probe.is_dir():
        raise NbledgerError(f"cannot write under {probe}: it is a file, not a folder")
    return probe


class OutputSet:
    """The output files of one run, written as one transaction (see the module doc).

    Parameters
    ----------
    inputs : paths the run reads (model file, vectorizer, card, data files,
        watchlist, message file); no output may be one of them.
    """

    def __init__(self, inputs=()):
        self._inputs = [Path(p) for p in inputs if p is not None and os.path.lexists(p)]
        self._targets: dict[Path, Path] = {}  # target -> staged path
        self._folders: list[Path] = []
        self._stages: dict[Path, Path] = {}  # existing ancestor -> staging folder

    # --- declaring -------------------------------------------------------

    def file(self, path) -> Path:
        """Declare an output file; refuse it now if it can never be written safely."""
        path = Path(path)
        self._check_not_input(path)
        if os.path.lexists(path):
            mode = os.lstat(path).st_mode
            if stat.S_ISLNK(mode):
                raise NbledgerError(f"{path} is a symbolic link; nbledger does not replace links, give the real path")
            if stat.S_ISDIR(mode):
                raise NbledgerError(f"{path} is a folder; give a file name")
            if not stat.S_ISREG(mode):
                raise NbledgerError(f"{path} is a special file (device, pipe or socket); nbledger only replaces plain files")
        self._stage_for(path.parent)
        self._targets.setdefault(path, None)
        return path

    def folder(self, path) -> Path:
        """Declare a folder whose files (written with :meth:`write`) are outputs."""
        path = Path(path)
        if os.path.lexists(path):
            mode = os.lstat(path).st_mode
            if stat.S_ISLNK(mode) and not path.is_dir():
                raise NbledgerError(f"{path} is a symbolic link to something that is not a folder")
            if not path.is_dir():
                raise NbledgerError(f"{path} must be a folder; it is a file")
        self._stage_for(path)
        self._folders.append(path)
        return path

    def not_input(self, path) -> Path:
        """Refuse ``path`` now if it is (or resolves to) an input of the run; for outputs written elsewhere."""
        path = Path(path)
        self._check_not_input(path)
        return path

    def _check_not_input(self, path: Path) -> None:
        for source in self._inputs:
            if _same_file(path, source):
                raise NbledgerError(f"refusing to write {path}: it is an input of this run ({source}); choose another name")

    def _stage_for(self, folder: Path) -> Path:
        anchor = _existing_ancestor(folder)
        key = anchor.resolve()
        if key not in self._stages:
            try:
                self._stages[key] = Path(tempfile.mkdtemp(prefix=".nbledger-", dir=anchor))
            except OSError as exc:
                raise NbledgerError(f"cannot write in {anchor}: {exc.strerror or exc}") from None
        return self._stages[key]

    # --- writing ---------------------------------------------------------

    def staged(self, path) -> Path:
        """The temporary path where the content of output ``path`` is to be written."""
        path = Path(path)
        if path not in self._targets:
            if not any(path.parent == f for f in self._folders):
                raise ValueError(f"{path} was not declared as an output")
            self.file(path)
        if self._targets[path] is None:
            stage = self._stage_for(path.parent)
            self._targets[path] = stage / f"{len(self._targets)}-{path.name}"
        return self._targets[path]

    def write(self, path, data: bytes | str) -> Path:
        """Stage ``data`` (text as UTF-8) for output ``path``."""
        payload = data.encode("utf-8") if isinstance(data, str) else data
        self.staged(path).write_bytes(payload)
        return Path(path)

    # --- the transaction -------------------------------------------------

    def __enter__(self) -> "OutputSet":
        return self

    def __exit__(self, kind, exc, tb) -> None:
        with signals_held():
            try:
                if kind is None:
                    self._commit()
            finally:
                for stage in self._stages.values():
                    shutil.rmtree(stage, ignore_errors=True)
                self._stages.clear()

    def _commit(self) -> None:
        ready = [(t, s) for t, s in self._targets.items() if s is not None]
        for target, staged in ready:
            # Checked again: the target may have changed while we computed.
            if os.path.lexists(target) and not stat.S_ISREG(os.lstat(target).st_mode):
                raise NbledgerError(f"{target} is no longer a plain file; nothing was written")
        for target, staged in ready:
            mode = stat.S_IMODE(os.stat(target).st_mode) if target.exists() else _usual_mode()
            os.chmod(staged, mode)
        for target, staged in ready:
            target.parent.mkdir(parents=True, exist_ok=True)
            os.replace(staged, target)


def write_atomic(path, data: bytes | str) -> None:
    """Write one file whole or not at all (a one-file :class:`OutputSet`)."""
    with OutputSet() as outputs:
        outputs.write(outputs.file(path), data)


@contextlib.contextmanager
def atomic_path(path):
    """Yield a temporary path; when the block succeeds it becomes ``path``."""
    with OutputSet() as outputs:
        yield outputs.staged(outputs.file(path))
