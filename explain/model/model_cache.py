"""A cache of loaded filters in plain form, keyed by the model file's SHA-256.

The first load of a model file runs the separate loading process; its plain
form (:mod:`explain.model.plain_form`: ``.npz`` arrays read with
``allow_pickle=False`` plus JSON) is kept in the user's cache folder, so the
next load of the same bytes skips the process. The folder is
``$XDG_CACHE_HOME/nbledger/models`` (``~/.cache/nbledger/models`` when
``XDG_CACHE_HOME`` is unset or not absolute, as the XDG Base Directory
Specification says).

An entry is used only if its recorded key equals the model's digest and the
SHA-256 of its ``.npz`` equals the one recorded when it was written; anything
else (a damaged, partial or foreign entry) is ignored and rebuilt. A cache that
cannot be written (read-only home) is skipped silently: it only saves time.
A cached load runs nothing from the model file (the entry is plain data), so
the skops allow-list, checked when the entry was made, is not asked again;
pickle files still need ``--allow-pickle`` every time.

Hashing a large model file is most of a cached load (1.2 s for 640 MiB), so
:func:`file_sha256` also remembers each file's digest beside its identity
(device, inode, size, modification and change times in nanoseconds), the way
git's index skips re-hashing unchanged files. Any write to the file changes
its change time, which only the system clock decides, so a changed file is
always hashed again.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from pathlib import Path

from explain.model import plain_form


def cache_folder() -> Path:
    base = os.environ.get("XDG_CACHE_HOME", "")
    root = Path(base) if os.path.isabs(base) else Path.home() / ".cache"
    return root / "nbledger" / "models"


def _digest(path: Path) -> str:
    with open(path, "rb") as handle:
        return hashlib.file_digest(handle, "sha256").hexdigest()


def _identity(path: Path) -> list[int]:
    info = os.stat(path)
    return [info.st_dev, info.st_ino, info.st_size, info.st_mtime_ns, info.st_ctime_ns]


def file_sha256(path: Path, remember: bool = True) -> str:
    """SHA-256 of ``path``; re-used from the cache when the file's identity is unchanged."""
    if not remember:
        return _digest(path)
    note = cache_folder() / "digests" / f"{hashlib.sha256(os.fsencode(os.path.realpath(path))).hexdigest()}.json"
    identity = _identity(path)
    try:
        known = json.loads(note.read_text(encoding="utf-8"))
        if known.get("identity") == identity and isinstance(known.get("sha256"), str):
            return known["sha256"]
    except (OSError, ValueError, AttributeError):
        pass
    digest = _digest(path)
    if _identity(path) == identity:  # not changed while we read it
        try:
            note.parent.mkdir(parents=True, exist_ok=True)
            with tempfile.NamedTemporaryFile("w", dir=note.parent, delete=False, suffix=".tmp") as handle:
                json.dump({"identity": identity, "sha256": digest}, handle)
            os.replace(handle.name, note)
        except OSError:
            pass
    return digest


def read(key: str) -> tuple[dict, dict] | None:
    """(arrays, settings) cached under ``key``, or None when absent or not trustworthy."""
    folder = cache_folder()
    try:
        entry = json.loads((folder / f"{key}.json").read_text(encoding="utf-8"))
        if entry.get("key") != key or entry.get("npz_sha256") != _digest(folder / f"{key}.npz"):
            return None
        arrays, _ = plain_form.load(folder, key)
        return arrays, entry["settings"]
    except (OSError, ValueError, KeyError, TypeError, AttributeError):
        return None


def write(key: str, arrays: dict, settings: dict) -> None:
    """Keep the plain form under ``key``; both files appear whole or not at all."""
    folder = cache_folder()
    try:
        folder.mkdir(parents=True, exist_ok=True)
        with tempfile.TemporaryDirectory(dir=folder, prefix=".incoming-") as tmp:
            plain_form.save(tmp, arrays, {}, stem="entry")
            npz = Path(tmp) / "entry.npz"
            entry = {"key": key, "npz_sha256": _digest(npz), "settings": settings}
            (Path(tmp) / "entry.json").write_text(json.dumps(entry, allow_nan=False), encoding="utf-8")
            os.replace(npz, folder / f"{key}.npz")
            os.replace(Path(tmp) / "entry.json", folder / f"{key}.json")
    except (OSError, ValueError):
        pass
