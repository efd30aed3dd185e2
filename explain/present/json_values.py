"""Strict JSON: the one sanitizer and the one writer of every JSON document nbledger produces.

:func:`strict` turns result objects into plain JSON values: frozen dataclasses
become objects, tuples and numpy arrays lists, numpy scalars Python numbers,
and NaN or infinities ``null`` (JSON has no such numbers; RFC 8259, section 6).
:func:`text` writes a document as nbledger does everywhere: two-space
indents, UTF-8 characters kept, a final newline, and an error rather than a
non-standard ``NaN`` should one slip through.
"""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np


def strict(obj):
    """``obj`` as plain JSON values, with NaN and infinities as None."""
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {f.name: strict(getattr(obj, f.name)) for f in dataclasses.fields(obj)}
    if isinstance(obj, dict):
        return {k: strict(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple, np.ndarray)):
        return [strict(v) for v in obj]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return float(obj) if math.isfinite(obj) else None
    return obj


def text(doc) -> str:
    """``doc`` as nbledger writes JSON: strict, two-space indents, UTF-8 kept, a final newline."""
    return json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
