"""``nbledger compare``: what changes when a new filter replaces an old one."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Optional

import typer

from explain.cli.common import (
    NORMAL_CLASS, THRESHOLD, THRESHOLD_LOG_ODDS, app, console, fail, model_inputs, one_threshold, ID_KEY_FILE,
    id_col_option,
)
from explain.cli.option_sets import DataOptions, ModelOptions, left_out, with_option_sets
from explain.present.token_display import for_terminal

SUFFIXES = (".pdf", ".html", ".htm", ".json")


@app.command()
# each filter keeps its own normal class (the comparison applies --normal-class itself); no bare classifiers
@with_option_sets(opening=left_out(ModelOptions, "vectorizer_path", "normal_class"), reading=DataOptions)
def compare(
    old: Path = typer.Argument(..., help="The filter in use (.skops)."),
    new: Path = typer.Argument(..., help="The filter that would replace it (.skops)."),
    data: Optional[Path] = typer.Option(
        None, "--data", help="Messages (.csv, .jsonl, .parquet): adds the decisions that change; with labels, metrics and McNemar's test."
    ),
    text_col: str = typer.Option("text", "--text-col", help="Column holding the message text."),
    label_col: Optional[str] = typer.Option("label", "--label-col", help="Column holding the true class ('' for none)."),
    normal_class: Optional[str] = NORMAL_CLASS,
    threshold: Optional[float] = THRESHOLD,
    threshold_log_odds: Optional[float] = THRESHOLD_LOG_ODDS,
    top: int = typer.Option(10, "--top", help="Tokens listed per change."),
    show: int = typer.Option(20, "--show", help="Changed messages shown with both explanations."),
    redact: str = typer.Option("personal", "--redact", help="personal (mask people: names, addresses, numbers, e-mail, IP, URL) | none"),
    id_col: Optional[str] = id_col_option("--data"),
    id_key_file: Optional[Path] = ID_KEY_FILE,
    output_format: str = typer.Option("text", "--format", help="text | json"),
    out: Optional[Path] = typer.Option(None, "--out", help="Write the comparison to a .pdf, .html or .json file."),
    reviews: Optional[str] = typer.Option(
        None, "--reviews", help="Review desk database (SQLite file or postgresql://): appeals overturned per 10,000, each model."
    ),
    opening: ModelOptions = None,
    reading: DataOptions = None,
):
    """Compare two filters: vocabulary, priors, and with --data the decisions that change and why."""
    from explain.analysis.compare import compare_models, redacted_comparison
    from explain.output_files import OutputSet
    from explain.present import compare as present

    if output_format not in ("text", "json"):
        fail(f"--format must be text or json, got {output_format!r}")
    if redact not in ("personal", "none"):
        fail(f"--redact must be personal or none, got {redact!r}")
    if out is not None and out.suffix.lower() not in SUFFIXES:
        fail(f"--out must end in {', '.join(SUFFIXES)}, got {out.name}")
    if top < 1 or show < 0:
        fail("--top must be at least 1 and --show at least 0")
    one_threshold(threshold, threshold_log_odds)
    from explain.analysis.redaction import IdPseudonyms, read_id_key
    from explain.runs.desk.store import read_reviews

    pseudonyms = IdPseudonyms(read_id_key(id_key_file) if id_key_file is not None else None)
    desk_reviews = None if reviews is None else read_reviews(reviews)  # a missing or locked database: said now
    with OutputSet(inputs=[*model_inputs(old), *model_inputs(new), data, id_key_file]) as files:
        if out is not None:
            files.file(out)
        loaded = [opening.load(path) for path in (old, new)]
        messages = mail = None
        if data is not None:
            from explain.model.email_reader import resolve_text_view

            # Both models must read the same text view: one view for both, or an error.
            views = sorted({resolve_text_view(m.card, reading.text_view) for m in loaded})
            if len(views) > 1:
                fail(f"the two models read different text views ({' and '.join(views)}): their decisions on one "
                     "message would not be about the same text")
            mail = reading.mail(loaded[0].card)
            messages = reading.read(data, text_col, label_col or None, mail=mail, id_col=id_col)
        result = compare_models(*loaded, messages, normal_class=normal_class, threshold=threshold, top=top, show=show,
                                threshold_log_odds=threshold_log_odds, text_view=None if mail is None else mail.view)
        if desk_reviews is not None:
            from dataclasses import replace

            from explain.analysis.appeals import appeals_of

            rows, source = desk_reviews
            result = replace(result, appeals=tuple(appeals_of(rows, m.sha256, source) for m in loaded))
        if redact != "none":
            from explain.analysis.personal_data import personal_words_in

            # names and one-word values found in --data: masked in the added, removed and shifted tokens too
            names = personal_words_in(messages.texts) if messages is not None else {}
            result = redacted_comparison(result, pseudonyms, names)
        suffix = None if out is None else out.suffix.lower()
        if suffix in (".pdf", ".html", ".htm"):
            from explain.analysis.report_contents import report_date
            from explain.present.report_pages import render_pdf

            page = present.render_html(result, present.to_json(result, top=top), redact, top=top)
            files.write(out, render_pdf(page, report_date().isoformat()) if suffix == ".pdf" else page)
        elif suffix == ".json" or output_format == "json":
            text = present.dumps(result, top=top)
            if out is not None:
                files.write(out, text)
            else:
                typer.echo(for_terminal(text, is_json=True) if sys.stdout.isatty() else text, nl=False)
        else:
            for line in present.text_lines(result, top=top, width=max(40, console.width)):
                console.print(line, markup=False, highlight=False, soft_wrap=True)
    if out is not None:
        console.print(f"wrote {out}", markup=False, highlight=False)
