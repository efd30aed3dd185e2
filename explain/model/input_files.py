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
