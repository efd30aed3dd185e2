"""Output files are written whole or not at all.

Each file is first written to a temporary name in its own folder, then
renamed over the target (``os.replace`` is atomic on one file system), so an
interrupted or failed command never leaves a half-written file. The file gets
the usual permissions (``0666`` less the umask), not ``mkstemp``'s ``0600``.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path


def _usual_mode() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


@contextlib.contextmanager
def atomic_path(path):
    """Yield a temporary path beside ``path``; on success it becomes ``path``."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    os.close(fd)
    try:
        yield Path(tmp)
        os.chmod(tmp, _usual_mode())
        os.replace(tmp, path)
    finally:
        Path(tmp).unlink(missing_ok=True)


def write_atomic(path, data: bytes | str) -> None:
    """Write ``data`` (text as UTF-8) to ``path`` whole or not at all."""
    payload = data.encode("utf-8") if isinstance(data, str) else data
    with atomic_path(path) as tmp:
        tmp.write_bytes(payload)
