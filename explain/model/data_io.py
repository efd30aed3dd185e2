"""Reading labelled or unlabelled messages from CSV, JSON Lines or Parquet.

Data files are untrusted. The policy:

- ``.csv``, ``.jsonl`` (or ``.ndjson``) and ``.parquet``, each optionally
  ``.gz``-compressed, recognised by the file name.
- Text is decoded as UTF-8; bytes that are not valid UTF-8 are replaced by
  U+FFFD and *counted* (``Messages.replaced_chars``) so the caller can say how
  many were replaced.
- A missing column is named together with the columns that were found; an
  empty file or a file with no rows is refused; missing texts become empty
  strings; missing labels are refused (naming the first row).
- Ids come from the id column (``id_col``, default ``id`` when present) or
  are data row numbers from 1; a blank id is refused, naming the
  row; repeated ids are counted in a note (a figure about one names its
  first row).
- Size limits: a file larger than ``max_bytes`` once decompressed is refused;
  ``.gz`` files are inflated as a stream and stopped at that limit, so a small
  file that inflates to gigabytes costs at most ``max_bytes`` of memory. A
  Parquet file whose row groups declare more is refused unread. Messages
  longer than ``max_message_bytes`` (UTF-8) are counted and refused with the
  first row that has one.
"""

from __future__ import annotations

import gzip
import hashlib
import io
import json
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from explain.errors import NbledgerError
from explain.model.input_files import input_file

#: Default of ``--max-data-bytes``: the most a data file may hold once decompressed.
DEFAULT_MAX_DATA_BYTES = 1 << 30
_CHUNK = 1 << 20
_FORMATS = {".csv": "csv", ".jsonl": "jsonl", ".ndjson": "jsonl", ".parquet": "parquet"}


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


def data_format(path: Path) -> tuple[str, bool]:
    """(format, gzipped) from the file name, or a one-line error."""
    suffixes = [s.lower() for s in Path(path).suffixes]
    gzipped = bool(suffixes) and suffixes[-1] == ".gz"
    if gzipped:
        suffixes = suffixes[:-1]
    fmt = _FORMATS.get(suffixes[-1] if suffixes else "")
    if fmt is None:
        raise NbledgerError(
            f"{Path(path).name}: unknown data format; use .csv, .jsonl or .parquet (optionally .gz)"
        )
    return fmt, gzipped


def decode_utf8(raw: bytes) -> tuple[str, int]:
    """Decode UTF-8, replacing invalid bytes with U+FFFD; returns (text, replaced).

    ``replaced`` counts the U+FFFD characters the decoding introduced (each
    stands for one maximal run of invalid bytes, as Python's "replace" policy
    does), not those that were validly encoded in the file.
    """
    text = raw.decode("utf-8", errors="replace")
    replaced = text.count("\ufffd") - raw.count("\ufffd".encode("utf-8"))
    return text.removeprefix("\ufeff"), replaced


def _too_large(name: str, limit: int) -> NbledgerError:
    return NbledgerError(
        f"{name} holds more than {limit:,} bytes once decompressed (--max-data-bytes); it was not read whole"
    )


def read_bytes_limited(path: Path, gzipped: bool, limit: int) -> tuple[bytes, str]:
    """(content, SHA-256 of the stored bytes); inflates ``.gz`` as a stream, stopping past ``limit``."""
    if path.stat().st_size > limit:
        raise _too_large(path.name, limit)
    raw = path.read_bytes()
    digest = hashlib.sha256(raw).hexdigest()
    if not gzipped:
        return raw, digest
    parts, total = [], 0
    try:
        with gzip.GzipFile(fileobj=io.BytesIO(raw)) as stream:
            while chunk := stream.read(_CHUNK):
                total += len(chunk)
                if total > limit:
                    raise _too_large(path.name, limit)
                parts.append(chunk)
    except (OSError, EOFError) as exc:
        raise NbledgerError(f"{path.name} is not a valid .gz file: {exc}") from None
    return b"".join(parts), digest


def _read_columns(path, max_bytes: int = DEFAULT_MAX_DATA_BYTES) -> tuple[dict, int, str]:
    """(columns by name, replaced characters, SHA-256 of the file) of a data file."""
    path = Path(path)
    fmt, gzipped = data_format(path)
    path = input_file(path, "data file")
    raw, digest = read_bytes_limited(path, gzipped, max_bytes)
    if not raw.strip():
        raise NbledgerError(f"{path.name} is empty")
    if fmt == "parquet":
        columns, replaced = _parquet_columns(raw, path.name, max_bytes)
    else:
        text, replaced = decode_utf8(raw)
        columns = _csv_columns(text, path.name) if fmt == "csv" else _jsonl_columns(text, path.name)
    return columns, replaced, digest


def read_column(path, column: str, max_bytes: int = DEFAULT_MAX_DATA_BYTES) -> list:
    """The values of one column of a data file, in file order (for slicing)."""
    columns, _, _ = _read_columns(path, max_bytes)
    if column not in columns:
        found = ", ".join(map(str, columns)) or "none"
        raise NbledgerError(f"{Path(path).name} has no column {column!r}; columns found: {found}")
    return columns[column]


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
    columns, replaced, digest = _read_columns(path, max_bytes)
    wanted = [c for c in (text_col, label_col, id_col) if c is not None]
    missing = [c for c in wanted if c not in columns]
    if missing:
        found = ", ".join(map(str, columns)) or "none"
        raise NbledgerError(f"{path.name} has no column {missing[0]!r}; columns found: {found}")
    texts_raw = columns[text_col]
    n = len(texts_raw)
    if n == 0:
        raise NbledgerError(f"{path.name} has a header but no rows")
    texts = ["" if _missing(t) else str(t) for t in texts_raw]
    if max_message_bytes is not None:
        long = [i for i, t in enumerate(texts) if len(t) > max_message_bytes // 4 and _utf8_size(t) > max_message_bytes]
        if long:
            raise NbledgerError(
                f"{path.name}: {len(long):,} {'message is' if len(long) == 1 else 'messages are'} longer than "
                f"{max_message_bytes:,} bytes (--max-bytes), first at data row {long[0] + 1}; raise --max-bytes if "
                f"{'it is' if len(long) == 1 else 'they are'} genuine"
            )
    labels = None
    if label_col is not None:
        values = columns[label_col]
        gaps = [i for i, v in enumerate(values) if _missing(v) or str(v).strip() == ""]
        if gaps:
            raise NbledgerError(
                f"{path.name}: {len(gaps)} rows have no {label_col!r} (first at data row {gaps[0] + 1})"
            )
        labels = np.asarray([str(v).strip() for v in values], dtype=object)
    if id_col is None and "id" in columns:
        id_col = "id"
    ids = _ids(columns[id_col], id_col, path.name) if id_col is not None else np.asarray(
        [str(i + 1) for i in range(n)], dtype=object
    )
    notes = () if id_col is None else _repeated_ids(ids, id_col)
    return Messages(texts, labels, ids, replaced, path, digest, notes=notes, id_col=id_col)


def _ids(values, id_col: str, name: str) -> np.ndarray:
    """The id column as strings; a missing id is refused, naming its data row."""
    ids = np.asarray(["" if _missing(v) else str(v).strip() for v in values], dtype=object)
    empty = np.flatnonzero(ids == "")
    if len(empty):
        rows = "1 row has" if len(empty) == 1 else f"{len(empty):,} rows have"
        raise NbledgerError(f"{name}: {rows} no {id_col!r} (first at data row {empty[0] + 1})")
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


def _utf8_size(text: str) -> int:
    return len(text.encode("utf-8", errors="surrogatepass"))


def _missing(value) -> bool:
    return value is None or (isinstance(value, float) and np.isnan(value))


def _csv_columns(text: str, name: str) -> dict:
    import pandas as pd

    try:
        frame = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False, na_values=[])
    except (pd.errors.ParserError, pd.errors.EmptyDataError, ValueError) as exc:
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        # pandas counts records from the header ("line 4" is data row 3), not physical lines.
        ragged = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", first)
        if ragged:
            expected, record, saw = map(int, ragged.groups())
            first = f"data row {record - 1} has {saw} fields, the header has {expected}"
        raise NbledgerError(f"{name} is not valid CSV: {first}") from None
    return {str(c): frame[c].tolist() for c in frame.columns}


#: Deepest nesting of arrays and objects accepted in a JSON Lines row.
MAX_JSON_DEPTH = 64


def parse_json_row(text: str):
    """One JSON Lines row; deep nesting and over-long numbers are ValueErrors naming the limit."""
    depth = deepest = 0
    if text.count("[") + text.count("{") > MAX_JSON_DEPTH:  # only then is the nesting worth measuring
        in_string = escaped = False
        for ch in text:
            if in_string:
                if escaped:
                    escaped = False
                elif ch == "\\":
                    escaped = True
                elif ch == '"':
                    in_string = False
            elif ch == '"':
                in_string = True
            elif ch in "[{":
                depth += 1
                deepest = max(deepest, depth)
                if deepest > MAX_JSON_DEPTH:
                    raise ValueError(f"nested deeper than {MAX_JSON_DEPTH} levels")
            elif ch in "]}":
                depth -= 1
    try:
        return json.loads(text)
    except json.JSONDecodeError:
        raise
    except RecursionError:
        raise ValueError(f"nested deeper than {MAX_JSON_DEPTH} levels") from None
    except ValueError as exc:  # Python's limit on converting long digit strings (int_max_str_digits)
        raise ValueError(f"holds a number too long to read ({str(exc).split('(')[0].strip()})") from None


def _jsonl_columns(text: str, name: str) -> dict:
    rows = []
    for number, line in enumerate(text.splitlines(), start=1):
        if not line.strip():
            continue
        try:
            row = parse_json_row(line)
        except json.JSONDecodeError as exc:
            raise NbledgerError(f"{name} line {number} is not valid JSON: {exc.msg}") from None
        except ValueError as exc:
            raise NbledgerError(f"{name} line {number} {exc}") from None
        if not isinstance(row, dict):
            raise NbledgerError(f"{name} line {number} is not a JSON object")
        rows.append(row)
    keys: dict = {}
    for row in rows:
        keys.update(dict.fromkeys(row))
    return {k: [row.get(k) for row in rows] for k in keys}


def _parquet_columns(raw: bytes, name: str, limit: int) -> tuple[dict, int]:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        meta = pq.ParquetFile(pa.BufferReader(raw)).metadata
        declared = sum(meta.row_group(i).total_byte_size for i in range(meta.num_row_groups))
        if declared > limit:
            raise _too_large(name, limit)
        table = pq.read_table(pa.BufferReader(raw))
    except (pa.ArrowException, OSError, ValueError) as exc:
        raise NbledgerError(f"{name} is not a valid Parquet file: {str(exc).splitlines()[0]}") from None
    columns, replaced = {}, 0
    for column_name in table.column_names:
        values = table.column(column_name).to_pylist()
        decoded = []
        for v in values:
            if isinstance(v, bytes):
                v, bad = decode_utf8(v)
                replaced += bad
            decoded.append(v)
        columns[str(column_name)] = decoded
    return columns, replaced
