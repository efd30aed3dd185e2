"""Input paths checked before they are opened: one clear line for each environment problem."""

from __future__ import annotations

import os
import stat
from pathlib import Path

from explain.errors import NbledgerError


def input_file(path, what: str) -> Path:
    """``path`` if it is a regular file we can read; otherwise one line naming path and problem.

    ``what`` names the file for the user ("model file", "data file" ...).
    Folders, devices, pipes and sockets are refused: reading a device or a
    pipe could block or never end.
    """
    path = Path(path)
    try:
        mode = os.stat(path).st_mode
    except FileNotFoundError:
        raise NbledgerError(f"no {what} at {path}") from None
    except OSError as exc:
        raise NbledgerError(f"cannot reach the {what} {path}: {exc.strerror}") from None
    if stat.S_ISDIR(mode):
        raise NbledgerError(f"the {what} {path} is a folder, not a file")
    if not stat.S_ISREG(mode):
        raise NbledgerError(f"the {what} {path} is not a regular file (a device, pipe or socket)")
    if not os.access(path, os.R_OK):
        raise NbledgerError(f"cannot read the {what} {path}: permission denied")
    return path


#: The one size limit of a small text file of terms or ids (watchlist, swap terms, id list).
TERM_FILE_LIMIT = 1 << 20


def term_text(path, what: str, limit: int = TERM_FILE_LIMIT) -> str:
    """The UTF-8 text (a byte-order mark allowed) of a small file of terms or ids, or one line naming the problem.

    One reader for every such file, with one size limit: at most ``limit`` bytes are read, so a device,
    a pipe or a huge file can neither block nor fill memory. ``what`` names the file ("watchlist", ...).
    """
    path = Path(path)
    try:
        mode = os.stat(path).st_mode
        if not stat.S_ISREG(mode):
            kind = "a folder" if stat.S_ISDIR(mode) else "not a regular file"
            raise NbledgerError(f"cannot read the {what} {path}: it is {kind}")
        with open(path, "rb") as handle:
            raw = handle.read(limit + 1)
    except OSError as exc:
        raise NbledgerError(f"cannot read the {what} {path}: {exc.strerror or exc}") from None
    if len(raw) > limit:
        raise NbledgerError(f"the {what} {path} is larger than {limit:,} bytes")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise NbledgerError(
            f"the {what} {path} is not UTF-8 text (byte 0x{raw[exc.start]:02x} at offset {exc.start})"
        ) from None
