"""``nbledger reviews``: the review database of the desk: corrections for the next training, schema upgrades."""

from __future__ import annotations

import csv
import io
from pathlib import Path

import typer

from explain.cli.common import app, warn

reviews_app = typer.Typer(help="The review desk's database (nbledger serve --db).", no_args_is_help=True)
app.add_typer(reviews_app, name="reviews")

CORRECTION_COLUMNS = ("id", "text", "label", "decision", "review", "reviewer", "recorded_at", "model_sha256")


def corrections(rows: list[dict]) -> tuple[str, int]:
    """``(CSV of the overturned messages with the class they should have had, messages left out)``.

    The class is the reviewer's ``label``, else the normal class for a flagged message (an overturned
    flag means the message should have passed); an overturned pass without a label is left out.
    """
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(CORRECTION_COLUMNS)
    left_out = 0
    for r in rows:
        label = r["label"] or (r["ledger"].get("normal_class") if r["flagged"] else None)
        if label is None:
            left_out += 1
            continue
        writer.writerow([r["message_id"], r["text"], label, r["decision"], r["id"], r["reviewer"], r["recorded_at"],
                         r["model_sha256"]])
    return buffer.getvalue(), left_out


@reviews_app.command("export")
def export(
    db: str = typer.Argument(..., help="Review database: an SQLite file or a postgresql:// URL."),
    out: Path = typer.Option(..., "--out", help="CSV of corrections (id, text, label, ...) for the next training."),
):
    """The overturned messages (newest review of each) as labelled data: id, text, label."""
    from explain.output_files import OutputSet
    from explain.runs.desk.store import open_store

    with OutputSet() as outputs:
        outputs.file(out)
        store = open_store(db, create=False)
        try:
            rows = store.select(outcome="overturned", current_only=True, ledger=True)
        finally:
            store.close()
        text, left_out = corrections(rows)
        outputs.write(out, text)
    if left_out:
        warn(f"{left_out} overturned messages that had been let through name no class; they are not in {out.name}")
    typer.echo(f"wrote {len(rows) - left_out:,} corrections to {out}")


@reviews_app.command("upgrade")
def upgrade_db(db: str = typer.Argument(..., help="Review database: an SQLite file or a postgresql:// URL.")):
    """Bring the database's schema to this nbledger's (Alembic migrations; reviews are kept)."""
    from explain.runs.desk.store import database_url, head_revision, make_engine, trouble, upgrade

    url = database_url(db)
    engine = make_engine(url)
    try:
        upgrade(engine)
    except Exception as exc:  # the database's own error, as one line
        from sqlalchemy.exc import SQLAlchemyError

        if isinstance(exc, SQLAlchemyError):
            raise trouble(exc, url) from None
        raise
    finally:
        engine.dispose()
    typer.echo(f"the review database is at schema {head_revision()}")
