"""``nbledger report``: the printable review report (PDF) with its HTML and JSON twins."""

from __future__ import annotations

import contextlib
import hashlib
import os
import sys
from pathlib import Path
from typing import List, Optional

import numpy as np
import typer

from explain.cli.common import (
    THRESHOLD, THRESHOLD_LOG_ODDS, app, console, err_console, fail, ID_KEY_FILE, id_col_option,
)
from explain.cli.audit_options import FOLDS_HELP, LABEL_ERRORS_HELP, SLICE_BY_HELP, audit_inputs, check_folds
from explain.cli.option_sets import DataOptions, ModelOptions, with_option_sets


def check_output(path: Path, option: str, suffixes: tuple[str, ...]) -> Path:
    """Refuse an output path before any work: wrong suffix, missing folder, no write permission."""
    if path.suffix.lower() not in suffixes:
        fail(f"{option} must end in {' or '.join(suffixes)}, got {path.name!r}")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        fail(f"the folder {folder} for {option} does not exist")
    if not os.access(folder, os.W_OK | os.X_OK):
        fail(f"no permission to write in {folder} ({option})")
    if path.is_dir():
        fail(f"{option} {path} is a folder")
    return path


def read_explain(path: Path, text_col: str, reading: DataOptions, card: dict | None, id_col: str | None = None):
    """Messages to explain: a data file (its ``text_col``), or a ``.txt``/``.eml`` file holding one message.

    A raw e-mail is read as ``why`` reads it, in the text view of ``reading``
    (the model card's unless ``--text-view`` says otherwise); the message is
    named by its file name, as ``why --file`` names it. The limits are the command's
    ``--max-data-bytes`` (a data file) and ``--max-bytes`` (each message, as ``why`` bounds one).
    """
    from dataclasses import replace

    from explain.cli.why import read_message, read_one
    from explain.model.data_io import Messages, decode_utf8

    mail = replace(reading, labels_from_folders=False, label=None).mail(card)  # labels describe --data only
    if path.suffix.lower() not in (".txt", ".eml"):
        return reading.read(path, text_col, mail=mail, id_col=id_col)
    raw = read_message(None, path, reading.max_bytes)  # a missing, special or over-long file: one line
    text, replaced = decode_utf8(raw)
    if not text.strip():
        fail(f"{path.name} is empty")
    # In the raw text view (no card recording a mail view) an .eml file is explained as given, too.
    as_email = path.suffix.lower() == ".eml" and mail.view != "raw"
    _, text, _, _ = read_one(raw if as_email else text, as_email, mail.view, mail.rules)
    ids = np.asarray([path.name], dtype=object)
    return Messages([text], None, ids, replaced, path, hashlib.sha256(raw).hexdigest())


@contextlib.contextmanager
def steps(total: int):
    """Say which step the build is on: a rich progress bar on a terminal, plain lines otherwise."""
    if err_console.is_terminal:
        from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

        with Progress(TextColumn("{task.description}"), BarColumn(), TimeElapsedColumn(), console=err_console,
                      transient=True) as progress:
            task = progress.add_task("starting", total=total)
            first = [True]

            def step(name: str) -> None:
                if not first[0]:
                    progress.advance(task)
                first[0] = False
                progress.update(task, description=name)

            yield step
    else:
        yield lambda name: print(f"report: {name}", file=sys.stderr, flush=True)


@app.command()
@with_option_sets(opening=ModelOptions, reading=DataOptions)
def report(
    model: Path = typer.Argument(..., help="Model file (.skops; pickle/joblib only with --allow-pickle)."),
    out: Path = typer.Option(..., "--out", help="The PDF to write."),
    data: Optional[Path] = typer.Option(
        None, "--data", help="Labelled messages (.csv, .jsonl, .parquet): adds performance and errors."
    ),
    text_col: str = typer.Option("text", "--text-col", help="Column holding the message text (--data, --explain)."),
    label_col: str = typer.Option("label", "--label-col", help="Column of --data holding the true class."),
    explain: Optional[Path] = typer.Option(
        None, "--explain", help="Messages to explain: a data file with --text-col, or a .txt/.eml file of one message."
    ),
    threshold: Optional[float] = THRESHOLD,
    threshold_log_odds: Optional[float] = THRESHOLD_LOG_ODDS,
    base_rate: Optional[str] = typer.Option(
        None, "--base-rate", help="Share of flagged-class messages in real traffic, e.g. 1%: the summary adds a projection."
    ),
    costs: Optional[str] = typer.Option(
        None, "--costs", help="FP:FN, costs of a false alarm and of a missed message: the summary names the least-cost point."
    ),
    slice_by: Optional[List[str]] = typer.Option(None, "--slice-by", help=SLICE_BY_HELP + " Needs --data."),
    label_errors: bool = typer.Option(False, "--label-errors", help=LABEL_ERRORS_HELP.replace("DATA", "--data")),
    folds: int = typer.Option(5, "--folds", help=FOLDS_HELP),
    watchlist: Optional[Path] = typer.Option(
        None, "--watchlist", help="UTF-8 file of terms to report whatever their evidence (one a line, # comments)."
    ),
    redact: str = typer.Option(
        "personal", "--redact",
        help="personal (mask people: names, addresses, numbers, e-mail, IP, URL) | bodies (no message text) | none",
    ),
    id_col: Optional[str] = id_col_option("--data / --explain"),
    id_key_file: Optional[Path] = ID_KEY_FILE,
    title: str = typer.Option("Review of a naive Bayes message filter", "--title", help="Title on the cover."),
    organisation: Optional[str] = typer.Option(None, "--organisation", help="Organisation on the cover."),
    paper: str = typer.Option("a4", "--paper", help="a4 | letter"),
    max_messages: int = typer.Option(6, "--max-messages", help="Messages in the explained-messages section."),
    probe_evasion: bool = typer.Option(
        False, "--probe", help="Add the robustness and fairness section: evasion costs over --data (internal circulation)."
    ),
    swap_terms: Optional[Path] = typer.Option(
        None, "--swap-terms", help="Add term swaps to that section: groups of interchangeable terms, one group a line."
    ),
    html: Optional[Path] = typer.Option(None, "--html", help="Also write the HTML twin (one self-contained file)."),
    json_out: Optional[Path] = typer.Option(None, "--json", help="Also write the JSON twin (every figure)."),
    reviews: Optional[str] = typer.Option(
        None, "--reviews", help="Review desk database (SQLite file or postgresql://): adds appeals overturned per 10,000."
    ),
    opening: ModelOptions = None,
    reading: DataOptions = None,
):
    """Write the review report: a PDF for people, with its HTML and JSON twins."""
    from explain.analysis.report_contents import ReportSettings
    from explain.analysis.risk import read_watchlist
    from explain.cli.assess import parse_costs, parse_fraction
    from explain.output_files import OutputSet
    from explain.runs.report_build import build_report_files

    outputs = {out: check_output(out, "--out", (".pdf",))}
    if html is not None:
        outputs[html] = check_output(html, "--html", (".html", ".htm"))
    if json_out is not None:
        outputs[json_out] = check_output(json_out, "--json", (".json",))
    if len({p.resolve() for p in outputs}) < len(outputs):
        fail("--out, --html and --json must be different files")
    from explain.analysis.redaction import read_id_key

    id_key = read_id_key(id_key_file) if id_key_file is not None else None
    settings = ReportSettings(
        id_key=id_key,
        title=title, organisation=organisation, redact=redact, paper=paper, max_messages=max_messages,
        threshold=threshold, threshold_log_odds=threshold_log_odds,
        base_rate=None if base_rate is None else parse_fraction(base_rate, "--base-rate"),
        costs=parse_costs(costs),
    )
    terms = read_watchlist(watchlist) if watchlist is not None else None
    check_folds(folds)
    if (slice_by or label_errors) and data is None:
        fail("--slice-by and --label-errors need labelled data (--data)")

    from explain.runs.desk.store import read_reviews

    desk_reviews = None if reviews is None else read_reviews(reviews)  # a missing or locked database: said now
    probing = probe_evasion or swap_terms is not None
    total = 8 + bool(slice_by or label_errors) + probing
    with OutputSet(inputs=[*opening.inputs(model), data, explain, watchlist, swap_terms, id_key_file]) as files, \
            steps(total) as step:
        for path in outputs:
            files.file(path)  # refused now, before any work, if it is an input, a link or a folder
        step("loading the model")
        loaded = opening.load(model)
        step("reading the data")
        mail = reading.mail(loaded.card)
        messages = reading.read(data, text_col, label_col, mail=mail, id_col=id_col) if data is not None else None
        to_explain = read_explain(explain, text_col, reading, loaded.card, id_col) if explain else None
        groups, suspected = [], None
        # The data are featurized once, for every section of the report.
        features = loaded.featurizer.counts_and_features(messages.texts) if messages is not None else None
        if slice_by or label_errors:
            step("slicing the data" if not label_errors else "refitting on folds to find suspected label errors")
            groups, suspected = audit_inputs(
                loaded, messages, features[1], data, slice_by=slice_by,
                terms=terms.terms if (slice_by and terms is not None) else None, label_errors=label_errors,
                folds=folds, max_data_bytes=reading.max_data_bytes,
            )
        built = build_report_files(loaded, settings=settings, data=messages, explain=to_explain, watchlist=terms,
                                   on_step=step, slices=groups, label_errors=suspected,
                                   probe_evasion=probe_evasion, swap_terms=swap_terms, reviews=desk_reviews,
                                   features=features, text_view=mail.view)
        step("writing the files")
        contents = {out: built.pdf, html: built.html, json_out: built.json}
        # Staged now; all are moved into place together when the block ends without error.
        for path in outputs:
            files.write(path, contents[path])
    for path in outputs:
        console.print(f"wrote {path}", markup=False, highlight=False)
