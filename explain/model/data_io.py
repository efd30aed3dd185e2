"""Reading labelled or unlabelled messages from CSV, JSON Lines or Parquet, whole.

The file is parsed by :mod:`explain.model.table_stream`, the one parser of
data tables (the batch ledger reads through it too), and its chunks are
gathered here into :class:`Messages`; formats, the UTF-8 policy, size limits
and error lines are that module's. On top of them:

- Text is decoded as UTF-8; bytes that are not valid UTF-8 are replaced by
  U+FFFD and *counted* (``Messages.replaced_chars``) so the caller can say how
  many were replaced.
- A file with a header but no rows is refused; missing texts become empty
  strings; missing labels are refused (naming the first row).
- Ids come from the id column (``id_col``, default ``id`` when present) or
  are data row numbers from 1; a blank id is refused, naming the
  row; repeated ids are counted in a note (a figure about one names its
  first row).
- Size limits: a file larger than ``max_bytes`` once decompressed is refused
  (``.gz`` is inflated as a stream and stopped there; a Parquet file whose
  row groups declare more is refused unread); a message longer than
  ``max_message_bytes`` (UTF-8) is refused naming its row.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from explain.errors import NbledgerError
from explain.model.input_files import input_file
from explain.model.table_stream import (  # noqa: F401 (data_format, decode_utf8 ...: part of this module's interface)
    MAX_JSON_DEPTH, ReadingLimits, as_ids, as_texts, data_format, decode_utf8, is_missing, parse_json_row,
    table_batches,
)

#: Default of ``--max-data-bytes``: the most a data file may hold once decompressed.
DEFAULT_MAX_DATA_BYTES = 1 << 30
#: Rows per chunk gathered from the parser.
_CHUNK_ROWS = 50_000


@dataclass(frozen=True, eq=False)
class Messages:
    """Messages read from a file, in file order.

    Attributes
    ----------
    texts : list of str
    labels : ndarray of str, or None when no label column was asked for
    ids : ndarray of str, one per message: the id column (``id_col``, or ``id``
        when the file has one), else data row numbers counted from 1
    id_col : str or None, the column the ids came from (None: row numbers)
    replaced_chars : int, bytes that were not valid UTF-8 and became U+FFFD
    source : Path
    sha256 : str, of the file's bytes as stored (for a folder, of its files' names and bytes)
    notes : tuple of str, what the reader had to do that the user should hear (one line each,
        e.g. e-mail parts in unknown charsets, counted); the CLI prints them as warnings
    """

    texts: list
    labels: np.ndarray | None
    ids: np.ndarray
    replaced_chars: int
    source: Path
    sha256: str
    notes: tuple = ()
    id_col: str | None = None
    #: raw e-mail only: :class:`explain.model.mail_data.MailColumns` (folder, sender, date, list per message)
    mail: object = None

    def __len__(self) -> int:
        return len(self.texts)


def _gather(path, columns, optional=(), max_bytes=DEFAULT_MAX_DATA_BYTES, max_message_bytes=None, text_col=None):
    """(values by column, replaced characters, the file as opened) of a whole data file, read in chunks."""
    path = Path(path)
    data_format(path)
    path = input_file(path, "data file")
    limits = ReadingLimits(max_message_bytes, max_bytes)
    gathered: dict = {}
    replaced = 0
    for values, bad, _ in table_batches(path, columns, optional, _CHUNK_ROWS, limits, text_col):
        for column, part in values.items():
            gathered.setdefault(column, []).extend(part)
        replaced += bad
    return gathered, replaced, path


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        while block := handle.read(1 << 20):
            digest.update(block)
    return digest.hexdigest()


def read_column(path, column: str, max_bytes: int = DEFAULT_MAX_DATA_BYTES) -> list:
    """The values of one column of a data file, in file order (for slicing)."""
    columns, _, _ = _gather(path, [column], max_bytes=max_bytes)
    return columns.get(column, [])


def read_messages(
    path,
    text_col: str,
    label_col: str | None = None,
    id_col: str | None = None,
    *,
    max_bytes: int = DEFAULT_MAX_DATA_BYTES,
    max_message_bytes: int | None = None,
) -> Messages:
    """Read messages (and labels) from a data file; see the module policy.

    ``id_col`` names the column of message ids; without it the column ``id``
    is used when the file has one, else data row numbers from 1. A missing id is
    refused; repeated ids are allowed and counted in ``notes`` (commands that
    pick messages by id use the first).
    """
    path = Path(path)
    wanted = [c for c in (text_col, label_col, id_col) if c is not None]
    optional = ("id",) if id_col is None else ()
    columns, replaced, opened = _gather(path, wanted, optional, max_bytes, max_message_bytes, text_col)
    digest = _sha256(opened)  # only the whole reader records the file's digest (read_column has no use for it)
    if not columns:
        raise NbledgerError(f"{path.name} has a header but no rows")
    texts, _ = as_texts(columns[text_col])
    labels = None
    if label_col is not None:
        values = columns[label_col]
        gaps = [i for i, v in enumerate(values) if is_missing(v) or str(v).strip() == ""]
        if gaps:
            raise _without(path.name, gaps, label_col)
        labels = np.asarray([str(v).strip() for v in values], dtype=object)
    if id_col is None and "id" in columns:
        id_col = "id"
    ids = _ids(columns[id_col], id_col, path.name) if id_col is not None else np.asarray(
        [str(i + 1) for i in range(len(texts))], dtype=object
    )
    notes = () if id_col is None else _repeated_ids(ids, id_col)
    return Messages(texts, labels, ids, replaced, path, digest, notes=notes, id_col=id_col)


def _without(name: str, rows, column: str) -> NbledgerError:
    """Rows (0-based positions) that have no value in ``column``, refused naming the first."""
    count = "1 row has" if len(rows) == 1 else f"{len(rows):,} rows have"
    return NbledgerError(f"{name}: {count} no {column!r} (first at data row {rows[0] + 1})")


def _ids(values, id_col: str, name: str) -> np.ndarray:
    """The id column as strings; a missing id is refused, naming its data row."""
    ids = np.asarray(as_ids(values), dtype=object)
    empty = np.flatnonzero(ids == "")
    if len(empty):
        raise _without(name, empty, id_col)
    return ids


def _repeated_ids(ids: np.ndarray, id_col: str) -> tuple[str, ...]:
    """A note on ids used by more than one row (a figure about such an id names its first row)."""
    _, first, counts = np.unique(ids.astype(str), return_index=True, return_counts=True)
    if not (counts > 1).any():
        return ()
    row = int(first[counts > 1].min())
    shared, extra = int((counts > 1).sum()), int(counts[counts > 1].sum() - (counts > 1).sum())
    return (
        f"ids in column {id_col!r} used by more than one row: {shared:,} "
        f"({extra:,} extra {'row' if extra == 1 else 'rows'}; first {ids[row]!r} at data row {row + 1})",
    )
