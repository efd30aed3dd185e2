"""``nbledger assess``: how well the filter works on labelled messages."""

from __future__ import annotations

import json
from pathlib import Path
from typing import List, Optional

import typer

from explain.cli.common import (
    THRESHOLD, THRESHOLD_LOG_ODDS, app, console, deliver, fail, labelled_or_fail, plain_text, one_threshold,
)
from explain.cli.audit_options import FOLDS_HELP, LABEL_ERRORS_HELP, SLICE_BY_HELP, audit_inputs, check_folds
from explain.cli.option_sets import DataOptions, ModelOptions, with_option_sets
from explain.output_files import OutputSet


def parse_fraction(text: str, what: str) -> float:
    """``0.01`` or ``1%`` -> 0.01; anything outside [0, 1] is refused."""
    raw = text.strip()
    scale = 100.0 if raw.endswith("%") else 1.0
    try:
        value = float(raw.rstrip("%").strip()) / scale
    except ValueError:
        fail(f"{what} must be a fraction (0.01) or a percentage (1%), got {text!r}")
    if not 0.0 <= value <= 1.0:
        fail(f"{what} must be between 0 and 1 (or 0% and 100%), got {text!r}")
    return value


def parse_costs(text: Optional[str]) -> tuple[float, float] | None:
    """``"FP:FN"``, e.g. ``1:20`` (a missed message costs twenty false alarms)."""
    if text is None:
        return None
    parts = text.split(":")
    try:
        if len(parts) != 2:
            raise ValueError
        cost_fp, cost_fn = float(parts[0]), float(parts[1])
    except ValueError:
        fail(f"--costs takes FP:FN, the cost of a false alarm and of a missed message (e.g. 1:20), got {text!r}")
    if not (cost_fp > 0 and cost_fn > 0 and cost_fp < float("inf") and cost_fn < float("inf")):
        fail(f"--costs must be two positive numbers, got {text!r}")
    return cost_fp, cost_fn


def figure_settings(target_fpr, target_recall, costs, base_rate, bins: int, top: int) -> dict:
    """The keywords of :func:`~explain.analysis.assessment.assess` that say how figures are computed, parsed
    from their options before any work (a mistyped value is one error line at once)."""
    from explain.analysis.assessment import DEFAULT_TARGET_FPR, DEFAULT_TARGET_RECALL

    return {
        "target_fpr": tuple(parse_fraction(t, "--target-fpr") for t in target_fpr or ()) or DEFAULT_TARGET_FPR,
        "target_recall": tuple(parse_fraction(t, "--target-recall") for t in target_recall or ()) or DEFAULT_TARGET_RECALL,
        "costs": parse_costs(costs),
        "base_rate": None if base_rate is None else parse_fraction(base_rate, "--base-rate"),
        "n_bins": bins,
        "top": top,
    }


@app.command()
@with_option_sets(opening=ModelOptions, reading=DataOptions)
def assess(
    model: Path = typer.Argument(..., help="Model file (.skops; pickle/joblib only with --allow-pickle)."),
    data: Path = typer.Argument(
        ..., help="Labelled messages: .csv, .jsonl or .parquet (optionally .gz), a folder of .eml files, or an mbox file."
    ),
    text_col: Optional[str] = typer.Option(None, "--text-col", help="Column holding the message text."),
    label_col: Optional[str] = typer.Option(None, "--label-col", help="Column holding the true class."),
    threshold: Optional[float] = THRESHOLD,
    threshold_log_odds: Optional[float] = THRESHOLD_LOG_ODDS,
    base_rate: Optional[str] = typer.Option(
        None, "--base-rate", help="Share of flagged-class messages in real traffic, e.g. 1%: project the figures to it."
    ),
    slice_by: Optional[List[str]] = typer.Option(
        None, "--slice-by", help=SLICE_BY_HELP
    ),
    watchlist: Optional[Path] = typer.Option(
        None, "--watchlist", help="UTF-8 file of terms (one a line, # comments): error rates of messages holding each."
    ),
    label_errors: bool = typer.Option(False, "--label-errors", help=LABEL_ERRORS_HELP),
    folds: int = typer.Option(5, "--folds", help=FOLDS_HELP),
    id_col: Optional[str] = typer.Option(None, "--id-col", help="Column holding the message id (default: id, if present)."),
    target_fpr: Optional[List[str]] = typer.Option(
        None, "--target-fpr", help="False-alarm rate to stay within, e.g. 0.5% (repeatable; default 0.1%, 0.5%, 1%)."
    ),
    target_recall: Optional[List[str]] = typer.Option(
        None, "--target-recall", help="Recall to reach, e.g. 95% (repeatable; default 90%, 95%, 99%)."
    ),
    costs: Optional[str] = typer.Option(
        None, "--costs", help="FP:FN, costs of a false alarm and of a missed message, for the least-cost threshold."
    ),
    output_format: str = typer.Option("text", "--format", help="text | json"),
    images: Optional[Path] = typer.Option(None, "--images", help="Write ROC, PR, reliability and score pictures (PNG) here."),
    out: Optional[Path] = typer.Option(None, "--out", help="Write the output to this file instead of the terminal."),
    top: int = typer.Option(10, "--top", min=0, help="Errors, borderline messages and error drivers to list."),
    bins: int = typer.Option(10, "--bins", min=1, help="Equal-count bins of the reliability diagram."),
    opening: ModelOptions = None,
    reading: DataOptions = None,
):
    """How well does the filter work? Rates with intervals, ranking, thresholds, calibration, slices, errors."""
    from explain.analysis.assessment import assess as run_assessment
    from explain.present.assessment import render, to_json

    if output_format not in ("text", "json"):
        fail(f"--format must be text or json, got {output_format!r}")
    figures = figure_settings(target_fpr, target_recall, costs, base_rate, bins, top)
    one_threshold(threshold, threshold_log_odds)
    check_folds(folds)
    with OutputSet(inputs=[*opening.inputs(model), data, watchlist]) as outputs:
        if out is not None:
            outputs.file(out)
        if images is not None:
            outputs.folder(images)
        loaded = opening.load(model)
        messages = labelled_or_fail(
            reading.read(data, text_col, label_col, mail=reading.mail(loaded.card), id_col=id_col), data
        )
        X = loaded.featurizer.transform(messages.texts)
        terms = None
        if watchlist is not None:
            from explain.analysis.risk import read_watchlist

            terms = read_watchlist(watchlist).terms
        groups, suspected = audit_inputs(loaded, messages, X, data, slice_by=slice_by, terms=terms,
                                         label_errors=label_errors, folds=folds, max_data_bytes=reading.max_data_bytes)
        result = run_assessment(
            loaded.view, X, messages.labels, ids=messages.ids, slices=groups, label_errors=suspected,
            threshold=threshold, threshold_log_odds=threshold_log_odds, **figures,
        )

        pictures = {}
        if images is not None:
            from explain.present.assess_pictures import draw_all

            pictures = draw_all(result)

        if output_format == "json":
            text = json.dumps(to_json(result, loaded, messages), indent=2, allow_nan=False) + "\n"
        else:
            text = plain_text(render, result, 120) if out is not None else None
        deliver(outputs, text=text, out=out, pictures=pictures, images=images, is_json=output_format == "json" and out is None, show=lambda: render(result, console))
