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
- two outputs of one run that are the same path or the same file (a link,
  ``./a`` and ``a``, a file inside a declared data set folder) are refused;
- a folder that does not exist is created at the end, but the nearest existing
  folder above it must be a folder in which we can write: a staging folder
  (``.nbledger-XXXX``) is made there at once, which also proves it is writable;
- a data set folder (:meth:`OutputSet.dataset`, replaced whole) must be new,
  empty or hold only the ``part.NNNNN.parquet`` files an earlier run wrote:
  anything else in it (or a file, link, FIFO or device in its place) is refused.

Staged files are named by a number and the target's suffixes (``3.csv.gz``),
so a staged name stays short whatever the target's length (``NAME_MAX``) and
is never shown to the user. Use the ``with`` block from the first declaration:
a refused declaration then removes the staging folder too.

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
import re
import shutil
import signal
import stat
import tempfile
from pathlib import Path

from explain.errors import NbledgerError

_HELD = {signal.SIGINT, signal.SIGTERM}
#: The files a data set folder written by :meth:`OutputSet.dataset` holds.
DATASET_PART = re.compile(r"part\.\d{5}\.parquet")
#: Longest suffix kept on a staged name (the rest of a staged name is a number).
_SUFFIX_KEPT = 24


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
        self._datasets: dict[Path, Path] = {}  # target folder -> staged folder
        self._stages: dict[Path, Path] = {}  # existing ancestor -> staging folder
        self._count = 0

    # --- declaring -------------------------------------------------------

    def file(self, path) -> Path:
        """Declare an output file; refuse it now if it can never be written safely."""
        path = Path(path)
        self._check_not_input(path)
        self._check_not_other_output(path)
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

    def folder(self, path, suffixes=(".png",)) -> Path:
        """Declare a folder whose files (written with :meth:`write`) are outputs.

        Refused now if it is an input, or holds an input whose suffix is one of
        ``suffixes`` (the kind of file the run will write into it).
        """
        path = Path(path)
        self._check_not_input(path)
        if os.path.lexists(path):
            mode = os.lstat(path).st_mode
            if stat.S_ISLNK(mode) and not path.is_dir():
                raise NbledgerError(f"{path} is a symbolic link to something that is not a folder")
            if not path.is_dir():
                raise NbledgerError(f"{path} must be a folder; it is a file")
            for source in self._inputs:
                if source.suffix.lower() in suffixes and _same_file(source.parent, path):
                    raise NbledgerError(
                        f"{path} holds {source.name}, an input of this run, which the run could overwrite; choose another folder"
                    )
        self._stage_for(path)
        self._folders.append(path)
        return path

    def dataset(self, path) -> Path:
        """Declare a folder that the run writes whole (a Parquet data set) and that replaces ``path`` at the end.

        Refused now unless ``path`` is new, or a real folder (not a link) that is
        empty or holds only ``part.NNNNN.parquet`` files; nor may it be or hold
        an input, or another output. The run writes into :meth:`staged_folder`.
        """
        path = Path(path)
        self._check_not_input(path)
        self._check_not_other_output(path)
        for source in self._inputs:
            if _inside(source, path):
                raise NbledgerError(f"refusing to replace the folder {path}: it holds {source.name}, an input of this run")
        _check_dataset_folder(path)
        self._datasets[path] = None
        self._stage_for(path.parent)
        return path

    def staged_folder(self, path) -> Path:
        """The temporary folder where the data set ``path`` (declared with :meth:`dataset`) is to be written."""
        path = Path(path)
        if path not in self._datasets:
            raise ValueError(f"{path} was not declared as a data set")
        if self._datasets[path] is None:
            self._count += 1
            folder = self._stage_for(path.parent) / f"{self._count}.d"
            folder.mkdir()
            self._datasets[path] = folder
        return self._datasets[path]

    def not_input(self, path) -> Path:
        """Refuse ``path`` now if it is (or resolves to) an input of the run; for outputs written elsewhere."""
        path = Path(path)
        self._check_not_input(path)
        return path

    def _check_not_other_output(self, path: Path) -> None:
        for other in [*self._targets, *self._datasets]:
            if other == path or _same_file(path, other) or _inside(path, other) or _inside(other, path):
                raise NbledgerError(f"{path} and {other} are both outputs of this run; give each its own name")

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
            self._count += 1
            self._targets[path] = stage / f"{self._count}{_kept_suffix(path)}"
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
        folders = [(t, s) for t, s in self._datasets.items() if s is not None]
        for target, staged in folders:
            _check_dataset_folder(target)  # again: it may have changed while we computed
            os.chmod(staged, 0o777 & ~_umask())
        for target, staged in ready:
            target.parent.mkdir(parents=True, exist_ok=True)
            os.replace(staged, target)
        for target, staged in folders:
            target.parent.mkdir(parents=True, exist_ok=True)
            if os.path.lexists(target):  # an earlier run's parts: moved into the staging folder, removed with it
                os.replace(target, staged.with_name(staged.name + ".old"))
            os.replace(staged, target)


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _inside(path: Path, folder: Path) -> bool:
    """Whether ``path`` lies (lexically or once resolved) strictly inside ``folder``."""
    a, b = Path(os.path.abspath(path)), Path(os.path.abspath(folder))
    if b in a.parents:
        return True
    try:
        return Path(os.path.realpath(folder)) in Path(os.path.realpath(path)).parents
    except OSError:
        return False


def _kept_suffix(path: Path) -> str:
    """The target's suffixes (``.csv.gz``) for its staged name, when short and plain; else its last suffix, cut."""
    kept = "".join(path.suffixes[-2:])
    if len(kept) > _SUFFIX_KEPT or not kept.replace(".", "").isalnum():
        kept = path.suffix if path.suffix[1:].isalnum() else ""
    return kept[:_SUFFIX_KEPT]


def _check_dataset_folder(path: Path) -> None:
    """Refuse ``path`` as a data set folder unless new, or a real folder holding only ``part.NNNNN.parquet`` files."""
    if not os.path.lexists(path):
        return
    mode = os.lstat(path).st_mode
    if stat.S_ISLNK(mode):
        raise NbledgerError(f"{path} is a symbolic link; nbledger does not replace links, give the real path")
    if not stat.S_ISDIR(mode):
        kind = "a file" if stat.S_ISREG(mode) else "a special file (device, pipe or socket)"
        raise NbledgerError(f"{path} is {kind}; a Parquet data set needs a new or empty folder")
    foreign = []
    with os.scandir(path) as entries:
        for entry in entries:
            if not (DATASET_PART.fullmatch(entry.name) and entry.is_file(follow_symlinks=False)):
                foreign.append(entry.name)
                if len(foreign) == 3:
                    break
    if foreign:
        raise NbledgerError(
            f"{path} holds files this run would not write ({', '.join(sorted(foreign))}); "
            "a Parquet data set replaces its whole folder, so give a new or empty folder"
        )


def write_atomic(path, data: bytes | str) -> None:
    """Write one file whole or not at all (a one-file :class:`OutputSet`)."""
    with OutputSet() as outputs:
        outputs.write(outputs.file(path), data)


@contextlib.contextmanager
def atomic_path(path):
    """Yield a temporary path; when the block succeeds it becomes ``path``."""
    with OutputSet() as outputs:
        yield outputs.staged(outputs.file(path))


@contextlib.contextmanager
def atomic_folder(path):
    """Yield a temporary folder; when the block succeeds it replaces the data set folder ``path``.

    ``path`` is checked as :meth:`OutputSet.dataset` says (new, empty, or only
    ``part.NNNNN.parquet`` files; never a file, link or device).
    """
    with OutputSet() as outputs:
        outputs.dataset(path)
        yield outputs.staged_folder(path)
