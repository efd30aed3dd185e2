"""``nbledger probe``: how easily is the filter evaded, and does it treat groups of people alike?"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Optional

import typer

from explain.cli.common import (
    THRESHOLD, THRESHOLD_LOG_ODDS, app, console, deliver, fail, plain_text, one_threshold, ID_KEY_FILE, id_col_option,
)
from explain.cli.option_sets import DataOptions, ModelOptions, with_option_sets
from explain.output_files import OutputSet

FORMATS = ("text", "json")


@app.command()
@with_option_sets(opening=ModelOptions, reading=DataOptions)
def probe(
    model: Path = typer.Argument(..., help="Model file (.skops; pickle/joblib only with --allow-pickle)."),
    data: Optional[Path] = typer.Argument(
        None, help="Messages (.csv, .jsonl, .parquet, .eml folder, mbox); without it, only term evidence."
    ),
    text_col: Optional[str] = typer.Option(None, "--text-col", help="Column of DATA holding the text."),
    label_col: Optional[str] = typer.Option(None, "--label-col", help="Column of DATA holding the class (read, not needed)."),
    id_col: Optional[str] = id_col_option("DATA"),
    id_key_file: Optional[Path] = ID_KEY_FILE,
    threshold: Optional[float] = THRESHOLD,
    threshold_log_odds: Optional[float] = THRESHOLD_LOG_ODDS,
    evasion: bool = typer.Option(False, "--evasion", help="Find the fewest added tokens that let each flagged message through."),
    swap_terms: Optional[Path] = typer.Option(
        None, "--swap-terms", help="Groups of interchangeable terms (one group a line, commas between terms, # comments)."
    ),
    max_added: int = typer.Option(50, "--max-added", help="Search evasions of at most this many added tokens."),
    output_format: str = typer.Option("text", "--format", help="text | json"),
    out: Optional[Path] = typer.Option(None, "--out", help="Write the output to this file instead of the terminal."),
    images: Optional[Path] = typer.Option(None, "--images", help="Write the pictures (PNG) here."),
    opening: ModelOptions = None,
    reading: DataOptions = None,
):
    """How many added words get a flagged message through, and do swapped group terms change decisions?"""
    from explain.analysis.probe import probe as run_probe

    if output_format not in FORMATS:
        fail(f"--format must be text or json, got {output_format!r}")
    if max_added < 1:
        fail(f"--max-added must be at least 1, got {max_added}")
    one_threshold(threshold, threshold_log_odds)
    if not evasion and swap_terms is None:
        fail("nothing to probe: ask for --evasion, --swap-terms FILE or both")
    if evasion and data is None:
        fail("--evasion needs DATA: the messages whose evasion cost is measured")
    if id_col is not None and data is None:
        fail("--id-col names a column of DATA: give DATA")
    from explain.analysis.redaction import IdPseudonyms, read_id_key

    pseudonyms = IdPseudonyms(read_id_key(id_key_file) if id_key_file is not None else None)
    with OutputSet(inputs=[*opening.inputs(model), data, swap_terms, id_key_file]) as outputs:
        if out is not None:
            outputs.file(out)
        if images is not None:
            outputs.folder(images)
        loaded = opening.load(model)
        texts = ids = None
        if data is not None:
            messages = reading.read(data, text_col, label_col, mail=reading.mail(loaded.card), id_col=id_col)
            # ids as team papers show them: as given, a keyed pseudonym when one holds an e-mail address
            texts, ids = messages.texts, [pseudonyms(str(i)) for i in messages.ids]
        result = run_probe(
            loaded, texts, evasion=evasion, swap_terms=swap_terms, max_added=max_added,
            threshold=threshold, threshold_log_odds=threshold_log_odds, ids=ids,
        )

        from explain.present.probe import render, to_json

        pictures = {}
        if images is not None:
            from explain.present.probe_pictures import draw_all

            pictures = draw_all(result)
        if output_format == "json":
            text = json.dumps(to_json(result), indent=2, allow_nan=False, ensure_ascii=False) + "\n"
        else:
            text = plain_text(render, result, 100) if out is not None else None
        deliver(outputs, text=text, out=out, pictures=pictures, images=images, is_json=output_format == "json" and out is None, show=lambda: render(result, console))
