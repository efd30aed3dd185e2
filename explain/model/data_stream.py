"""Reading messages in chunks, for inputs too large to hold at once.

One or several files, or a folder holding a Parquet data set, in the order
given (a folder's files in natural name order: ``part.2`` before
``part.10``); raw e-mail (an mbox file, a folder of ``.eml`` files) is read by
:mod:`explain.model.mail_data`. Memory is bounded by the chunk size, not the
input. Tables (CSV, JSON Lines, Parquet, each optionally ``.gz``) are parsed
by :mod:`explain.model.table_stream`, the one parser that
:mod:`explain.model.data_io` uses too, with its formats, UTF-8 policy, reading
limits (:class:`ReadingLimits`, set for a run with :func:`reading_limits`;
``max_data_bytes`` is unbounded by default here: the ledger's inputs are meant
to be large) and error lines. Missing texts (JSON ``null``, Parquet nulls)
become empty strings and are counted; ids are strings without surrounding
blanks.
"""

from __future__ import annotations

import gzip
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

from explain.errors import NbledgerError
from explain.model.table_stream import (  # noqa: F401 (ReadingLimits, reading_limits: part of this module's interface)
    ReadingLimits, as_ids, as_texts, check_lengths, current_limits, data_format, open_parquet, parquet_pieces,
    reading_limits, reason, table_batches,
)


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
    columns = [text_col] if id_col is None else [text_col, id_col]
    batches = table_batches(path, columns, (), chunk_rows, limits, text_col)
    return _rechunk((_text_piece(values, replaced, text_col, id_col) + (share,) for values, replaced, share in batches), chunk_rows)


def _text_piece(values: dict, replaced: int, text_col: str, id_col: str | None) -> tuple:
    """(texts, ids, nulls, replaced) of a batch of table values."""
    texts, nulls = as_texts(values[text_col])
    return texts, (as_ids(values[id_col]) if id_col is not None else None), nulls, replaced


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
        try:  # a table's rows are bounded by table_batches, an e-mail by its own limits (MailInput.limits)
            for texts, ids, nulls, replaced, share in _batches(path, text_col, id_col, chunk_rows, limits, mail):
                file_row += len(texts)
                yield TextChunk(texts, ids, first_row, path.name, file_row, nulls, replaced, (before + share * size) / total)
                first_row += len(texts)
        except NbledgerError:
            raise
        except (OSError, EOFError, ValueError, gzip.BadGzipFile) as exc:
            raise NbledgerError(
                f"{path.name}: could not read past data row {file_row:,}: {reason(exc)}"
            ) from None
        before += size


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
                raise NbledgerError(f"{path.name} is not a valid Parquet file: {reason(exc)}") from None
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
    path = Path(piece.path)
    done = 0
    try:
        columns = [text_col] if id_col is None else [text_col, id_col]
        handle = open_parquet(path, columns)
        limits = piece.limits or current_limits()
        for values, replaced in parquet_pieces(path, handle, columns, (), text_col, chunk_rows, [piece.row_group], limits):
            check_lengths(path.name, values[text_col], done, limits)
            texts, ids, nulls, replaced = _text_piece(values, replaced, text_col, id_col)
            yield TextChunk(texts, ids, done, path.name, done + len(texts), nulls, replaced, (done + len(texts)) / max(piece.rows, 1))
            done += len(texts)
    except NbledgerError:
        raise
    except (OSError, ValueError) as exc:
        raise NbledgerError(f"{path.name}: could not read past data row {done:,}: {reason(exc)}") from None
