"""Writing the ledger of many messages, and its flag drivers, to files.

The output format follows the file name: ``.parquet`` (list columns),
``.jsonl`` (lists), ``.csv`` (``token:evidence`` pairs joined by ``;``),
the last two optionally ``.gz``. Columns are described in ``docs/ledger.md``.

:func:`write_ledger` runs the local engine: it reads the input in chunks
(:mod:`explain.model.data_stream`), computes each chunk's rows
(:mod:`explain.analysis.ledger_rows`) and appends them to a temporary file
beside the target, renamed at the end; an interrupted or failed run leaves
nothing at the target path.
"""

from __future__ import annotations

import contextlib
import gzip
import json
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from explain.errors import NbledgerError
from explain.output_files import atomic_path

LEDGER_FORMATS = {".parquet": "parquet", ".jsonl": "jsonl", ".csv": "csv"}
DRIVER_FORMATS = {".csv": "csv", ".json": "json"}
DRIVERS_SCHEMA = "nbledger.drivers/1"
DRIVER_COLUMNS = (
    "flagged_class", "token", "messages", "share_of_flagged", "total_evidence",
    "mean_evidence", "tipped", "per_occurrence",
)


def output_format(path, formats: dict, what: str) -> tuple[str, bool]:
    """(format, gzipped) from the file name, or a one-line error."""
    suffixes = [s.lower() for s in Path(path).suffixes]
    gzipped = bool(suffixes) and suffixes[-1] == ".gz"
    if gzipped:
        suffixes = suffixes[:-1]
    fmt = formats.get(suffixes[-1] if suffixes else "")
    if fmt is None or (gzipped and fmt == "parquet"):
        names = ", ".join(s for s in formats)
        raise NbledgerError(f"{Path(path).name}: unknown {what} format; use {names} (.csv and .jsonl may end in .gz)")
    return fmt, gzipped


def ledger_schema():
    import pyarrow as pa

    tokens, values = pa.list_(pa.string()), pa.list_(pa.float64())
    return pa.schema([
        ("id", pa.string()), ("decided", pa.string()), ("flagged", pa.bool_()),
        ("predicted", pa.string()), ("runner_up", pa.string()), ("probability", pa.float64()),
        ("flag_probability", pa.float64()), ("log_odds", pa.float64()), ("margin", pa.float64()),
        ("top_for", tokens), ("top_for_evidence", values),
        ("top_against", tokens), ("top_against_evidence", values),
        ("flip_size", pa.int64()), ("model_sha256", pa.string()),
        ("model_fingerprint", pa.string()),
    ])


def _lists(cols: np.ndarray, values: np.ndarray, vocabulary):
    """(n, k) columns (-1 padded) and values as two Arrow list arrays (tokens from ``vocabulary``)."""
    import pyarrow as pa

    keep = cols >= 0
    offsets = pa.array(np.concatenate(([0], np.cumsum(keep.sum(axis=1)))).astype(np.int32))
    return (
        pa.ListArray.from_arrays(offsets, _names(cols[keep], vocabulary)),
        pa.ListArray.from_arrays(offsets, pa.array(values[keep], type=pa.float64())),
    )


def _names(index: np.ndarray, names):
    """Class or token names by index, looked up in Arrow rather than per row in Python."""
    import pyarrow as pa

    return pa.DictionaryArray.from_arrays(pa.array(index.astype(np.int32)), names).cast(pa.string())


def ledger_table(rows, sha256: str, only_flagged: bool = False, fingerprint: str | None = None):
    """A :class:`~explain.analysis.ledger_rows.LedgerRows` as an Arrow table (:func:`ledger_schema`)."""
    import pyarrow as pa

    e = rows.evidence
    keep = rows.flagged if only_flagged else np.ones(len(rows), dtype=bool)
    n = int(keep.sum())
    classes, vocabulary = pa.array(e.classes.astype(str)), pa.array(e.tokens, type=pa.string())
    maybe = lambda a: pa.nulls(n, pa.float64()) if a is None else pa.array(a[keep])  # noqa: E731
    idx = np.arange(len(rows))[keep]
    for_names, for_values = _lists(e.top_for[keep], e.top_for_evidence[keep], vocabulary)
    against_names, against_values = _lists(e.top_against[keep], e.top_against_evidence[keep], vocabulary)
    flip = rows.flip_size[keep]
    return pa.table(
        [
            pa.array(rows.ids[keep], type=pa.string()),
            _names(e.decision[keep], classes),
            pa.nulls(n, pa.bool_()) if rows.flagged is None else pa.array(rows.flagged[keep]),
            _names(e.predicted[keep], classes),
            _names(e.runner_up[keep], classes),
            pa.array(e.probabilities[idx, e.predicted[keep]]),
            maybe(rows.flag_probability),
            pa.array(e.log_odds[keep]),
            maybe(rows.margin),
            for_names, for_values, against_names, against_values,
            pa.array(flip, mask=flip < 0, type=pa.int64()),
            pa.array(np.full(n, sha256, dtype=object), type=pa.string()),
            pa.array(np.full(n, fingerprint, dtype=object), type=pa.string()),
        ],
        schema=ledger_schema(),
    )


def _pairs(names, values) -> list:
    """``token:evidence`` pairs joined by ``;`` (``\\`` and ``;`` in tokens escaped by ``\\``)."""
    out = []
    for toks, vals in zip(names, values):
        out.append(";".join(
            f"{t.replace(chr(92), chr(92) * 2).replace(';', chr(92) + ';')}:{v!r}" for t, v in zip(toks, vals)
        ))
    return out


class LedgerWriter:
    """Appends ledger tables to one file (Parquet, JSON Lines or CSV, see the module note)."""

    def __init__(self, path: Path, fmt: str, gzipped: bool, group_rows: int | None = None):
        import pyarrow.parquet as pq

        self.fmt = fmt
        self._parquet = pq.ParquetWriter(path, ledger_schema()) if fmt == "parquet" else None
        self._text = None if fmt == "parquet" else (gzip.open(path, "wb") if gzipped else open(path, "wb"))
        self._header = True
        # Parquet row groups of ``group_rows`` rows, however the tables come (None: one group per table).
        self._group_rows = group_rows
        self._pending, self._pending_rows = [], 0

    def write(self, table) -> None:
        import pyarrow as pa
        import pyarrow.csv as pcsv

        if self._parquet is not None:
            if self._group_rows is None:
                self._parquet.write_table(table)
                return
            self._pending.append(table)
            self._pending_rows += table.num_rows
            if self._pending_rows >= self._group_rows:
                self._flush()
        elif self.fmt == "jsonl":
            for row in table.to_pylist():
                self._text.write(json.dumps(row, ensure_ascii=False).encode("utf-8") + b"\n")
        else:
            flat = table
            for name in ("top_for", "top_against"):
                pairs = _pairs(table.column(name).to_pylist(), table.column(name + "_evidence").to_pylist())
                flat = flat.set_column(flat.schema.get_field_index(name), name, pa.array(pairs, type=pa.string()))
                flat = flat.drop_columns([name + "_evidence"])
            pcsv.write_csv(flat, self._text, pcsv.WriteOptions(include_header=self._header))
            self._header = False

    def _flush(self) -> None:
        import pyarrow as pa

        if self._pending:
            self._parquet.write_table(pa.concat_tables(self._pending), row_group_size=max(self._pending_rows, 1))
        self._pending, self._pending_rows = [], 0

    def close(self, complete: bool = True) -> None:
        """Write what is pending and close; ``complete=False`` (a run that failed) only closes."""
        if self._parquet is not None:
            if complete:
                self._flush()
            self._parquet.close()
        else:
            self._text.close()


def write_drivers(path: Path, drivers, header: dict) -> None:
    """The flag drivers as CSV (:data:`DRIVER_COLUMNS`) or JSON (schema ``nbledger.drivers/1``)."""
    fmt, gzipped = output_format(path, DRIVER_FORMATS, "flag-driver")
    rows = drivers.rows()
    if fmt == "json":
        doc = {"schema": DRIVERS_SCHEMA, **header, "drivers": rows}
        payload = (json.dumps(doc, indent=2, ensure_ascii=False) + "\n").encode("utf-8")
    else:
        import io
        import csv

        buffer = io.StringIO()
        writer = csv.DictWriter(buffer, fieldnames=DRIVER_COLUMNS, lineterminator="\n")
        writer.writeheader()
        for row in rows:
            writer.writerow({k: (repr(v) if isinstance(v, float) else v) for k, v in row.items()})
        payload = buffer.getvalue().encode("utf-8")
    with atomic_path(path) as tmp:
        tmp.write_bytes(gzip.compress(payload) if gzipped else payload)


@dataclass
class LedgerProgress:
    """How far a run has got (read by progress displays and error messages)."""

    messages: int = 0
    source: str = ""
    file_row: int = 0
    done: float = 0.0
    flagged: dict = field(default_factory=dict)
    empty: int = 0
    nulls: int = 0
    replaced: int = 0
    large: int = 0
    duplicate_ids: int = 0
    seconds: float = 0.0
    flags_known: bool = True

    def add(self, rows, classes, source="", file_row=0, done=0.0, nulls=0, replaced=0) -> None:
        """Count one chunk's rows (:class:`~explain.analysis.ledger_rows.LedgerRows`)."""
        self.messages += len(rows)
        for c, n in zip(classes, rows.flagged_per_class()):
            if n:
                self.flagged[str(c)] = self.flagged.get(str(c), 0) + int(n)
        self.empty += int(rows.empty.sum())
        self.large += rows.large
        self.nulls += nulls
        self.replaced += replaced
        self.source, self.file_row, self.done = source, file_row, done

    def merge(self, other: "LedgerProgress") -> None:
        """Add another part's counts (the Dask engine's partitions)."""
        self.messages += other.messages
        for c, n in other.flagged.items():
            self.flagged[c] = self.flagged.get(c, 0) + n
        for name in ("empty", "nulls", "replaced", "large"):
            setattr(self, name, getattr(self, name) + getattr(other, name))
        self.source, self.file_row = other.source, other.file_row


class IdCounter:
    """Counts duplicate ids in a stream using 8-byte hashes (memory: 8 bytes per message)."""

    def __init__(self):
        self._hashes = []

    def add(self, ids) -> None:
        import pandas as pd

        self.add_hashes(pd.util.hash_array(np.asarray(ids, dtype=object)))

    def add_hashes(self, hashes: np.ndarray) -> None:
        """Add ids already hashed by ``pandas.util.hash_array``."""
        self._hashes.append(hashes)

    def duplicates(self) -> int:
        if not self._hashes:
            return 0
        hashes = np.concatenate(self._hashes)
        return int(len(hashes) - len(np.unique(hashes)))


def row_numbers(first_row: int, n: int) -> np.ndarray:
    """Ids for messages without an id column: their 1-based position in the whole input."""
    return np.arange(first_row + 1, first_row + n + 1).astype(str).astype(object)


def ledger_chunk(model, rule, texts, ids, top_k, only_flagged, drivers, features=None):
    """One chunk: its :class:`LedgerRows`, their Arrow table and flag drivers (or None)."""
    from explain.analysis.ledger_rows import ledger_rows

    rows, found = ledger_rows(model, texts, ids, rule, top_k, drivers=drivers, features=features)
    return rows, ledger_table(rows, model.sha256, only_flagged, getattr(model, "fingerprint", None)), found


def drivers_header(model, rule, progress: LedgerProgress) -> dict:
    """What the flag-driver file says about its run (see ``docs/ledger.md``)."""
    view = model.view
    return {
        "model": {
            "path": None if model.path is None else str(model.path), "sha256": model.sha256,
            "fingerprint": model.fingerprint,
        },
        "classes": [str(c) for c in view.classes],
        "normal_class": str(view.classes[rule.normal_index]),
        "threshold": rule.threshold,
        "margin_scale": "threshold" if rule.threshold is not None else "argmax",
        "messages": progress.messages,
        "flagged": {str(c): progress.flagged.get(str(c), 0) for c in view.classes if str(c) != str(view.classes[rule.normal_index])},
    }


def run_rule(model, threshold, only_flagged, summary):
    """The decision rule of a run and its starting flag drivers (None without ``summary``)."""
    from explain.analysis.drivers import empty_drivers
    from explain.model.decision import DecisionRule

    if summary is not None:
        output_format(summary, DRIVER_FORMATS, "flag-driver")
    rule = DecisionRule.for_view(model.view, threshold)
    if (only_flagged or summary is not None) and rule.normal_index is None:
        raise NbledgerError("flagging needs a normal class: name it with --normal-class")
    return rule, (empty_drivers(model.view, rule) if summary is not None else None)


def write_ledger(
    model, paths, text_col: str, out, *, id_col=None, top_k=5, chunk_rows=20_000,
    only_flagged=False, threshold=None, summary=None,
    on_chunk: Callable[[LedgerProgress], None] | None = None, progress: LedgerProgress | None = None,
    helper: bool = True,
) -> LedgerProgress:
    """Write the ledger of every message in ``paths`` to ``out`` (and flag drivers to ``summary``).

    Returns the run's totals; ``progress`` (updated after each chunk) and
    ``on_chunk`` let a caller show how far it has got, also after an error.
    ``helper`` lets a second process read and tokenise the next chunk while
    this one computes (:mod:`explain.model.feature_worker`); the rows are the
    same either way.
    """
    from explain.model.data_stream import stream_texts
    from explain.model.feature_worker import featured

    fmt, gzipped = output_format(out, LEDGER_FORMATS, "ledger")
    rule, drivers = run_rule(model, threshold, only_flagged, summary)
    progress = progress if progress is not None else LedgerProgress()
    progress.flags_known = rule.normal_index is not None
    ids_seen = IdCounter() if id_col is not None else None
    start = time.perf_counter()
    with atomic_path(out) as tmp:
        writer = LedgerWriter(tmp, fmt, gzipped, group_rows=chunk_rows)
        chunks = featured(lambda rows: stream_texts(paths, text_col, id_col, rows), model.featurizer, chunk_rows, helper)
        with contextlib.closing(writer), contextlib.closing(chunks):
            for chunk, features in chunks:
                ids = chunk.ids if chunk.ids is not None else row_numbers(chunk.first_row, len(chunk.texts))
                rows, table, found = ledger_chunk(
                    model, rule, chunk.texts, ids, top_k, only_flagged, summary is not None, features
                )
                writer.write(table)
                if found is not None:
                    drivers = drivers.plus(found)
                if ids_seen is not None:
                    ids_seen.add(ids)
                progress.add(rows, model.view.classes, chunk.source, chunk.file_row, chunk.done, chunk.nulls, chunk.replaced)
                progress.seconds = time.perf_counter() - start
                if on_chunk is not None:
                    on_chunk(progress)
        finish_run(model, rule, progress, ids_seen, drivers, summary)
    progress.seconds = time.perf_counter() - start
    return progress


def finish_run(model, rule, progress: LedgerProgress, ids_seen, drivers, summary) -> None:
    """The end of a run, either engine: refuse an empty input, count repeated ids, write the flag drivers."""
    if progress.messages == 0:
        raise NbledgerError("the input holds no messages")
    if ids_seen is not None:
        progress.duplicate_ids = ids_seen.duplicates()
    if summary is not None:
        write_drivers(Path(summary), drivers, drivers_header(model, rule, progress))
