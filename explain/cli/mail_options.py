"""The e-mail options shared by every command that reads raw messages or data sets.

Each is one Typer option object, used as the default of a parameter in each command
(``raw_email: bool = RAW_EMAIL``), so the flags read the same everywhere.
"""

from __future__ import annotations

import typer

TEXT_VIEW = typer.Option(
    None, "--text-view",
    help="What the filter reads: raw (the text as given) | body | subject+body | headers+body "
    "(default: the model card's view, else raw).",
)
RAW_EMAIL = typer.Option(False, "--raw-email", help="The text column holds whole raw e-mail messages.")
LABELS_FROM_FOLDERS = typer.Option(
    False, "--labels-from-folders", help="DATA is a folder of .eml files with one sub-folder per label."
)
LABEL = typer.Option(None, "--label", help="The label of every message of an mbox file or .eml folder.")


def mail_input(card: dict | None, text_view: str | None, raw_email=False, labels_from_folders=False, label=None):
    """The e-mail reading settings of a data command, the view resolved against the model card."""
    from explain.model.email_reader import resolve_text_view, text_rules_of
    from explain.model.mail_data import MailInput

    return MailInput(
        raw_email, labels_from_folders, label, resolve_text_view(card, text_view), rules=text_rules_of(card)
    )

