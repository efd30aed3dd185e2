"""The ledger on a Dask cluster: the same rows as the local engine, computed by workers.

The ledger is a Dask DataFrame (``dask.dataframe.from_map``) with one
partition per piece of :func:`explain.model.data_stream.input_pieces` (a
Parquet row group, or a whole CSV / JSON Lines file). Each partition is one
task that reads its piece with the local engine's reader (same UTF-8 and
missing-text policy) and explains it in chunks with
:func:`explain.runs.ledger_local.ledger_chunk`; the partition holds that
part's result in one row. The
model is scattered to every worker once (``Client.scatter(broadcast=True)``)
and handed to the tasks as a future.

Output: a ledger file (``.parquet``, ``.jsonl``, ``.csv``) is written by the
client from the partitions' tables in input order; any other ``--out`` is a
folder holding a Parquet data set, one ``part.NNNNN.parquet`` per partition,
written by the workers (so they must see the same file system). Either way
the output appears whole at the end or not at all.

Workers come from a local cluster of processes (``workers``) or an existing
scheduler (``scheduler``), such as one started by dask-kubernetes, dask-yarn
or dask-jobqueue.
"""

from __future__ import annotations

import contextlib
import logging
import time
from pathlib import Path

import numpy as np

from explain.errors import NbledgerError
from explain.output_files import atomic_folder, atomic_path
from explain.present.ledger_files import LEDGER_FORMATS, LedgerWriter, output_format
from explain.runs.ledger_local import IdCounter, LedgerProgress, finish_run, ledger_chunk, row_numbers, run_rule

_FRAME_COLUMNS = ("id", "text", "missing", "replaced")


def _piece_frame(piece, text_col, id_col, chunk_rows):
    """One partition: a pandas DataFrame of the piece's messages (columns :data:`_FRAME_COLUMNS`)."""
    import pandas as pd

    from explain.model.data_stream import read_piece

    ids, texts, missing, replaced = [], [], [], []
    for chunk in read_piece(piece, text_col, id_col, chunk_rows):
        texts.extend(chunk.texts)
        ids.extend(chunk.ids if chunk.ids is not None else [None] * len(chunk.texts))
        # Counts are per chunk; keep them on the chunk's first row so that sums stay right.
        missing.extend([chunk.nulls] + [0] * (len(chunk.texts) - 1))
        replaced.extend([chunk.replaced] + [0] * (len(chunk.texts) - 1))
    return pd.DataFrame(
        {"id": pd.Series(ids, dtype=object), "text": pd.Series(texts, dtype=object),
         "missing": np.asarray(missing, dtype=np.int64), "replaced": np.asarray(replaced, dtype=np.int64)}
    )


def _explain_partition(frame, first_row, model, rule, top_k, only_flagged, drivers, chunk_rows, part_path, id_col):
    """Ledger of one partition, chunk by chunk.

    Returns ``(table or None, LedgerProgress, FlagDrivers or None, id hashes or None)``;
    the table is None when the partition was written to ``part_path``.
    """
    import pandas as pd
    import pyarrow as pa

    progress = LedgerProgress()
    tables, found_all = [], None
    writer = LedgerWriter(Path(part_path), "parquet", False) if part_path is not None else None
    texts, ids = frame["text"].tolist(), frame["id"].tolist()
    with contextlib.ExitStack() as stack:
        if writer is not None:
            stack.callback(writer.close)
        for start in range(0, len(texts), chunk_rows):
            part = texts[start : start + chunk_rows]
            chunk_ids = ids[start : start + chunk_rows] if id_col else row_numbers(first_row + start, len(part))
            rows, table, found = ledger_chunk(model, rule, part, chunk_ids, top_k, only_flagged, drivers)
            if writer is not None:
                writer.write(table)
            else:
                tables.append(table)
            found_all = found if found_all is None else found_all.plus(found)
            sl = slice(start, start + chunk_rows)
            progress.add(rows, model.view.classes, nulls=int(frame["missing"].iloc[sl].sum()), replaced=int(frame["replaced"].iloc[sl].sum()))
    hashes = pd.util.hash_array(np.asarray(ids, dtype=object)) if id_col else None
    table = None if writer is not None else (pa.concat_tables(tables) if tables else None)
    return table, progress, found_all, hashes


def _ledger_piece(piece, first_row, part_path, text_col, id_col, chunk_rows, model, rule, top_k, only_flagged, drivers):
    """One partition of the ledger: read ``piece`` and explain it, in one task.

    Returns a one-row pandas DataFrame whose ``result`` cell holds
    :func:`_explain_partition`'s tuple. Reading and explaining in one task
    keeps the piece's texts on the worker that reads them.
    """
    import pandas as pd

    frame = _piece_frame(piece, text_col, id_col, chunk_rows)
    result = _explain_partition(
        frame, int(first_row), model, rule, top_k, only_flagged, drivers, chunk_rows, part_path, id_col
    )
    cell = pd.Series([None], dtype=object)
    cell.iloc[0] = result
    return pd.DataFrame({"result": cell})


@contextlib.contextmanager
def dask_client(scheduler: str | None, workers: int, connect_timeout: float):
    """A distributed Client on ``scheduler``, or on a local cluster of ``workers`` processes."""
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise NbledgerError("--engine dask needs Dask: install nbledger with the dask extra (pip install 'nbledger[dask]')") from None
    if scheduler is not None:
        try:
            client = Client(scheduler, timeout=connect_timeout, set_as_default=False)
        except (OSError, TimeoutError, ValueError) as exc:
            reason = str(exc).splitlines()[0][:160] if str(exc) else type(exc).__name__
            raise NbledgerError(f"no Dask scheduler answered at {scheduler} within {connect_timeout:g} s ({reason})") from None
        with client:
            yield client
        return
    import dask

    # The cluster is ours. Its workers keep glibc's own memory trimming: Dask's
    # default (MALLOC_TRIM_THRESHOLD_=65536) hands freed pages back at once, so
    # every large temporary array faults in fresh pages, about a third slower here.
    # They need no sampling profiler either (a stack walk every 10 ms).
    # Its scratch space (spilled data, locks) lives in the run's own temporary folder, removed with it.
    from explain.run_folder import run_folder

    scratch = str(run_folder())
    _quiet_resource_tracker()
    earlier = _child_ids()
    with dask.config.set({"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None,
                          "distributed.worker.profile.enabled": False, "temporary-directory": scratch}):
        try:
            cluster = LocalCluster(
                n_workers=workers, threads_per_worker=1, processes=True,
                dashboard_address=":0", silence_logs=logging.CRITICAL, local_directory=scratch,
            )
        except RuntimeError as exc:  # a worker killed while it started ("Nanny failed to start.")
            _end_children(earlier)
            raise NbledgerError(f"the local Dask cluster could not start its workers ({_one_line(exc)})") from None
    try:
        with _quiet_loggers(), cluster, Client(cluster, set_as_default=False) as client:
            yield client
    finally:
        _end_children(earlier)


def _one_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return f"{type(exc).__name__}: {text[0][:200]}" if text else type(exc).__name__


@contextlib.contextmanager
def _lost_workers():
    """A cluster that loses its workers mid-run (killed, out of memory) ends in one line, not an internal problem.

    Dask then cancels the tasks that needed them (``FutureCancelledError``: the model
    scattered to the workers is gone) or gives up on a task whose workers kept dying
    (``KilledWorker``); both say the cluster failed, not nbledger.
    """
    from concurrent.futures import CancelledError

    from distributed.comm.core import CommClosedError
    from distributed.scheduler import KilledWorker

    try:
        yield
    except (CancelledError, KilledWorker, CommClosedError) as exc:
        raise NbledgerError(
            f"the Dask cluster failed during the run ({_one_line(exc)}; most often a worker stopped or out of memory)"
        ) from None


#: Loggers of the cluster's parts in nbledger's own process (the scheduler, the client, their event loop).
_CLUSTER_LOGGERS = ("distributed", "asyncio", "tornado")


@contextlib.contextmanager
def _quiet_loggers():
    """Keep the local cluster's own records off the terminal while it runs and stops.

    An interrupt stops the workers in the middle of their work, and the scheduler's
    event loop then logs what it could not finish (``Task exception was never
    retrieved`` and its traceback); nbledger's one line says what happened.
    """
    saved = {name: logging.getLogger(name).level for name in _CLUSTER_LOGGERS}
    for name in _CLUSTER_LOGGERS:
        logging.getLogger(name).setLevel(logging.CRITICAL + 1)
    try:
        yield
    finally:
        for name, level in saved.items():
            logging.getLogger(name).setLevel(level)


def _child_ids() -> set:
    import multiprocessing

    return {child.pid for child in multiprocessing.active_children()}


def _end_children(earlier: set, grace: float = 5.0) -> None:
    """Stop and reap the worker processes the local cluster left (children not in ``earlier``),
    before the run's folder is removed.

    A worker still starting when an interrupt closes the cluster would otherwise make
    its scratch folder after the run's temporary folder was removed, and outlive the run.
    """
    import multiprocessing

    children = [child for child in multiprocessing.active_children() if child.pid not in earlier]
    for child in children:
        child.terminate()
    for child in children:
        child.join(grace)
        if child.is_alive():
            child.kill()
            child.join(1.0)


#: The resource tracker's own warnings (leaked semaphores of workers stopped by an interrupt), as a
#: ``-W``/``PYTHONWARNINGS`` filter (Python's warnings documentation: action:message:category:module).
_TRACKER_QUIET = "ignore::UserWarning:multiprocessing.resource_tracker"


def _quiet_resource_tracker() -> None:
    """Start multiprocessing's resource tracker, which the local cluster's processes share, with its warnings off.

    The tracker is a process of its own that writes to the terminal after nbledger
    has ended: when an interrupt stops the workers, it frees the semaphores they
    left and says so in two raw lines below nbledger's one. It inherits the
    environment it is started with, so the filter is set only while it starts.
    """
    import os
    from multiprocessing import resource_tracker

    saved = os.environ.get("PYTHONWARNINGS")
    os.environ["PYTHONWARNINGS"] = _TRACKER_QUIET if not saved else f"{saved},{_TRACKER_QUIET}"
    try:
        resource_tracker.ensure_running()
    finally:
        if saved is None:
            del os.environ["PYTHONWARNINGS"]
        else:
            os.environ["PYTHONWARNINGS"] = saved


def write_ledger_dask(
    model, paths, text_col: str, out, *, scheduler=None, workers=2, connect_timeout=10.0,
    id_col=None, top_k=5, chunk_rows=20_000, only_flagged=False, threshold=None, summary=None,
    on_chunk=None, progress=None, mail=None, threshold_log_odds=None,
) -> LedgerProgress:
    """Like :func:`~explain.runs.ledger_local.write_ledger`, on a Dask cluster (an .eml folder in pieces of
    :data:`~explain.model.data_stream.MAIL_PIECE_FILES` files, an mbox file as one)."""
    from explain.model.data_stream import input_pieces

    out = Path(out)
    single = out.suffix.lower() in LEDGER_FORMATS or out.name.lower().endswith((".csv.gz", ".jsonl.gz"))
    fmt, gzipped = output_format(out, LEDGER_FORMATS, "ledger") if single else ("parquet", False)
    rule, drivers = run_rule(model, threshold, only_flagged, summary, threshold_log_odds)
    pieces = input_pieces(paths, mail)
    progress = progress if progress is not None else LedgerProgress()
    progress.flags_known = rule.normal_index is not None
    start = time.perf_counter()
    with _lost_workers(), dask_client(scheduler, workers, connect_timeout) as client:
        import dask
        import dask.dataframe as dd
        import pandas as pd

        lengths = [p.rows for p in pieces]
        if id_col is None and any(n is None for n in lengths):
            # Row numbers need each partition's offset: count the rows of the texts' frame first.
            meta = pd.DataFrame({c: pd.Series(dtype=object if c in ("id", "text") else np.int64) for c in _FRAME_COLUMNS})
            texts = dd.from_map(_piece_frame, pieces, args=(text_col, id_col, chunk_rows), meta=meta, enforce_metadata=False)
            lengths = list(client.compute(texts.map_partitions(len), sync=True))
        offsets = [int(o) for o in np.concatenate(([0], np.cumsum([n or 0 for n in lengths])))[:-1]]
        shipped = client.scatter(model, broadcast=True)
        target = atomic_path(out) if single else atomic_folder(out)
        # The cells hold Python objects: Dask must not turn the object column into strings.
        with target as tmp, dask.config.set({"dataframe.convert-string": False}):
            part_paths = [None if single else str(tmp / f"part.{i:05d}.parquet") for i in range(len(pieces))]
            ledger = dd.from_map(
                _ledger_piece, pieces, offsets, part_paths,
                args=(text_col, id_col, chunk_rows, shipped, rule, top_k, only_flagged, drivers is not None),
                meta=pd.DataFrame({"result": pd.Series(dtype=object)}), enforce_metadata=False,
            )
            futures = client.compute(ledger.to_delayed())
            ids_seen = IdCounter() if id_col is not None else None
            writer = LedgerWriter(tmp, fmt, gzipped) if single else None
            try:
                for i, future in enumerate(futures):
                    table, part_progress, found, hashes = future.result()["result"].iloc[0]
                    future.release()
                    if writer is not None and table is not None:
                        writer.write(table)
                    if found is not None:
                        drivers = drivers.plus(found)
                    if hashes is not None:
                        ids_seen.add_hashes(hashes)
                    progress.merge(part_progress)
                    progress.source, progress.file_row = Path(pieces[i].path).name, part_progress.messages
                    progress.done = (i + 1) / len(futures)
                    progress.seconds = time.perf_counter() - start
                    if on_chunk is not None:
                        on_chunk(progress)
            except BaseException:
                client.cancel(futures)
                raise
            finally:
                if writer is not None:
                    writer.close()
            finish_run(model, rule, progress, ids_seen, drivers, summary)
    progress.seconds = time.perf_counter() - start
    return progress
