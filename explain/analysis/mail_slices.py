"""Slice keys of raw e-mail: folder, sender domain, Date header month or week, mailing list.

The keys read what the e-mail reader kept beside each message's text
(:class:`explain.model.mail_data.MailColumns`); the slices are then tested
like any other (:mod:`explain.analysis.slices`).

- ``folder``: the message's folder below the data folder (below the label folder
  with ``--labels-from-folders``); ``(top)`` for messages directly in it.
- ``sender-domain``: the registrable domain of the From address (the domain one
  below its public suffix: ``lists.example.co.uk`` -> ``example.co.uk``), by the
  Public Suffix List (https://publicsuffix.org/list/) through ``tldextract`` with
  the snapshot it ships, never fetched (``suffix_list_urls=()``, no cache) and only
  its ICANN section. A From with no address or a bare host name is ``(none)``.
- ``date:month`` / ``date:week``: the calendar month (``2002-08``) or ISO 8601 week
  (``2002-W33``) of the Date header in UTC, parsed with the standard library's
  ``email.utils.parsedate_to_datetime`` (RFC 5322 section 3.3 dates, and the
  obsolete forms it accepts); an unreadable or missing Date is ``(none)``.
- ``list``: the list identifier of the List-Id header (RFC 2919: the part in angle
  brackets, ``kernel.example.org``); ``(none)`` without one.

Keys with many values (sender domains, lists) keep the most frequent
``MAX_SLICES - 2`` and put the rest in one ``(other)`` slice.
"""

from __future__ import annotations

import functools
import re
from collections import Counter
from email.utils import getaddresses, parsedate_to_datetime

import numpy as np

from explain.analysis.slices import MAX_SLICES, PERIODS, SliceGroup, by_values, parse_slice_spec
from explain.errors import NbledgerError

#: The keys of ``--slice-by`` that read raw e-mail rather than a data column.
MAIL_KEYS = ("folder", "sender-domain", "date", "list")
_LIST_ID = re.compile(r"<([^<>]+)>")


def is_mail_key(spec: str) -> bool:
    """True when ``spec`` (a ``--slice-by`` value) names a mail key rather than a column."""
    return parse_slice_spec(spec)[0] in MAIL_KEYS


@functools.lru_cache(maxsize=1)
def _extractor():
    import tldextract

    # The bundled snapshot only: no list is fetched and nothing is written to a cache.
    return tldextract.TLDExtract(suffix_list_urls=(), cache_dir=None, include_psl_private_domains=False)


def sender_domain(sender: str) -> str:
    """The registrable domain of the (first) address in a From header, lower case; "" when none."""
    addresses = [address for _, address in getaddresses([sender or ""]) if "@" in address]
    if not addresses:
        return ""
    host = addresses[0].rsplit("@", 1)[1].strip().strip(".").lower()
    if not host:
        return ""
    parts = _extractor()(host)
    if not parts.suffix or not parts.domain:
        return ""
    return f"{parts.domain}.{parts.suffix}"


def date_period(value: str, period: str) -> str:
    """``2002-08`` (month) or ``2002-W33`` (ISO week) of a Date header in UTC; "" when unreadable."""
    try:
        when = parsedate_to_datetime(value)
    except (TypeError, ValueError, IndexError, OverflowError):
        return ""
    if when is None:
        return ""
    if when.tzinfo is not None:
        from datetime import timezone

        when = when.astimezone(timezone.utc)
    if period == "month":
        return f"{when.year:04d}-{when.month:02d}"
    year, week, _ = when.isocalendar()
    return f"{year:04d}-W{week:02d}"


def list_id(value: str) -> str:
    """The list identifier of a List-Id header (RFC 2919), lower case; "" when none."""
    found = _LIST_ID.search(value or "")
    return (found.group(1) if found else (value or "")).strip().lower()


def _capped(values: list[str]) -> list[str]:
    """``values`` with all but the ``MAX_SLICES - 2`` most frequent non-empty values made ``(other)``
    (room is left for ``(other)`` and ``(none)``)."""
    counts = Counter(v for v in values if v)
    if len(counts) <= MAX_SLICES - 2:
        return values
    kept = {v for v, _ in sorted(counts.items(), key=lambda kv: (-kv[1], kv[0]))[: MAX_SLICES - 2]}
    return [v if not v or v in kept else "(other)" for v in values]


def mail_slices(spec: str, messages, where: str) -> SliceGroup:
    """The :class:`SliceGroup` of one mail key (``spec``) over ``messages`` read from ``where``."""
    key, period = parse_slice_spec(spec)
    mail = getattr(messages, "mail", None)
    if mail is None:
        raise NbledgerError(
            f"--slice-by {spec} needs raw e-mail, and {where} is a table of texts; give a folder of .eml files, "
            "an mbox file, or a table of whole messages with --raw-email"
        )
    if key == "folder":
        values = ["(top)" if not f else f for f in mail.folder]
        return by_values(values, "folder")
    if key == "sender-domain":
        return by_values(_capped([sender_domain(s) for s in mail.sender]), "sender domain")
    if key == "list":
        return by_values(_capped([list_id(v) for v in mail.list_id]), "mailing list")
    if period is None:
        raise NbledgerError(f"--slice-by date needs a period: date:{' or date:'.join(PERIODS)}")
    return by_values(np.asarray([date_period(v, period) for v in mail.date], dtype=object), f"Date header by {period}")
