"""The one parser of data tables: CSV, JSON Lines and Parquet files (each optionally ``.gz``), read as a stream.

Both readers of data sets use it: :mod:`explain.model.data_stream` (the batch
ledger, chunk by chunk) and :mod:`explain.model.data_io` (every other command,
which gathers the chunks into one :class:`~explain.model.data_io.Messages`), so
the same fault in a file ends in the same ``error:`` line whichever command
reads it. Data files are untrusted; the policy:

- The format comes from the file name: ``.csv``, ``.jsonl`` (or ``.ndjson``),
  ``.parquet``, each optionally ``.gz``.
- CSV is parsed by pyarrow's streaming reader (quoted line breaks allowed; an
  empty field is an empty text; a row with more or fewer fields than the
  header is malformed). JSON Lines is read line by line; its columns are the
  keys of its first row (a later row without a key has no value there).
  Parquet is read batch by batch (a ``.parquet.gz`` file is first
  decompressed into a temporary file, since Parquet needs random access).
- Text is decoded as UTF-8; bytes that are not valid UTF-8 become U+FFFD and
  are counted (in the columns read).
- A missing column is named with the columns found; an empty file is refused;
  a file that cannot be read to its end (a damaged or truncated ``.gz``, a
  malformed row, a line that is not JSON) ends in one line naming the file and
  the row or line. Error lines never quote message text.
- Reading limits (:class:`ReadingLimits`, set for a run with
  :func:`reading_limits`): every line or row is bounded *before* it is held
  whole: a JSON Lines line is read with a bounded ``readline``, a CSV row must
  fit pyarrow's block, Parquet is read in batches sized from the row group's
  own byte count and a row group whose text column declares more than its rows
  may hold is refused before it is decompressed; a message over ``max_bytes``
  (UTF-8) or a row over ``max_bytes`` plus :data:`ROW_SLACK` ends the read
  naming the file, the row and ``--max-bytes``. ``max_data_bytes`` bounds each
  file's decompressed bytes (``.gz`` is inflated as a stream and stopped
  there). JSON nested deeper than :data:`MAX_JSON_DEPTH` or numbers too long
  for Python (4,300 digits) are one line each too.
"""

from __future__ import annotations

import contextlib
import gzip
import io
import json
import shutil
import tempfile
from dataclasses import dataclass
from pathlib import Path

from explain.errors import NbledgerError

_FORMATS = {".csv": "csv", ".jsonl": "jsonl", ".ndjson": "jsonl", ".parquet": "parquet"}
#: pyarrow's CSV reader needs a whole row inside one block: this is the largest row it can read.
CSV_BLOCK_BYTES = 16 << 20
#: Bytes a row or line may hold beyond its message (the id and other fields, JSON quoting).
ROW_SLACK = 64 << 10
#: Bytes of text a Parquet batch is sized to hold (from the row group's own byte count).
PARQUET_BATCH_BYTES = 64 << 20
#: Deepest nesting of arrays and objects accepted in a JSON Lines row.
MAX_JSON_DEPTH = 64


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
    try:  # valid UTF-8, the usual case: nothing to count
        return raw.decode("utf-8").removeprefix("\ufeff"), 0
    except UnicodeDecodeError:
        pass
    text = raw.decode("utf-8", errors="replace")
    replaced = text.count("\ufffd") - raw.count("\ufffd".encode("utf-8"))
    return text.removeprefix("\ufeff"), replaced


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


@dataclass(frozen=True)
class ReadingLimits:
    """Bounds on reading a data set: ``max_bytes`` per message (UTF-8; its row or line may hold
    :data:`ROW_SLACK` more), ``max_data_bytes`` per file once decompressed; None is unbounded."""

    max_bytes: int | None = None
    max_data_bytes: int | None = None

    def row_bound(self) -> int | None:
        return None if self.max_bytes is None else self.max_bytes + ROW_SLACK


_LIMITS = [ReadingLimits()]


@contextlib.contextmanager
def reading_limits(max_bytes: int | None = None, max_data_bytes: int | None = None):
    """Apply these limits to every stream read inside the block (Dask pieces carry them to the workers)."""
    _LIMITS.append(ReadingLimits(max_bytes, max_data_bytes))
    try:
        yield _LIMITS[-1]
    finally:
        _LIMITS.pop()


def current_limits() -> ReadingLimits:
    return _LIMITS[-1]


# --- the one set of errors ----------------------------------------------------------------

def too_large(name: str, limit: int) -> NbledgerError:
    return NbledgerError(f"{name} holds more than {limit:,} bytes once decompressed (--max-data-bytes)")


def too_long(name: str, row: int, limits: ReadingLimits) -> NbledgerError:
    return NbledgerError(
        f"{name}: data row {row:,} holds a message longer than {limits.max_bytes:,} bytes "
        "(--max-bytes); raise --max-bytes to read it"
    )


def row_too_long(name: str, where: str, limits: ReadingLimits) -> NbledgerError:
    """A row or line over the row bound, refused before it is held whole (``where``: "a row", "line 3")."""
    return NbledgerError(
        f"{name}: {where} is longer than {limits.row_bound():,} bytes "
        f"(--max-bytes {limits.max_bytes:,} plus {ROW_SLACK:,} for its other fields); raise --max-bytes to read it"
    )


def missing_column(name: str, wanted, found) -> None:
    """Refuse the first of ``wanted`` not among ``found``, naming the columns found."""
    for column in wanted:
        if column not in found:
            names = ", ".join(map(str, found)) or "none"
            raise NbledgerError(f"{name} has no column {column!r}; columns found: {names}")


def unreadable(name: str, row: int, exc: BaseException) -> NbledgerError:
    """A file that cannot be read past data row ``row`` (a damaged ``.gz``, a line that is not JSON ...)."""
    return NbledgerError(f"{name}: could not read past data row {row:,}: {reason(exc)}")


def reason(exc: BaseException) -> str:
    """The error's gist, cut before any quoted row content."""
    first = (str(exc).splitlines() or [type(exc).__name__])[0]
    return ": ".join(first.split(": ")[:2])[:160] or type(exc).__name__


def check_lengths(name: str, texts: list, first_row: int, limits: ReadingLimits) -> None:
    """Refuse the first text over ``limits.max_bytes`` (UTF-8), naming its data row (``first_row`` rows before it)."""
    bound = limits.max_bytes
    if bound is None:
        return
    for i, text in enumerate(texts):
        if (
            isinstance(text, str) and len(text) > bound // 4
            and (len(text) > bound or len(text.encode("utf-8", "surrogatepass")) > bound)
        ):
            raise too_long(name, first_row + i + 1, limits)


# --- values ---------------------------------------------------------------------------------

def is_missing(value) -> bool:
    """None, or a float NaN (JSON ``NaN``)."""
    return value is None or (isinstance(value, float) and value != value)


def as_texts(values: list) -> tuple[list, int]:
    """A column's values as texts: (str list, missing values, which become "")."""
    if all(type(v) is str for v in values):
        return values, 0
    out, nulls = [], 0
    for v in values:
        if is_missing(v):
            nulls += 1
            v = ""
        elif not isinstance(v, str):
            v = str(v)
        out.append(v)
    return out, nulls


def as_ids(values: list) -> list:
    """A column's values as ids: strings without surrounding blanks ("" for a missing value)."""
    return ["" if is_missing(v) else str(v).strip() for v in values]


def _arrow_values(column) -> tuple[list, int]:
    """An Arrow column as Python values and the invalid UTF-8 sequences replaced (binary becomes str)."""
    import pyarrow as pa

    if pa.types.is_dictionary(column.type):  # rows holding the same text share one string
        words, replaced = _arrow_values(column.dictionary)
        rows = column.indices.to_pylist()
        if replaced:  # counted per row, as for plain columns
            per_word = [decode_utf8(w)[1] if w is not None else 0 for w in column.dictionary.to_pylist()]
            replaced = sum(per_word[i] for i in rows if i is not None)
        return [None if i is None else words[i] for i in rows], replaced
    if not (pa.types.is_binary(column.type) or pa.types.is_large_binary(column.type)):
        return column.to_pylist(), 0
    try:  # valid UTF-8 (the usual case) converts in one step
        return column.cast(pa.large_string()).to_pylist(), 0
    except pa.ArrowInvalid:
        pass
    out, replaced = [], 0
    for v in column.to_pylist():
        if v is not None:
            v, bad = decode_utf8(v)
            replaced += bad
        out.append(v)
    return out, replaced


def _arrow_batch(batch, columns) -> tuple[dict, int]:
    values, replaced = {}, 0
    for c in columns:
        values[c], bad = _arrow_values(batch.column(c))
        replaced += bad
    return values, replaced


def _wanted(columns, optional, found) -> list:
    """``columns`` (each must be in ``found``) and those of ``optional`` found, once each."""
    out = list(dict.fromkeys(columns))
    return out + [c for c in optional if c in found and c not in out]


# --- one file ---------------------------------------------------------------------------------

def table_batches(path, columns, optional=(), chunk_rows: int = 20_000, limits: ReadingLimits | None = None,
                  text_col: str | None = None):
    """Yield ``(values, replaced, share)`` for one table file, in file order.

    ``values`` maps each of ``columns`` (all must exist) and of ``optional``
    (when the file has them) to a list of Python values of consecutive rows;
    ``replaced`` counts the invalid UTF-8 sequences in them; ``share`` is the
    part of the file read so far (0 to 1). ``text_col``, when given, is the
    message column that ``limits.max_bytes`` bounds. See the module policy.
    """
    limits = limits or current_limits()
    path = Path(path)
    fmt, gzipped = data_format(path)
    if _blank(path, gzipped):
        raise NbledgerError(f"{path.name} is empty")
    if not gzipped and limits.max_data_bytes is not None and path.stat().st_size > limits.max_data_bytes:
        raise too_large(path.name, limits.max_data_bytes)
    reader = {"csv": _csv_batches, "jsonl": _jsonl_batches, "parquet": _parquet_batches}[fmt]
    row = 0
    try:
        for values, replaced, share in reader(path, gzipped, list(columns), tuple(optional), chunk_rows, limits, text_col):
            if text_col is not None:
                check_lengths(path.name, values[text_col], row, limits)
            row += len(next(iter(values.values())))
            yield values, replaced, share
    except NbledgerError:
        raise
    except (OSError, EOFError, ValueError, gzip.BadGzipFile) as exc:
        raise unreadable(path.name, row, exc) from None


def _blank(path: Path, gzipped: bool) -> bool:
    """True for a file of no bytes, or of a few blank ones (looked at only in a small file)."""
    size = path.stat().st_size
    if size > 4096:
        return False
    try:
        with (gzip.open if gzipped else open)(path, "rb") as handle:
            return not handle.read(4097).strip()
    except (OSError, EOFError):
        return False  # a damaged .gz: its reader says so


class _Counting:
    """A binary file that remembers how far it has been read (for progress)."""

    def __init__(self, path: Path):
        self.handle = open(path, "rb")
        self.size = max(Path(path).stat().st_size, 1)

    @property
    def share(self) -> float:
        return min(self.handle.tell() / self.size, 1.0)


class _Bounded(io.RawIOBase):
    """A readable stream that fails once more than ``limit`` bytes have come out of ``inner``."""

    def __init__(self, inner, limit: int | None, name: str):
        self._inner, self._limit, self._name, self.read_bytes = inner, limit, name, 0

    def readable(self):
        return True

    def readinto(self, buffer):
        data = self._inner.read(len(buffer))
        self.read_bytes += len(data)
        if self._limit is not None and self.read_bytes > self._limit:
            raise too_large(self._name, self._limit)
        buffer[: len(data)] = data
        return len(data)


def _csv_reader(path: Path, gzipped: bool, include, limits: ReadingLimits, on_bad_row, block=None):
    """(counting file, pyarrow streaming CSV reader) of the ``include`` columns as binary (all: ``[]``)."""
    import pyarrow as pa
    import pyarrow.csv as pcsv

    raw = _Counting(path)
    if gzipped or limits.max_data_bytes is not None:
        inner = gzip.GzipFile(fileobj=raw.handle) if gzipped else raw.handle
        stream = pa.PythonFile(io.BufferedReader(_Bounded(inner, limits.max_data_bytes, path.name), 1 << 20), mode="r")
    else:
        stream = pa.PythonFile(raw.handle, mode="r")
    # A row must fit in one block: the block is the row bound (--max-bytes plus the row's other fields).
    if block is None:
        block = CSV_BLOCK_BYTES if limits.row_bound() is None else max(1 << 20, limits.row_bound())
    try:
        reader = pcsv.open_csv(
            stream,
            # One thread: the reader then knows the row number of a malformed row.
            read_options=pcsv.ReadOptions(block_size=block, use_threads=False),
            parse_options=pcsv.ParseOptions(newlines_in_values=True, invalid_row_handler=on_bad_row),
            convert_options=pcsv.ConvertOptions(
                include_columns=include,
                column_types={c: pa.binary() for c in include},
                strings_can_be_null=False,
                quoted_strings_can_be_null=False,
            ),
        )
    except BaseException:
        raw.handle.close()
        raise
    return raw, reader


def _csv_header(path: Path, gzipped: bool, limits: ReadingLimits, on_bad_row) -> list:
    """The names in a CSV file's header (read from a small first block, a larger one if its rows need it)."""
    import pyarrow as pa

    for block in (64 << 10, None):
        try:
            raw, reader = _csv_reader(path, gzipped, [], limits, on_bad_row, block)
        except pa.ArrowInvalid as exc:
            if block is None or "straddling" not in str(exc):
                raise
            continue
        raw.handle.close()
        return list(reader.schema.names)
    return []


def _csv_batches(path: Path, gzipped: bool, columns, optional, chunk_rows: int, limits: ReadingLimits, text_col):
    import pyarrow as pa

    bad_rows = []

    def malformed(row):
        bad_rows.append(row)
        return "error"

    def failed(exc):
        row = next((r for r in bad_rows if r.number is not None), None)
        if row is not None:
            return NbledgerError(
                f"{path.name}: data row {row.number - 1:,} has {row.actual_columns} "
                f"field{'' if row.actual_columns == 1 else 's'}, the header has {row.expected_columns}"
            )
        if "Empty CSV file" in str(exc):
            return NbledgerError(f"{path.name} is empty")
        if "straddling" in str(exc) and limits.max_bytes is not None:
            return row_too_long(path.name, "a row", limits)
        if "straddling" in str(exc):
            return NbledgerError(f"{path.name}: a row is longer than {CSV_BLOCK_BYTES:,} bytes, the most a CSV row may hold")
        return ValueError(str(exc))

    try:
        include = list(dict.fromkeys(columns))
        if optional:
            include = _wanted(columns, optional, _csv_header(path, gzipped, limits, malformed))
        try:
            raw, reader = _csv_reader(path, gzipped, include, limits, malformed)
        except pa.ArrowException as exc:
            if "include_columns" not in str(exc):
                raise
            missing_column(path.name, columns, _csv_header(path, gzipped, limits, malformed))
            raise
    except pa.ArrowException as exc:
        raise failed(exc) from None
    with raw.handle:
        while True:
            try:
                batch = reader.read_next_batch()
            except StopIteration:
                return
            except pa.ArrowException as exc:
                raise failed(exc) from None
            values, replaced = _arrow_batch(batch, include)
            yield values, replaced, raw.share


def _bounded_lines(stream, path: Path, limits: ReadingLimits):
    """The lines of a binary stream, each read with a bounded ``readline`` (never held whole past the bound)."""
    bound, total, number = limits.row_bound(), 0, 0
    while True:
        line = stream.readline(-1 if bound is None else bound + 1)
        if not line:
            return
        number += 1
        total += len(line)
        if bound is not None and len(line) > bound:
            raise row_too_long(path.name, f"line {number:,}", limits)
        if limits.max_data_bytes is not None and total > limits.max_data_bytes:
            raise too_large(path.name, limits.max_data_bytes)
        yield number, line


def _json_row(text: str, number: int) -> dict:
    try:
        row = parse_json_row(text)
    except json.JSONDecodeError as exc:
        raise ValueError(f"line {number:,} is not valid JSON: {exc.msg}") from None
    except ValueError as exc:
        raise ValueError(f"line {number:,} {exc}") from None
    if not isinstance(row, dict):
        raise ValueError(f"line {number:,} is not a JSON object")
    return row


def _jsonl_batches(path: Path, gzipped: bool, columns, optional, chunk_rows: int, limits: ReadingLimits, text_col):
    raw = _Counting(path)
    with raw.handle:
        lines = gzip.GzipFile(fileobj=raw.handle) if gzipped else raw.handle
        include, rows, replaced, read = None, [], 0, 0
        for number, line in _bounded_lines(lines, path, limits):
            if not line.strip():
                continue
            text, bad = decode_utf8(line)
            replaced += bad
            try:
                row = _json_row(text, number)
            except ValueError as exc:
                raise unreadable(path.name, read, exc) from None
            read += 1
            if include is None:  # the first row's keys are the file's columns
                missing_column(path.name, columns, list(row))
                include = _wanted(columns, optional, row)
            rows.append(row)
            if len(rows) == chunk_rows:
                yield {c: [r.get(c) for r in rows] for c in include}, replaced, raw.share
                rows, replaced = [], 0
        if include is None:
            raise NbledgerError(f"{path.name} is empty")
        if rows:
            yield {c: [r.get(c) for r in rows] for c in include}, replaced, raw.share


def _parquet_batches(path: Path, gzipped: bool, columns, optional, chunk_rows: int, limits: ReadingLimits, text_col):
    import pyarrow as pa
    import pyarrow.parquet as pq

    with tempfile.TemporaryFile() as spool:
        source = path
        if gzipped:
            with gzip.open(path, "rb") as packed:
                shutil.copyfileobj(_Bounded(packed, limits.max_data_bytes, path.name), spool, 1 << 20)
            if spool.tell() == 0:
                raise NbledgerError(f"{path.name} is empty")
            spool.seek(0)
            source = spool
        try:
            handle = open_parquet(source, [*columns, *optional])
        except (pa.ArrowException, OSError) as exc:
            raise NbledgerError(f"{path.name} is not a valid Parquet file: {reason(exc)}") from None
        total = max(handle.metadata.num_rows, 1)
        done = 0
        for values, replaced in parquet_pieces(path, handle, columns, optional, text_col, chunk_rows, limits=limits):
            done += len(next(iter(values.values())))
            yield values, replaced, done / total


def open_parquet(source, columns):
    """A ``pyarrow.parquet.ParquetFile``; those of ``columns`` stored with a dictionary page are read as dictionaries.

    Read so, each distinct value becomes one Python string that every row holding it shares, and lengths are
    checked on the dictionary: a small file that repeats one long text in many rows is never expanded
    (dictionary encoding: Apache Parquet format specification, "Encodings").
    """
    import pyarrow.parquet as pq

    handle = pq.ParquetFile(source)
    schema, meta = handle.schema_arrow, handle.metadata
    names = list(schema.names)
    try:
        wanted = [
            c for c in dict.fromkeys(columns) if c in names and _is_text(schema.field(c).type)
            and any(meta.row_group(g).column(names.index(c)).has_dictionary_page for g in range(meta.num_row_groups))
        ]
    except (IndexError, AttributeError):  # a nested schema: leaf columns are not the Arrow fields
        return handle
    if not wanted:
        return handle
    if hasattr(source, "seek"):
        source.seek(0)
    return pq.ParquetFile(source, read_dictionary=wanted)


def _is_text(kind) -> bool:
    import pyarrow as pa

    return any(check(kind) for check in (pa.types.is_string, pa.types.is_large_string, pa.types.is_binary,
                                         pa.types.is_large_binary))


def parquet_pieces(path: Path, handle, columns, optional, text_col, chunk_rows, row_groups=None, limits=None):
    """(values, replaced) per batch of an open Parquet file (all or some row groups).

    Each row group is read in batches sized from its own byte count (about
    :data:`PARQUET_BATCH_BYTES` of text each), so that long rows come a few at
    a time and are refused, over ``max_bytes``, before many are held.
    """
    import pyarrow as pa

    limits = limits or current_limits()
    names = handle.schema_arrow.names
    missing_column(path.name, columns, names)
    include = _wanted(columns, optional, names)
    meta = handle.metadata
    groups = range(meta.num_row_groups) if row_groups is None else row_groups
    if limits.max_data_bytes is not None:
        if sum(meta.row_group(g).total_byte_size for g in groups) > limits.max_data_bytes:
            raise too_large(path.name, limits.max_data_bytes)
    try:
        index = None if text_col is None else names.index(text_col)
        done = 0
        for group in groups:
            if index is not None:
                _check_group_size(path, meta.row_group(group), index, group, limits)
            size = _parquet_batch_rows(meta.row_group(group), chunk_rows)
            for batch in handle.iter_batches(batch_size=size, row_groups=[group], columns=include):
                if text_col is not None:
                    _check_arrow_lengths(path, batch.column(text_col), done, limits)
                done += batch.num_rows
                yield _arrow_batch(batch, include)
    except pa.ArrowException as exc:
        raise ValueError(str(exc)) from None


def _check_group_size(path: Path, info, column: int, group: int, limits: ReadingLimits) -> None:
    """Refuse a row group whose text column holds more than its rows times the row bound, unread.

    The column chunk's uncompressed size (Parquet file metadata) is its values
    plus a few bytes per value and page; above ``rows x (max_bytes + ROW_SLACK)``
    at least one value must be longer than ``max_bytes`` (pigeonhole), so the
    group is refused before any page is decompressed: a row group of one 100 MB
    row is never held. Common practice, no source.
    """
    bound = limits.row_bound()
    if bound is None:
        return
    try:
        stored = info.column(column).total_uncompressed_size
    except (IndexError, AttributeError):
        return
    if stored > max(info.num_rows, 1) * bound:
        raise NbledgerError(
            f"{path.name}: row group {group + 1:,} holds {stored:,} bytes of text in {info.num_rows:,} "
            f"row{'' if info.num_rows == 1 else 's'}, so at least one message is longer than {limits.max_bytes:,} "
            "bytes (--max-bytes); raise --max-bytes to read it"
        )


def _parquet_batch_rows(info, chunk_rows: int) -> int:
    """Rows per batch so that a batch holds about :data:`PARQUET_BATCH_BYTES` (the row group's mean row size).

    A row group that repeats one long dictionary entry in many rows is not expanded: such columns are read
    as dictionaries (:func:`open_parquet`), their rows sharing one string.
    """
    per_row = info.total_byte_size / max(info.num_rows, 1)
    return max(1, min(chunk_rows, int(PARQUET_BATCH_BYTES // max(per_row, 1))))


def _check_arrow_lengths(path: Path, column, first_row: int, limits: ReadingLimits) -> None:
    """Refuse a batch holding a value over ``max_bytes`` before it becomes Python strings (``first_row`` rows
    before it), naming the first such row as :func:`check_lengths` does."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if limits.max_bytes is None:
        return
    if pa.types.is_dictionary(column.type):
        words = pc.binary_length(column.dictionary)
        if not pc.any(pc.greater(words, limits.max_bytes)).as_py():
            return
        column = words.take(column.indices)
    elif _is_text(column.type):
        column = pc.binary_length(column)
    else:
        return
    over = pc.greater(column, limits.max_bytes)
    if pc.any(over).as_py():
        raise too_long(path.name, first_row + pc.index(over, True).as_py() + 1, limits)
