"""Reading messages in chunks, for inputs too large to hold at once.

The same formats and UTF-8 policy as :mod:`explain.model.data_io` (CSV, JSON
Lines, Parquet, each optionally ``.gz``), but read as a stream: one or several
files, or a folder holding a Parquet data set, in the order given (a folder's
files in natural name order: ``part.2`` before ``part.10``). Memory is
bounded by the chunk size, not the input.

- CSV is parsed by pyarrow's streaming reader (quoted line breaks allowed;
  an empty field is an empty text). JSON Lines is read line by line.
  Parquet is read batch by batch (a ``.parquet.gz`` file is first
  decompressed into a temporary file, since Parquet needs random access).
- Missing texts (JSON ``null``, Parquet nulls) become empty strings and are
  counted; invalid UTF-8 is replaced by U+FFFD and counted.
- A file that cannot be read to its end (a damaged or truncated ``.gz``, a
  malformed row) ends in one line naming the file and the last data row
  that was read. Error lines never quote message text.
- Reading limits (:class:`ReadingLimits`, set for a run with
  :func:`reading_limits`): every line or row is bounded *before* it is held
  whole: a JSON Lines line is read with a bounded ``readline``, a CSV row must
  fit pyarrow's block, Parquet is read in batches sized from the row group's
  own byte count; a message over ``max_bytes`` (UTF-8) or a row over
  ``max_bytes`` plus :data:`ROW_SLACK` ends the run naming the file, the row and
  ``--max-bytes``. ``max_data_bytes`` bounds each file's decompressed bytes
  (unbounded by default: the ledger's inputs are meant to be large).
  JSON nested deeper than :data:`MAX_JSON_DEPTH` or numbers too long for
  Python (4,300 digits) are one line each too.
"""

from __future__ import annotations

import contextlib
import gzip
import io
import json
import re
import shutil
import tempfile
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Iterator

from explain.errors import NbledgerError
from explain.model.data_io import MAX_JSON_DEPTH, data_format, decode_utf8, parse_json_row

#: pyarrow's CSV reader needs a whole row inside one block: this is the largest row it can read.
CSV_BLOCK_BYTES = 16 << 20
#: Bytes a row or line may hold beyond its message (the id and other fields, JSON quoting).
ROW_SLACK = 64 << 10
#: Bytes of text a Parquet batch is sized to hold (from the row group's own byte count).
PARQUET_BATCH_BYTES = 64 << 20


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


def _too_long(path: Path, row: int, limits: ReadingLimits) -> NbledgerError:
    return NbledgerError(
        f"{path.name}: data row {row:,} holds a message longer than {limits.max_bytes:,} bytes "
        "(--max-bytes); raise --max-bytes to read it"
    )


def _check_lengths(path: Path, texts: list, first_row: int, limits: ReadingLimits) -> None:
    """Refuse the first text over ``limits.max_bytes`` (UTF-8), naming its data row."""
    bound = limits.max_bytes
    if bound is None:
        return
    for i, text in enumerate(texts):
        if len(text) > bound // 4 and (len(text) > bound or len(text.encode("utf-8", "surrogatepass")) > bound):
            raise _too_long(path, first_row + i + 1, limits)


@dataclass(frozen=True, eq=False)
class TextChunk:
    """Consecutive messages of one input file.

    ``texts`` list of str (missing texts as ""); ``ids`` list of str from the
    id column, or None when none was asked for; ``first_row`` the 0-based
    position of the first text in the whole input; ``source`` the file name;
    ``file_row`` the data row of the file the chunk ends at (1-based);
    ``nulls`` missing texts and ``replaced`` invalid UTF-8 sequences in the
    chunk; ``done`` the share of the input's bytes read so far (0 to 1).
    """

    texts: list
    ids: list | None
    first_row: int
    source: str
    file_row: int
    nulls: int
    replaced: int
    done: float


def is_mail(path: Path) -> bool:
    """True for an input of raw e-mail: an mbox file, or a folder of ``.eml`` files (and no Parquet file)."""
    from explain.model.mail_data import is_mbox

    path = Path(path)
    if path.is_dir():
        return not any(_parquet_files(path)) and any(p.is_file() for p in path.rglob("*.eml"))
    return is_mbox(path)


def _parquet_files(folder: Path):
    return (p for p in folder.rglob("*") if p.is_file() and p.name.lower().endswith((".parquet", ".parquet.gz")))


def input_files(paths) -> list[Path]:
    """The files behind ``paths``: files as given, folders expanded to their Parquet files; a folder
    of ``.eml`` files and an mbox file stay one input each (:func:`is_mail`)."""
    files = []
    for path in map(Path, paths):
        if is_mail(path):
            files.append(path)
        elif path.is_dir():
            found = sorted(_parquet_files(path), key=_natural)
            if not found:
                raise NbledgerError(f"the folder {path} holds no .parquet file and no .eml file")
            files.extend(found)
        elif path.is_file():
            data_format(path)
            files.append(path)
        else:
            raise NbledgerError(f"no data file at {path}")
    if not files:
        raise NbledgerError("no data file given")
    return files


def _natural(path: Path):
    return [int(p) if p.isdigit() else p for p in re.split(r"(\d+)", str(path))]


def _size(path: Path) -> int:
    if path.is_dir():
        return max(sum(p.stat().st_size for p in path.rglob("*.eml") if p.is_file()), 1)
    return max(path.stat().st_size, 1)


def _batches(path: Path, text_col: str | None, id_col: str | None, chunk_rows: int, limits, mail):
    """``(texts, ids, nulls, replaced, share)`` batches of one input (a table, an .eml folder or an mbox)."""
    if is_mail(path):
        from explain.model.mail_data import MailInput, mail_chunks

        return ((texts, ids, 0, 0, share) for texts, ids, share in mail_chunks(path, mail or MailInput(), chunk_rows))
    if text_col is None:
        raise NbledgerError(f"{path.name} is a table: give --text-col")
    fmt, gzipped = data_format(path)
    reader = {"csv": _csv_batches, "jsonl": _jsonl_batches, "parquet": _parquet_batches}[fmt]
    return _rechunk(reader(path, gzipped, text_col, id_col, chunk_rows, limits), chunk_rows)


def stream_texts(
    paths, text_col: str | None, id_col: str | None = None, chunk_rows: int = 20_000,
    limits: ReadingLimits | None = None, mail=None,
) -> Iterator[TextChunk]:
    """Yield :class:`TextChunk` of at most ``chunk_rows`` messages, in input order (within ``limits``,
    by default those of :func:`reading_limits`).

    Raw e-mail inputs (:func:`is_mail`) are read as ``mail``
    (:class:`explain.model.mail_data.MailInput`: view, text rules, its own limits) says; tables need ``text_col``.
    """
    limits = limits or current_limits()
    if chunk_rows < 1:
        raise NbledgerError("the chunk size must be at least 1 row")
    files = input_files(paths)
    sizes = [_size(f) for f in files]
    total = float(sum(sizes))
    before, first_row = 0.0, 0
    for path, size in zip(files, sizes):
        file_row = 0
        try:
            table = not is_mail(path)
            for texts, ids, nulls, replaced, share in _batches(path, text_col, id_col, chunk_rows, limits, mail):
                if table:  # an e-mail's size is bounded by its own reading limits (MailInput.limits)
                    _check_lengths(path, texts, file_row, limits)
                file_row += len(texts)
                yield TextChunk(texts, ids, first_row, path.name, file_row, nulls, replaced, (before + share * size) / total)
                first_row += len(texts)
        except NbledgerError:
            raise
        except (OSError, EOFError, ValueError, gzip.BadGzipFile) as exc:
            raise NbledgerError(
                f"{path.name}: could not read past data row {file_row:,}: {_reason(exc)}"
            ) from None
        before += size


def _reason(exc: BaseException) -> str:
    """The error's gist, cut before any quoted row content."""
    first = (str(exc).splitlines() or [type(exc).__name__])[0]
    return ": ".join(first.split(": ")[:2])[:160] or type(exc).__name__


def _rechunk(batches, chunk_rows: int):
    """Regroup (texts, ids, nulls, replaced, share) pieces into chunks of ``chunk_rows``."""
    texts, ids, nulls, replaced, share = [], [], 0, 0, 0.0
    has_ids = None
    for t, i, n, r, s in batches:
        has_ids = i is not None
        pos = 0
        while pos < len(t):
            take = min(chunk_rows - len(texts), len(t) - pos)
            part = t[pos : pos + take]
            texts.extend(part)
            if has_ids:
                ids.extend(i[pos : pos + take])
            # Nulls and replacements are counted per piece; charge them where the piece starts.
            if pos == 0:
                nulls, replaced = nulls + n, replaced + r
            pos += take
            share = s
            if len(texts) == chunk_rows:
                yield texts, (ids if has_ids else None), nulls, replaced, share
                texts, ids, nulls, replaced = [], [], 0, 0
        share = s
    if texts:
        yield texts, (ids if has_ids else None), nulls, replaced, share


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
            raise NbledgerError(
                f"{self._name} holds more than {self._limit:,} bytes once decompressed (--max-data-bytes)"
            )
        buffer[: len(data)] = data
        return len(data)


def _texts(values: list) -> tuple[list, int, int]:
    """Python values of a text column to (str list, nulls, replaced sequences)."""
    nulls = replaced = 0
    out = values
    if any(v is None or not isinstance(v, str) for v in values):
        out = []
        for v in values:
            if v is None or (isinstance(v, float) and v != v):
                nulls += 1
                v = ""
            elif isinstance(v, bytes):
                v, bad = decode_utf8(v)
                replaced += bad
            elif not isinstance(v, str):
                v = str(v)
            out.append(v)
    return out, nulls, replaced


def _arrow_texts(column) -> tuple[list, int, int]:
    """An Arrow text column (string or binary) as (str list, nulls, replaced)."""
    import pyarrow as pa

    if pa.types.is_binary(column.type) or pa.types.is_large_binary(column.type):
        try:  # valid UTF-8 (the usual case) converts in one step
            column = column.cast(pa.large_string())
        except pa.ArrowInvalid:
            pass
    elif not (pa.types.is_string(column.type) or pa.types.is_large_string(column.type)):
        column = column.cast(pa.large_string())
    if column.null_count == 0 and (pa.types.is_string(column.type) or pa.types.is_large_string(column.type)):
        return column.to_pylist(), 0, 0  # every value is a str already: nothing to count or replace
    return _texts(column.to_pylist())


def _csv_batches(path: Path, gzipped: bool, text_col: str, id_col: str | None, chunk_rows: int, limits: ReadingLimits):
    import pyarrow as pa
    import pyarrow.csv as pcsv

    wanted = [c for c in (text_col, id_col) if c is not None]
    bad_rows = []

    def malformed(row):
        bad_rows.append(row)
        return "error"

    def open_reader(include):
        raw = _Counting(path)
        if gzipped or limits.max_data_bytes is not None:
            inner = gzip.GzipFile(fileobj=raw.handle) if gzipped else raw.handle
            stream = pa.PythonFile(io.BufferedReader(_Bounded(inner, limits.max_data_bytes, path.name), 1 << 20), mode="r")
        else:
            stream = pa.PythonFile(raw.handle, mode="r")
        # A row must fit in one block: the block is the row bound (--max-bytes plus the row's other fields).
        block = CSV_BLOCK_BYTES if limits.row_bound() is None else max(1 << 20, limits.row_bound())
        reader = pcsv.open_csv(
            stream,
            # One thread: the reader then knows the row number of a malformed row.
            read_options=pcsv.ReadOptions(block_size=block, use_threads=False),
            parse_options=pcsv.ParseOptions(newlines_in_values=True, invalid_row_handler=malformed),
            convert_options=pcsv.ConvertOptions(
                include_columns=include,
                column_types={c: pa.binary() for c in include},
                strings_can_be_null=False,
                quoted_strings_can_be_null=False,
            ),
        )
        return raw, reader

    def failed(exc):
        row = next((r for r in bad_rows if r.number is not None), None)
        if row is None and "straddling" in str(exc) and limits.max_bytes is not None:
            return NbledgerError(
                f"{path.name} holds a row longer than {limits.row_bound():,} bytes "
                f"(--max-bytes {limits.max_bytes:,} plus {ROW_SLACK:,} for its other fields); raise --max-bytes to read it"
            )
        if row is None:
            return ValueError(str(exc))
        return NbledgerError(
            f"{path.name}: data row {row.number - 1:,} is malformed "
            f"(expected {row.expected_columns} columns, found {row.actual_columns})"
        )

    try:
        raw, reader = open_reader(wanted)
    except pa.ArrowException as exc:
        if "include_columns" not in str(exc):
            raise failed(exc) from None
        _, header = open_reader([])
        _missing_column(path, wanted, header.schema.names)
    while True:
        try:
            batch = reader.read_next_batch()
        except StopIteration:
            return
        except pa.ArrowException as exc:
            raise failed(exc) from None
        texts, nulls, replaced = _arrow_texts(batch.column(text_col))
        ids = _arrow_texts(batch.column(id_col))[0] if id_col else None
        yield texts, ids, nulls, replaced, raw.share


def _missing_column(path: Path, wanted, found) -> None:
    for column in wanted:
        if column not in found:
            names = ", ".join(map(str, found)) or "none"
            raise NbledgerError(f"{path.name} has no column {column!r}; columns found: {names}")


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
            raise NbledgerError(
                f"{path.name}: line {number:,} is longer than {bound:,} bytes "
                f"(--max-bytes {limits.max_bytes:,} plus {ROW_SLACK:,} for its other fields); raise --max-bytes to read it"
            )
        if limits.max_data_bytes is not None and total > limits.max_data_bytes:
            raise NbledgerError(
                f"{path.name} holds more than {limits.max_data_bytes:,} bytes once decompressed (--max-data-bytes)"
            )
        yield number, line


def _jsonl_batches(path: Path, gzipped: bool, text_col: str, id_col: str | None, chunk_rows: int, limits: ReadingLimits):
    raw = _Counting(path)
    lines = gzip.GzipFile(fileobj=raw.handle) if gzipped else raw.handle
    texts, ids, replaced, rows = [], [], 0, 0
    for number, line in _bounded_lines(lines, path, limits):
        if not line.strip():
            continue
        text, bad = decode_utf8(line)
        replaced += bad
        try:
            row = parse_json_row(text)
        except json.JSONDecodeError as exc:
            raise ValueError(f"line {number} is not valid JSON: {exc.msg}") from None
        except ValueError as exc:
            raise ValueError(f"line {number} {exc}") from None
        if not isinstance(row, dict):
            raise ValueError(f"line {number} is not a JSON object")
        rows += 1
        if rows == 1:  # later rows without the text are missing texts, counted
            _missing_column(path, [c for c in (text_col, id_col) if c is not None], list(row))
        texts.append(row.get(text_col))
        if id_col is not None:
            value = row.get(id_col)
            ids.append("" if value is None else str(value))
        if len(texts) == chunk_rows:
            out, nulls, _ = _texts(texts)
            yield out, (ids if id_col else None), nulls, replaced, raw.share
            texts, ids, replaced = [], [], 0
    if texts:
        out, nulls, _ = _texts(texts)
        yield out, (ids if id_col else None), nulls, replaced, raw.share


def _parquet_batches(path: Path, gzipped: bool, text_col: str, id_col: str | None, chunk_rows: int, limits: ReadingLimits):
    import pyarrow as pa
    import pyarrow.parquet as pq

    with tempfile.TemporaryFile() as spool:
        source = path
        if gzipped:
            with gzip.open(path, "rb") as packed:
                shutil.copyfileobj(_Bounded(packed, limits.max_data_bytes, path.name), spool, 1 << 20)
            spool.seek(0)
            source = spool
        try:
            handle = pq.ParquetFile(source)
        except (pa.ArrowException, OSError) as exc:
            raise NbledgerError(f"{path.name} is not a valid Parquet file: {_reason(exc)}") from None
        total = max(handle.metadata.num_rows, 1)
        done = 0
        for texts, ids, nulls, replaced in _parquet_pieces(path, handle, text_col, id_col, chunk_rows, limits=limits):
            done += len(texts)
            yield texts, ids, nulls, replaced, done / total


def _parquet_pieces(path: Path, handle, text_col, id_col, chunk_rows, row_groups=None, limits=None):
    """(texts, ids, nulls, replaced) per batch of an open Parquet file (all or some row groups).

    Each row group is read in batches sized from its own byte count (about
    :data:`PARQUET_BATCH_BYTES` of text each), so that long rows come a few at
    a time and are refused, over ``max_bytes``, before many are held.
    """
    import pyarrow as pa

    limits = limits or current_limits()
    wanted = [c for c in (text_col, id_col) if c is not None]
    _missing_column(path, wanted, handle.schema_arrow.names)
    meta = handle.metadata
    groups = range(meta.num_row_groups) if row_groups is None else row_groups
    if limits.max_data_bytes is not None:
        inflated = sum(meta.row_group(g).total_byte_size for g in groups)
        if inflated > limits.max_data_bytes:
            raise NbledgerError(
                f"{path.name} holds {inflated:,} bytes once decompressed, more than {limits.max_data_bytes:,} (--max-data-bytes)"
            )
    try:
        column = handle.schema_arrow.names.index(text_col)
        for group in groups:
            _check_group_size(path, meta.row_group(group), column, group, limits)
            size = _parquet_batch_rows(meta.row_group(group), column, chunk_rows, limits)
            for batch in handle.iter_batches(batch_size=size, row_groups=[group], columns=wanted):
                _check_arrow_lengths(path, batch.column(text_col), limits)
                texts, nulls, replaced = _arrow_texts(batch.column(text_col))
                ids = [str(v) for v in _arrow_texts(batch.column(id_col))[0]] if id_col else None
                yield texts, ids, nulls, replaced
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


def _parquet_batch_rows(info, column: int, chunk_rows: int, limits: ReadingLimits) -> int:
    """Rows per batch so that a batch holds about :data:`PARQUET_BATCH_BYTES` of text.

    A row's size is the row group's mean, except with a dictionary page, where
    one row may repeat the largest entry: then as much as the column chunk
    holds (at most the row bound, beyond which the first such row is refused).
    """
    per_row = info.total_byte_size / max(info.num_rows, 1)
    try:
        chunk = info.column(column)
        if chunk.has_dictionary_page:
            widest = chunk.total_uncompressed_size
            bound = limits.row_bound()
            per_row = max(per_row, widest if bound is None else min(widest, bound))
    except (IndexError, AttributeError):
        pass
    return max(1, min(chunk_rows, int(PARQUET_BATCH_BYTES // max(per_row, 1))))


def _check_arrow_lengths(path: Path, column, limits: ReadingLimits) -> None:
    """Refuse a batch holding a value over ``max_bytes`` before it becomes Python strings."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if limits.max_bytes is None or not (
        pa.types.is_string(column.type) or pa.types.is_large_string(column.type)
        or pa.types.is_binary(column.type) or pa.types.is_large_binary(column.type)
    ):
        return
    longest = pc.max(pc.binary_length(column)).as_py()
    if longest is not None and longest > limits.max_bytes:
        raise NbledgerError(
            f"{path.name} holds a message of {longest:,} bytes, longer than {limits.max_bytes:,} (--max-bytes); "
            "raise --max-bytes to read it"
        )


@dataclass(frozen=True)
class Piece:
    """A part of the input that one worker reads: a Parquet row group, or a whole file.

    ``rows`` is its number of messages when the file says so (Parquet), else None.
    """

    path: str
    row_group: int | None
    rows: int | None
    limits: ReadingLimits | None = None
    #: raw e-mail inputs: how they are read (:class:`explain.model.mail_data.MailInput`); for a piece
    #: of an .eml folder, ``row_group`` is its first file (in path order) and ``rows`` its number of files
    mail: object = None


#: Files of an .eml folder per Dask piece (a larger folder is read by several workers).
MAIL_PIECE_FILES = 2_000


def _messages_in(path: Path) -> int:
    """Messages of an .eml folder (its files) or an mbox file (its ``From`` separators, as ``mailbox`` counts them)."""
    import mailbox

    from explain.model.mail_data import eml_files

    if path.is_dir():
        return len(eml_files(path))
    box = mailbox.mbox(path, create=False)
    try:
        return len(box)
    finally:
        box.close()


def input_pieces(paths, mail=None) -> list[Piece]:
    """The input split into :class:`Piece` (row groups of plain Parquet files, other files and mail inputs whole)."""
    import pyarrow.parquet as pq

    pieces, limits = [], current_limits()
    for path in input_files(paths):
        if is_mail(path):
            from explain.model.mail_data import MailInput

            mail, n = mail or MailInput(), _messages_in(path)
            if path.is_dir() and n > MAIL_PIECE_FILES:  # a large folder is cut into pieces of files
                starts = range(0, n, MAIL_PIECE_FILES)
                pieces.extend(Piece(str(path), s, min(MAIL_PIECE_FILES, n - s), limits, mail) for s in starts)
            else:
                pieces.append(Piece(str(path), None, n, limits, mail))
            continue
        fmt, gzipped = data_format(path)
        if fmt == "parquet" and not gzipped:
            try:
                meta = pq.ParquetFile(path).metadata
            except Exception as exc:  # pyarrow raises several types for a damaged file
                raise NbledgerError(f"{path.name} is not a valid Parquet file: {_reason(exc)}") from None
            pieces.extend(Piece(str(path), g, meta.row_group(g).num_rows, limits) for g in range(meta.num_row_groups))
        else:
            pieces.append(Piece(str(path), None, None, limits))
    return pieces


def read_piece(piece: Piece, text_col: str, id_col: str | None, chunk_rows: int) -> Iterator[TextChunk]:
    """The chunks of one piece (``first_row`` counts from the piece's start)."""
    if piece.row_group is None:
        yield from stream_texts([piece.path], text_col, id_col, chunk_rows, piece.limits, piece.mail)
        return
    if piece.mail is not None:  # files row_group .. row_group + rows of an .eml folder
        from explain.model.mail_data import mail_chunks

        done, part = 0, (piece.row_group, piece.row_group + piece.rows)
        for texts, ids, share in mail_chunks(Path(piece.path), piece.mail, chunk_rows, part):
            done += len(texts)
            yield TextChunk(texts, ids, done - len(texts), Path(piece.path).name, piece.row_group + done, 0, 0, share)
        return
    import pyarrow.parquet as pq

    path = Path(piece.path)
    done = 0
    try:
        handle = pq.ParquetFile(path)
        pieces = _parquet_pieces(path, handle, text_col, id_col, chunk_rows, [piece.row_group], piece.limits)
        for texts, ids, nulls, replaced in pieces:
            _check_lengths(path, texts, done, piece.limits or current_limits())
            yield TextChunk(texts, ids, done, path.name, done + len(texts), nulls, replaced, (done + len(texts)) / max(piece.rows, 1))
            done += len(texts)
    except NbledgerError:
        raise
    except (OSError, ValueError) as exc:
        raise NbledgerError(f"{path.name}: could not read past data row {done:,}: {_reason(exc)}") from None
