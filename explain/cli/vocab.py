"""``nbledger vocab``: what the filter has learned, ranked by evidence and support, with risk flags."""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path
from typing import Optional

import numpy as np
import typer

from explain.cli.common import app, console, deliver, fail, labelled_or_fail, plain_text
from explain.cli.option_sets import DataOptions, ModelOptions, with_option_sets
from explain.output_files import OutputSet

FORMATS = ("text", "csv", "json")


def read_names(path: Path) -> str:
    """The text of ``--names-from`` (UTF-8, at most 64 MiB), or one error line."""
    from explain.model.input_files import input_file

    path = input_file(path, "names file")
    if path.stat().st_size > 64 * 2**20:
        fail(f"the names file {path} is larger than 64 MiB; give a sample of text")
    try:
        return path.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError:
        fail(f"the names file {path} is not UTF-8 text")


def people_named(messages):
    """Words standing as people's names in the --data messages (flagged ``personal`` too), or none without data."""
    if messages is None:
        return frozenset()
    from explain.analysis.personal_data import personal_words_in

    return personal_words_in(messages.texts)


@app.command()
@with_option_sets(opening=ModelOptions, reading=DataOptions)
def vocab(
    model: Path = typer.Argument(..., help="Model file (.skops; pickle/joblib only with --allow-pickle)."),
    target: Optional[str] = typer.Option(None, "--class", help="The class to measure evidence for."),
    against: Optional[str] = typer.Option(None, "--against", help="A class, or 'rest' for all other classes pooled."),
    by: str = typer.Option("zscore", "--by", help="Ranking: zscore | ratio | mass | chi2 | g2."),
    top: int = typer.Option(20, "--top", help="Tokens to list for and against each class."),
    watchlist: Optional[Path] = typer.Option(
        None, "--watchlist", help="UTF-8 file of terms to report whatever their evidence (one a line, # comments)."
    ),
    data: Optional[Path] = typer.Option(
        None, "--data",
        help="Labelled messages (.csv, .jsonl, .parquet, a folder of .eml files, an mbox): the 2x2 tables then count messages.",
    ),
    text_col: Optional[str] = typer.Option(None, "--text-col", help="Column of --data holding the text."),
    label_col: Optional[str] = typer.Option(None, "--label-col", help="Column of --data holding the class."),
    id_col: Optional[str] = typer.Option(None, "--id-col", help="Column of --data holding message ids (default: 'id' if present)."),
    output_format: str = typer.Option("text", "--format", help="text | csv | json (csv lists every token)."),
    images: Optional[Path] = typer.Option(None, "--images", help="Write word clouds and bar charts (PNG) here."),
    out: Optional[Path] = typer.Option(None, "--out", help="Write the output to this file instead of the terminal."),
    redact: bool = typer.Option(False, "--redact", help="Mask personal-looking tokens in every table and picture."),
    thin_below: float = typer.Option(
        10.0, "--thin-below", help="Strong evidence on fewer training occurrences than this is flagged thin."
    ),
    strong: float = typer.Option(
        4.0, "--strong", help="Odds factor one occurrence must reach to count as strong evidence."
    ),
    names_from: Optional[Path] = typer.Option(
        None, "--names-from", help="Hashed models: a text file whose tokens, hashed like the model's, name the columns."
    ),
    opening: ModelOptions = None,
    reading: DataOptions = None,
):
    """Which words does the filter treat as evidence, how well supported, and which need a reviewer's look?"""
    from explain.analysis.risk import RiskThresholds, read_watchlist
    from explain.analysis.vocab import LENSES, document_counts, review_vocabulary
    from explain.model.featurizer import hashed_column_names
    from explain.model.training import rows_trained_on

    if output_format not in FORMATS:
        fail(f"--format must be text, csv or json, got {output_format!r}")
    if by not in LENSES:
        fail(f"--by must be one of {', '.join(LENSES)}, got {by!r}")
    if top < 1:
        fail(f"--top must be at least 1, got {top}")
    if not strong > 1 or not math.isfinite(strong):
        fail(f"--strong is an odds factor and must be above 1, got {strong}")
    reading.need_data(data)
    with OutputSet(inputs=[*opening.inputs(model), data, watchlist, names_from]) as outputs:
        if out is not None:
            outputs.file(out)
        if images is not None:
            outputs.folder(images)
        thresholds = RiskThresholds(thin_below=thin_below, strong_log_odds=math.log(strong))
        terms = read_watchlist(watchlist) if watchlist is not None else None

        loaded = opening.load(model)
        messages = documents = None
        if data is not None:
            messages = labelled_or_fail(
                reading.read(data, text_col, label_col, mail=reading.mail(loaded.card), id_col=id_col), data
            )
            seen = rows_trained_on(loaded.card, messages)
            rows = np.arange(len(messages)) if seen.trained is None else np.flatnonzero(seen.trained)
            documents = document_counts(
                loaded.view,
                loaded.featurizer.transform([messages.texts[i] for i in rows]),
                messages.labels[rows],
                data.name,
                seen.note,
            )
        view, names_note = loaded.view, None
        if loaded.featurizer.hashed:
            view, names_note = hashed_column_names(
                loaded.featurizer, view, None if names_from is None else read_names(names_from), names_from
            )
        elif names_from is not None:
            fail("--names-from names the columns of a hashed model; this model has a vocabulary")
        review = review_vocabulary(
            view,
            target=target,
            against=against,
            lens=by,
            top=top,
            documents=documents,
            watchlist=terms,
            thresholds=thresholds,
            redact_personal=redact,
            analyzer=lambda text: loaded.featurizer.occurrences(text, with_spans=False).tokens,
            names=people_named(messages),
        )
        review = replace(review, names_note=names_note)

        from explain.present.vocab import render, to_csv, to_json

        pictures = {}
        if images is not None:
            from explain.present.vocab_pictures import draw_all

            pictures = draw_all(review)
        if output_format == "json":
            text = json.dumps(to_json(review, loaded, messages), indent=2, allow_nan=False, ensure_ascii=False) + "\n"
        elif output_format == "csv":
            text = to_csv(review)
        else:
            text = plain_text(render, review, 160) if out is not None else None
        deliver(outputs, text=text, out=out, pictures=pictures, images=images, is_json=output_format == "json" and out is None, show=lambda: render(review, console))
