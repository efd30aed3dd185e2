"""The file formats of the batch ledger and of its flag drivers.

The output format follows the file name: ``.parquet`` (list columns),
``.jsonl`` (lists), ``.csv`` (``token:evidence`` pairs joined by ``;``),
the last two optionally ``.gz``. Columns are described in ``docs/ledger.md``.
The engines that run a whole batch are :mod:`explain.runs.ledger_local` and
:mod:`explain.runs.ledger_dask`.
"""

from __future__ import annotations

import gzip
import json
from pathlib import Path

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
        ("credit_class", pa.string()), ("debit_class", pa.string()),
        ("top_for", tokens), ("top_for_evidence", values),
        ("top_against", tokens), ("top_against_evidence", values),
        ("flip_size", pa.int64()), ("model_sha256", pa.string()),
        ("model_fingerprint", pa.string()), ("text_view", pa.string()),
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
            _names(e.credit[keep], classes),
            _names(e.debit[keep], classes),
            for_names, for_values, against_names, against_values,
            pa.array(flip, mask=flip < 0, type=pa.int64()),
            pa.array(np.full(n, sha256, dtype=object), type=pa.string()),
            pa.array(np.full(n, fingerprint, dtype=object), type=pa.string()),
            pa.array(np.full(n, rows.text_view, dtype=object), type=pa.string()),
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
