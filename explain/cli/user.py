"""``nbledger user add``: a user of the review desk, with a token shown once and kept only as an Argon2 hash."""

from __future__ import annotations

import os
from pathlib import Path

import typer

from explain.cli.common import app

user_app = typer.Typer(help="Users of the review desk (nbledger serve --users FILE).", no_args_is_help=True)
app.add_typer(user_app, name="user")


@user_app.command("add")
def add(
    file: Path = typer.Argument(..., help="Users file (JSON); made when missing."),
    name: str = typer.Argument(..., help="The user's name, as it will stand beside their reviews."),
    role: str = typer.Option(..., "--role", help="reviewer (reads and records reviews) | auditor (reads)."),
):
    """Add a user; print their new token once (the last line). The file keeps only its Argon2 hash."""
    from explain.output_files import write_atomic
    from explain.runs.desk.users import add_user

    data, token = add_user(file, name, role)
    write_atomic(file, data)
    os.chmod(file, 0o600)
    typer.echo(f"added {name.strip()} ({role}) to {file}; their token, shown only this once:")
    typer.echo(token)
