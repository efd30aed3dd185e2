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
"""

from __future__ import annotations

import gzip
import json
import re
import shutil
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

from explain.errors import NbledgerError
from explain.model.data_io import data_format, decode_utf8

#: pyarrow's CSV reader needs a whole row inside one block: this is the largest row it can read.
CSV_BLOCK_BYTES = 16 << 20


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


def input_files(paths) -> list[Path]:
    """The files behind ``paths``: files as given, folders expanded to their Parquet files."""
    files = []
    for path in map(Path, paths):
        if path.is_dir():
            found = sorted(
                (p for p in path.rglob("*") if p.is_file() and p.name.lower().endswith((".parquet", ".parquet.gz"))),
                key=_natural,
            )
            if not found:
                raise NbledgerError(f"the folder {path} holds no .parquet file")
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


def stream_texts(paths, text_col: str, id_col: str | None = None, chunk_rows: int = 20_000) -> Iterator[TextChunk]:
    """Yield :class:`TextChunk` of at most ``chunk_rows`` messages, in input order."""
    if chunk_rows < 1:
        raise NbledgerError("the chunk size must be at least 1 row")
    files = input_files(paths)
    sizes = [max(f.stat().st_size, 1) for f in files]
    total = float(sum(sizes))
    before, first_row = 0.0, 0
    for path, size in zip(files, sizes):
        fmt, gzipped = data_format(path)
        reader = {"csv": _csv_batches, "jsonl": _jsonl_batches, "parquet": _parquet_batches}[fmt]
        file_row = 0
        try:
            for texts, ids, nulls, replaced, share in _rechunk(reader(path, gzipped, text_col, id_col, chunk_rows), chunk_rows):
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


def _csv_batches(path: Path, gzipped: bool, text_col: str, id_col: str | None, chunk_rows: int):
    import pyarrow as pa
    import pyarrow.csv as pcsv

    wanted = [c for c in (text_col, id_col) if c is not None]
    bad_rows = []

    def malformed(row):
        bad_rows.append(row)
        return "error"

    def open_reader(include):
        raw = _Counting(path)
        stream = pa.PythonFile(raw.handle, mode="r")
        if gzipped:
            stream = pa.CompressedInputStream(stream, "gzip")
        reader = pcsv.open_csv(
            stream,
            # One thread: the reader then knows the row number of a malformed row.
            read_options=pcsv.ReadOptions(block_size=CSV_BLOCK_BYTES, use_threads=False),
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


def _jsonl_batches(path: Path, gzipped: bool, text_col: str, id_col: str | None, chunk_rows: int):
    raw = _Counting(path)
    lines = gzip.GzipFile(fileobj=raw.handle) if gzipped else raw.handle
    texts, ids, replaced, rows = [], [], 0, 0
    for number, line in enumerate(lines, start=1):
        if not line.strip():
            continue
        text, bad = decode_utf8(line)
        replaced += bad
        try:
            row = json.loads(text)
        except json.JSONDecodeError as exc:
            raise ValueError(f"line {number} is not valid JSON: {exc.msg}") from None
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


def _parquet_batches(path: Path, gzipped: bool, text_col: str, id_col: str | None, chunk_rows: int):
    import pyarrow as pa
    import pyarrow.parquet as pq

    with tempfile.TemporaryFile() as spool:
        source = path
        if gzipped:
            with gzip.open(path, "rb") as packed:
                shutil.copyfileobj(packed, spool, 1 << 20)
            spool.seek(0)
            source = spool
        try:
            handle = pq.ParquetFile(source)
        except (pa.ArrowException, OSError) as exc:
            raise NbledgerError(f"{path.name} is not a valid Parquet file: {_reason(exc)}") from None
        total = max(handle.metadata.num_rows, 1)
        done = 0
        for texts, ids, nulls, replaced in _parquet_pieces(path, handle, text_col, id_col, chunk_rows):
            done += len(texts)
            yield texts, ids, nulls, replaced, done / total


def _parquet_pieces(path: Path, handle, text_col, id_col, chunk_rows, row_groups=None):
    """(texts, ids, nulls, replaced) per batch of an open Parquet file (all or some row groups)."""
    import pyarrow as pa

    wanted = [c for c in (text_col, id_col) if c is not None]
    _missing_column(path, wanted, handle.schema_arrow.names)
    try:
        for batch in handle.iter_batches(batch_size=chunk_rows, row_groups=row_groups, columns=wanted):
            texts, nulls, replaced = _arrow_texts(batch.column(text_col))
            ids = [str(v) for v in _arrow_texts(batch.column(id_col))[0]] if id_col else None
            yield texts, ids, nulls, replaced
    except pa.ArrowException as exc:
        raise ValueError(str(exc)) from None


@dataclass(frozen=True)
class Piece:
    """A part of the input that one worker reads: a Parquet row group, or a whole file.

    ``rows`` is its number of messages when the file says so (Parquet), else None.
    """

    path: str
    row_group: int | None
    rows: int | None


def input_pieces(paths) -> list[Piece]:
    """The input split into :class:`Piece` (row groups of plain Parquet files, other files whole)."""
    import pyarrow.parquet as pq

    pieces = []
    for path in input_files(paths):
        fmt, gzipped = data_format(path)
        if fmt == "parquet" and not gzipped:
            try:
                meta = pq.ParquetFile(path).metadata
            except Exception as exc:  # pyarrow raises several types for a damaged file
                raise NbledgerError(f"{path.name} is not a valid Parquet file: {_reason(exc)}") from None
            pieces.extend(Piece(str(path), g, meta.row_group(g).num_rows) for g in range(meta.num_row_groups))
        else:
            pieces.append(Piece(str(path), None, None))
    return pieces


def read_piece(piece: Piece, text_col: str, id_col: str | None, chunk_rows: int) -> Iterator[TextChunk]:
    """The chunks of one piece (``first_row`` counts from the piece's start)."""
    if piece.row_group is None:
        yield from stream_texts([piece.path], text_col, id_col, chunk_rows)
        return
    import pyarrow.parquet as pq

    path = Path(piece.path)
    done = 0
    try:
        handle = pq.ParquetFile(path)
        for texts, ids, nulls, replaced in _parquet_pieces(path, handle, text_col, id_col, chunk_rows, [piece.row_group]):
            yield TextChunk(texts, ids, done, path.name, done + len(texts), nulls, replaced, (done + len(texts)) / max(piece.rows, 1))
            done += len(texts)
    except (OSError, ValueError) as exc:
        raise NbledgerError(f"{path.name}: could not read past data row {done:,}: {_reason(exc)}") from None
