"""``nbledger ledger``: the evidence for every message of a large input, in bounded memory."""

from __future__ import annotations

import contextlib
import signal
import time
from pathlib import Path
from typing import List, Optional

import typer

from explain.cli.common import (
    EXIT_USER_ERROR, THRESHOLD, THRESHOLD_LOG_ODDS, Interrupted, app, console, err_console, one_threshold, parse_size,
    warn,
)
from explain.cli.mail_options import TEXT_VIEW, mail_input
from explain.cli.option_sets import ModelOptions, with_option_sets
from explain.errors import NbledgerError
from explain.output_files import OutputSet

#: Default of the ledger's --max-bytes: its inputs are meant to be large, so a message may be 16 MiB.
LEDGER_MAX_BYTES = 16 << 20

#: Plain progress lines (when standard error is not a terminal) come at most this often.
PLAIN_EVERY_SECONDS = 10.0


@contextlib.contextmanager
def _progress_display():
    """A callback showing progress: a rich bar on a terminal, plain periodic lines otherwise."""
    if err_console.is_terminal:
        from rich.progress import BarColumn, Progress, TaskProgressColumn, TextColumn, TimeRemainingColumn

        bar = Progress(
            TextColumn("ledger"), BarColumn(), TaskProgressColumn(),
            TextColumn("{task.fields[messages]:,} messages, {task.fields[rate]:,.0f}/s"),
            TextColumn("left"), TimeRemainingColumn(),
            console=err_console, transient=True,
        )
        task = bar.add_task("ledger", total=1.0, messages=0, rate=0.0)
        started = []

        def show(p):
            # Started with the first chunk, not before: the bar's refresh thread
            # would keep the run from forking its tokenising helper.
            if not started:
                bar.start()
                started.append(True)
            bar.update(task, completed=p.done, messages=p.messages, rate=p.messages / max(p.seconds, 1e-9))

        try:
            yield show
        finally:
            if started:
                bar.stop()
        return
    last = [time.monotonic()]

    def plain(p):
        now = time.monotonic()
        if now - last[0] >= PLAIN_EVERY_SECONDS:
            last[0] = now
            err_console.print(
                f"ledger: {p.messages:,} messages ({p.messages / max(p.seconds, 1e-9):,.0f}/s), {p.done:.0%} of the input read",
                markup=False,
            )

    yield plain


def _report(p, out: Path, summary: Optional[Path]) -> None:
    if p.nulls:
        warn(f"{p.nulls:,} messages had no text (null); they were explained as empty texts")
    if p.replaced:
        warn(f"{p.replaced:,} invalid UTF-8 byte sequences were replaced by U+FFFD")
    if p.duplicate_ids:
        warn(f"{p.duplicate_ids:,} rows repeat an id that an earlier row has")
    flagged = ", ".join(f"{c} {n:,}" for c, n in p.flagged.items()) or "none"
    if not p.flags_known:
        flagged = "not known (the model has no normal class; name it with --normal-class)"
    parts = [
        f"ledger: {p.messages:,} messages in {p.seconds:.1f} s ({p.messages / max(p.seconds, 1e-9):,.0f}/s)",
        f"flagged: {flagged}",
        f"{p.empty:,} empty texts",
    ]
    if p.large:
        parts.append(f"{p.large:,} texts over 1 MiB (explained)")
    written = str(out) + (f" and {summary}" if summary is not None else "")
    console.print("; ".join(parts) + f"; wrote {written}", markup=False, soft_wrap=True)


@app.command()
@with_option_sets(opening=ModelOptions)
def ledger(
    model: Path = typer.Argument(..., help="Model file (.skops; pickle/joblib only with --allow-pickle)."),
    data: List[Path] = typer.Argument(
        ..., help="CSV, JSON Lines or Parquet files (optionally .gz), a Parquet data set folder, a folder of .eml files, or an mbox file."
    ),
    text_col: Optional[str] = typer.Option(None, "--text-col", help="Column holding the message text (tables)."),
    out: Path = typer.Option(..., "--out", help="Ledger file: .parquet, .jsonl or .csv (.jsonl/.csv may end in .gz); a folder for a Parquet data set with --engine dask."),
    id_col: Optional[str] = typer.Option(None, "--id-col", help="Column holding message ids (default: row numbers from 1)."),
    top: int = typer.Option(5, "--top", min=0, help="Tokens to list for and against per message."),
    chunk_rows: int = typer.Option(20_000, "--chunk-rows", min=1, help="Messages per chunk (memory grows with this, not with the input)."),
    only_flagged: bool = typer.Option(False, "--only-flagged", help="Write rows for flagged messages only."),
    threshold: Optional[float] = THRESHOLD,
    threshold_log_odds: Optional[float] = THRESHOLD_LOG_ODDS,
    summary: Optional[Path] = typer.Option(None, "--summary", help="Also write the flag drivers (.csv or .json)."),
    engine: str = typer.Option("local", "--engine", help="local | dask"),
    scheduler: Optional[str] = typer.Option(None, "--scheduler", help="Address of a running Dask scheduler (tcp://host:port)."),
    workers: Optional[int] = typer.Option(None, "--workers", min=1, help="Worker processes of a local Dask cluster (default 2)."),
    connect_timeout: float = typer.Option(10.0, "--connect-timeout", min=0.1, help="Seconds to wait for a Dask scheduler."),
    max_bytes: int = typer.Option(
        LEDGER_MAX_BYTES, "--max-bytes", min=1,
        help="Refuse a message longer than this (bytes); each row or line is bounded before it is read whole.",
    ),
    max_data_bytes: str = typer.Option(
        "none", "--max-data-bytes", help="Refuse a data file larger than this once decompressed (e.g. 50G; default none).",
    ),
    text_view: Optional[str] = TEXT_VIEW,
    opening: ModelOptions = None,
):
    """Write the evidence for every message of a large input, chunk by chunk."""
    from explain.runs.ledger_local import LedgerProgress, write_ledger

    one_threshold(threshold, threshold_log_odds)
    if engine not in ("local", "dask"):
        raise NbledgerError(f"--engine must be local or dask, got {engine!r}")
    if engine == "local" and (scheduler is not None or workers is not None):
        raise NbledgerError("--scheduler and --workers need --engine dask")
    if scheduler is not None and workers is not None:
        raise NbledgerError("give --scheduler or --workers, not both")
    from explain.model.data_stream import input_files, is_mail

    if text_col is None and not all(is_mail(p) for p in input_files(data)):
        raise NbledgerError("give --text-col, the column of the message text in the tables")
    from explain.present.ledger_files import DRIVER_FORMATS, LEDGER_FORMATS, output_format

    single = engine == "local" or out.suffix.lower() in LEDGER_FORMATS or out.name.lower().endswith((".csv.gz", ".jsonl.gz"))
    # Formats are checked on the names the user gave, before anything is staged or computed.
    if single:
        output_format(out, LEDGER_FORMATS, "ledger")
    if summary is not None:
        output_format(summary, DRIVER_FORMATS, "flag-driver")
    from explain.model.data_stream import reading_limits

    total_bound = None if max_data_bytes.strip().lower() == "none" else parse_size(max_data_bytes, "--max-data-bytes")
    progress = LedgerProgress()
    started = False
    try:
        # The ledger and its flag drivers are one transaction, and neither may replace an input of the run
        # nor each other; the block is entered first, so a refused path leaves no staging folder behind.
        with OutputSet(inputs=[*opening.inputs(model), *data]) as outputs:
            if single:
                outputs.file(out)
            else:
                outputs.dataset(out)  # a Parquet data set folder, put in place whole
            if summary is not None:
                outputs.file(summary)
            loaded = opening.load(model)
            options = dict(
                id_col=id_col, top_k=top, chunk_rows=chunk_rows, only_flagged=only_flagged,
                threshold=threshold, threshold_log_odds=threshold_log_odds, progress=progress, mail=mail_input(loaded.card, text_view),
            )
            started = True
            with _progress_display() as show, reading_limits(max_bytes, total_bound):
                target = outputs.staged(out) if single else outputs.staged_folder(out)
                staged_summary = outputs.staged(summary) if summary is not None else None
                if engine == "dask":
                    from explain.runs.ledger_dask import write_ledger_dask

                    write_ledger_dask(
                        loaded, data, text_col, target, scheduler=scheduler, workers=workers or 2,
                        connect_timeout=connect_timeout, on_chunk=show, summary=staged_summary, **options,
                    )
                else:
                    write_ledger(loaded, data, text_col, target, on_chunk=show, summary=staged_summary, **options)
    except (KeyboardInterrupt, Interrupted) as stop:
        signum = getattr(stop, "signum", signal.SIGINT)
        name = signal.Signals(signum).name
        err_console.print(
            f"error: interrupted by {name} {_how_far(progress)}; nothing was written to {out}", markup=False, soft_wrap=True
        )
        raise typer.Exit(128 + signum) from None
    except NbledgerError as exc:
        if not started:
            raise  # refused before any work: the plain one-line error
        err_console.print(f"error: {exc}; stopped {_how_far(progress)}, nothing was written to {out}", markup=False, soft_wrap=True)
        raise typer.Exit(EXIT_USER_ERROR) from None
    _report(progress, out, summary)


def _how_far(p) -> str:
    if not p.messages:
        return "before the first message was written"
    return f"after {p.messages:,} messages (last read: {p.source} data row {p.file_row:,})"
