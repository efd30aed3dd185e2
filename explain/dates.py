"""The date a record carries: the one place ``SOURCE_DATE_EPOCH`` is read.

``SOURCE_DATE_EPOCH`` (https://reproducible-builds.org/specs/source-date-epoch/),
when set, fixes the date of every record (why records, reports, comparisons),
so that the same inputs give byte-identical files; else the date is now, in UTC.
"""

from __future__ import annotations

import datetime as _dt
import os

from explain.errors import NbledgerError


def record_moment() -> _dt.datetime:
    """``SOURCE_DATE_EPOCH`` when set, else now; UTC, whole seconds."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch is not None:
        try:
            return _dt.datetime.fromtimestamp(int(epoch), _dt.timezone.utc)
        except (ValueError, OverflowError, OSError):
            raise NbledgerError(f"SOURCE_DATE_EPOCH must be whole seconds since 1970, got {epoch!r}") from None
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0)


def record_date() -> str:
    """:func:`record_moment` as ISO 8601 with a ``Z`` (``2026-05-01T09:30:00Z``)."""
    return record_moment().isoformat().replace("+00:00", "Z")
