"""The batch ledger's local engine: every message of the input, chunk by chunk, into one file.

:func:`write_ledger` reads the input in chunks (:mod:`explain.model.data_stream`),
computes each chunk's rows (:mod:`explain.analysis.ledger_rows`) and appends
them (:class:`~explain.present.ledger_files.LedgerWriter`) to a temporary file
beside the target, renamed at the end; an interrupted or failed run leaves
nothing at the target path. :mod:`explain.runs.ledger_dask` runs the same
chunks on a Dask cluster and ends through the same :func:`finish_run`.
"""

from __future__ import annotations

import contextlib
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from explain.errors import NbledgerError
from explain.output_files import atomic_path
from explain.present.ledger_files import (
    DRIVER_FORMATS,
    LEDGER_FORMATS,
    LedgerWriter,
    ledger_table,
    output_format,
    write_drivers,
)


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
        "threshold_log_odds": rule.threshold_log_odds,
        "margin_scale": "threshold" if rule.threshold is not None else "argmax",
        "messages": progress.messages,
        "flagged": {str(c): progress.flagged.get(str(c), 0) for c in view.classes if str(c) != str(view.classes[rule.normal_index])},
    }


def run_rule(model, threshold, only_flagged, summary, threshold_log_odds=None):
    """The decision rule of a run and its starting flag drivers (None without ``summary``).

    The threshold is a probability (``threshold``) or exact flag log-odds (``threshold_log_odds``)."""
    from explain.analysis.drivers import empty_drivers
    from explain.model.decision import DecisionRule

    if summary is not None:
        output_format(summary, DRIVER_FORMATS, "flag-driver")
    rule = DecisionRule.for_view(model.view, threshold, threshold_log_odds)
    if (only_flagged or summary is not None) and rule.normal_index is None:
        raise NbledgerError("flagging needs a normal class: name it with --normal-class")
    return rule, (empty_drivers(model.view, rule) if summary is not None else None)


def write_ledger(
    model, paths, text_col: str | None, out, *, id_col=None, top_k=5, chunk_rows=20_000,
    only_flagged=False, threshold=None, summary=None, threshold_log_odds=None,
    on_chunk: Callable[[LedgerProgress], None] | None = None, progress: LedgerProgress | None = None,
    helper: bool = True, mail=None,
) -> LedgerProgress:
    """Write the ledger of every message in ``paths`` to ``out`` (and flag drivers to ``summary``).

    Returns the run's totals; ``progress`` (updated after each chunk) and
    ``on_chunk`` let a caller show how far it has got, also after an error.
    ``helper`` lets a second process read and tokenise the next chunk while
    this one computes (:mod:`explain.model.feature_worker`); the rows are the
    same either way. ``mail`` (:class:`explain.model.mail_data.MailInput`) says how
    .eml folders and mbox files among ``paths`` are read.
    """
    from explain.model.data_stream import stream_texts
    from explain.model.feature_worker import featured

    fmt, gzipped = output_format(out, LEDGER_FORMATS, "ledger")
    rule, drivers = run_rule(model, threshold, only_flagged, summary, threshold_log_odds)
    progress = progress if progress is not None else LedgerProgress()
    progress.flags_known = rule.normal_index is not None
    ids_seen = IdCounter() if id_col is not None else None
    start = time.perf_counter()
    with atomic_path(out) as tmp:
        writer = LedgerWriter(tmp, fmt, gzipped, group_rows=chunk_rows)
        chunks = featured(lambda rows: stream_texts(paths, text_col, id_col, rows, mail=mail), model.featurizer, chunk_rows, helper)
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

