"""``nbledger train``: fit a filter on a labelled file and write it with its model card."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Optional

import typer

from explain.cli.common import NORMAL_CLASS, app, console, fail, labelled_or_fail
from explain.cli.option_sets import DataOptions, with_option_sets
from explain.output_files import OutputSet


@app.command()
@with_option_sets(reading=DataOptions)
def train(
    data: Path = typer.Argument(
        ..., help="Labelled messages: .csv, .jsonl or .parquet (optionally .gz), a folder of .eml files, or an mbox file."
    ),
    text_col: Optional[str] = typer.Option(None, "--text-col", help="Column holding the message text."),
    label_col: Optional[str] = typer.Option(None, "--label-col", help="Column holding the class label."),
    id_col: Optional[str] = typer.Option(
        None, "--id-col", help="Column of message ids, recorded for the hold-out (default: 'id' if present)."
    ),
    out: Path = typer.Option(..., "--out", help="Model file to write (skops format)."),
    features: str = typer.Option("counts", help="counts | binary | tfidf"),
    ngrams: str = typer.Option("1-1", help="Word or character n-gram range MIN-MAX."),
    analyzer: str = typer.Option("word", help="word | char_wb"),
    tokens: str = typer.Option(
        "words", "--tokens",
        help="words | entities (keeps URLs, web and e-mail addresses, amounts with a currency sign and phone numbers whole)",
    ),
    variant: str = typer.Option("multinomial", help="multinomial | complement | bernoulli"),
    alpha: float = typer.Option(1.0, help="Additive smoothing."),
    min_df: float = typer.Option(1, "--min-df", help="Drop tokens in fewer documents (count, or fraction < 1)."),
    normal_class: Optional[str] = NORMAL_CLASS,
    holdout: float = typer.Option(0.0, help="Fraction held out (stratified) to measure accuracy and F1."),
    seed: int = typer.Option(0, help="Seed for the hold-out split."),
    reading: DataOptions = None,
):
    """Train a naive Bayes filter; write MODEL.skops and MODEL.card.json beside it."""
    import skops.io as sio

    from explain.model.model_files import card_path_for, sha256_of
    from explain.model.mail_data import input_kind, is_mail_source
    from explain.model.training import TrainSettings, model_card, parse_ngrams, train_filter

    # Training reads raw e-mail in the body view unless a view is named; the card records it.
    from explain.model.email_reader import DEFAULT_VIEW

    mail = reading.mail(None, default_view=DEFAULT_VIEW)
    from_mail = is_mail_source(data, mail)
    if reading.text_view is not None and not from_mail:
        fail("--text-view applies to raw e-mail: a folder of .eml files, an mbox file, or a table with --raw-email")
    settings = TrainSettings(
        features=features, ngrams=parse_ngrams(ngrams), analyzer=analyzer, variant=variant,
        alpha=alpha, min_df=min_df, normal_class=normal_class, tokens=tokens, holdout=holdout, seed=seed,
        text_view=mail.view if from_mail else None,
        text_rules=mail.rules if from_mail else None,
    )
    card_path = card_path_for(out)
    # Model and card are one transaction: both appear, or neither; and the card
    # records the SHA-256 of the exact bytes that become the model file.
    with OutputSet(inputs=[data]) as outputs:
        outputs.file(out)
        outputs.file(card_path)
        messages = labelled_or_fail(reading.read(data, text_col, label_col, mail=mail, id_col=id_col), data)
        trained = train_filter(messages.texts, messages.labels, settings, ids=messages.ids)
        staged = outputs.staged(out)
        sio.dump(trained.pipeline, staged)
        card = model_card(
            trained,
            model_file=out.name,
            model_sha256=sha256_of(staged),
            data={
                "file": data.name,
                "input": input_kind(data, mail),
                "sha256": messages.sha256,
                "rows": len(messages),
                "text_col": text_col,
                "label_col": label_col,
                "id_col": messages.id_col,
                "replaced_utf8_sequences": messages.replaced_chars,
                # raw e-mail: how many messages each of the reader's text rules changed
                "messages_touched": None if messages.mail is None else messages.mail.touched,
            },
        )
        outputs.write(card_path, json.dumps(card, indent=2, allow_nan=False) + "\n")

    held = f" ({len(messages) - trained.train_rows:,} held out)" if trained.holdout else ""
    per_class = ", ".join(f"{c} {n:,}" for c, n in trained.rows_per_class.items())
    vocab = len(trained.pipeline[0].vocabulary_)
    pattern = f" ({tokens} tokens)" if tokens != "words" else ""
    lines = [
        f"trained {variant} naive Bayes on {trained.train_rows:,} of {len(messages):,} messages{held}",
        f"rows trained on: {per_class}",
        f"features: {trained.features_shown} of {trained.ngrams_shown}{pattern}; vocabulary of {vocab:,} tokens",
    ]
    if trained.holdout:
        h = trained.holdout
        lines.append(f"hold-out: {h['rows']:,} messages (seed {h['seed']}; their ids are in the card)")
        lines.append(f"  accuracy {h['accuracy']:.4f}, macro F1 {h['macro_f1']:.4f}")
    for line in lines:
        console.print(line, markup=False, soft_wrap=True)
    console.print(f"wrote {out} and {card_path.name}")
