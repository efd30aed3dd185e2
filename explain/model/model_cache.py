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
