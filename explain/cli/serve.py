"""``nbledger serve``: the review desk, a local web application over one model, a queue and a review database."""

from __future__ import annotations

import errno
import ipaddress
import socket
from pathlib import Path
from typing import Optional

import typer

from explain.cli.common import THRESHOLD, THRESHOLD_LOG_ODDS, app, err_console, fail, one_threshold, parse_size
from explain.cli.option_sets import DataOptions, ModelOptions, with_option_sets

LOOPBACK_NAMES = ("localhost",)
#: Queues of at least this many messages show their progress while they are scored.
LARGE_QUEUE = 5000


def is_loopback(host: str) -> bool:
    if host in LOOPBACK_NAMES:
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def bound_socket(host: str, port: int) -> socket.socket:
    """A listening socket on ``host:port``, or one line saying why not (a port in use, above all)."""
    try:
        infos = socket.getaddrinfo(host, port, type=socket.SOCK_STREAM, flags=socket.AI_PASSIVE)
    except socket.gaierror as exc:
        fail(f"--host {host!r} is not an address of this machine ({exc.strerror})")
    family, kind, proto, _, address = infos[0]
    sock = socket.socket(family, kind, proto)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    try:
        sock.bind(address)
        sock.listen(128)
    except OSError as exc:
        sock.close()
        if exc.errno == errno.EADDRINUSE:
            fail(f"port {port} on {host} is in use by another program: stop it or give another --port")
        fail(f"cannot listen on {host}:{port}: {exc.strerror or exc}")
    return sock


def default_db(queue: Optional[Path]) -> Path:
    """The SQLite file beside the queue: ``queue.csv`` -> ``queue.reviews.sqlite``."""
    if queue is None:
        fail("give --db (a file or a postgresql:// URL) when there is no --queue to put the reviews beside")
    queue = queue.resolve()
    return queue.parent / f"{queue.name.split('.')[0] or 'queue'}.reviews.sqlite"


def load_queue(loaded, data: Path, text_col, id_col, label_col, reading: DataOptions, threshold, log_odds, date_col=None):
    """The queue read and scored, with progress on standard error while it loads."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    from explain.model.decision import DecisionRule
    from explain.runs.desk.queue import score_queue

    err_console.print(f"reading the queue {data.name} ...", markup=False, highlight=False)
    messages = reading.read(data, text_col, label_col, mail=reading.mail(loaded.card), id_col=id_col)
    rule = DecisionRule.for_view(loaded.view, threshold, log_odds)
    dates = None
    if messages.mail is not None:
        dates = list(messages.mail.date)
    elif date_col is not None:
        from explain.model.data_io import read_column

        dates = read_column(data, date_col, parse_size(reading.max_data_bytes, "--max-data-bytes"))
    if len(messages) < LARGE_QUEUE:
        return score_queue(loaded, messages, rule, None, dates)
    if not err_console.is_terminal:  # plain lines in a log
        say = lambda done, total: err_console.print(  # noqa: E731
            f"scoring the queue: {done:,} of {total:,} messages", markup=False, highlight=False)
        return score_queue(loaded, messages, rule, say, dates)
    columns = (TextColumn("scoring the queue"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn())
    with Progress(*columns, console=err_console, transient=True) as progress:
        task = progress.add_task("score", total=len(messages))
        queue = score_queue(loaded, messages, rule, lambda done, total: progress.update(task, completed=done), dates)
    return queue


@app.command()
@with_option_sets(opening=ModelOptions, reading=DataOptions)
def serve(
    model: Path = typer.Argument(..., help="Model file (.skops; pickle/joblib only with --allow-pickle)."),
    queue: Optional[Path] = typer.Option(None, "--queue", help="Messages to review: a table, a folder of .eml files or an mbox file."),
    text_col: str = typer.Option("text", "--text-col", help="Column of --queue holding the text."),
    id_col: Optional[str] = typer.Option(None, "--id-col", help="Column of --queue holding message ids (default: id when present)."),
    label_col: Optional[str] = typer.Option(None, "--label-col", help="Column of --queue holding classes (not needed to review)."),
    date_col: Optional[str] = typer.Option(
        None, "--date-col", help="Column of a --queue table holding dates (e-mail: the Date header), to order by date."
    ),
    db: Optional[str] = typer.Option(None, "--db", help="Review database: an SQLite file (default: beside the queue) or postgresql://..."),
    host: str = typer.Option("127.0.0.1", "--host", help="Address to listen on; other than loopback only with --users."),
    port: int = typer.Option(8000, "--port", min=0, max=65535, help="Port to listen on."),
    users: Optional[Path] = typer.Option(None, "--users", help="Users file of nbledger user add: every request then signs in."),
    redact: bool = typer.Option(False, "--redact", help="Mask personal-looking values in every ledger the desk shows and keeps."),
    threshold: Optional[float] = THRESHOLD,
    threshold_log_odds: Optional[float] = THRESHOLD_LOG_ODDS,
    opening: ModelOptions = None,
    reading: DataOptions = None,
):
    """The review desk: the queue, each message as its ledger, and every review kept in a database."""
    from explain.runs.desk.settings import DeskSettings
    from explain.runs.desk.store import open_store
    from explain.runs.desk.users import Users

    one_threshold(threshold, threshold_log_odds)
    if not is_loopback(host) and users is None:
        fail(f"--host {host} is reachable from other machines: give --users FILE so that every request signs in")
    people = Users.from_file(users) if users is not None else None
    store = open_store(db if db is not None else default_db(queue))
    sock = bound_socket(host, port)
    try:
        loaded = opening.load(model)
        if loaded.view.n_classes < 2:
            fail("the model has one class: there is no decision to review")
        scored = None
        if queue is not None:
            scored = load_queue(loaded, queue, text_col, id_col, label_col, reading, threshold, threshold_log_odds, date_col)
        settings = DeskSettings(
            loaded=loaded, store=store, queue=scored, threshold=threshold, threshold_log_odds=threshold_log_odds,
            users=people, redact=redact,
        )
        run_desk(settings, sock, host)
    finally:
        sock.close()
        store.close()


def run_desk(settings, sock: socket.socket, host: str) -> None:
    """Serve until SIGINT or SIGTERM (uvicorn's graceful shutdown)."""
    import uvicorn

    from explain.runs.desk.app import build_app
    from explain.runs.desk.store import shown_url

    port = sock.getsockname()[1]
    shown_host = f"[{host}]" if ":" in host else host
    queued = 0 if settings.queue is None else len(settings.queue)
    err_console.print(
        f"review desk on http://{shown_host}:{port}/ ({queued:,} queued messages; reviews in "
        f"{shown_url(settings.store.url)}); stop with Ctrl-C",
        markup=False, highlight=False, soft_wrap=True,
    )
    config = uvicorn.Config(build_app(settings), log_level="warning", access_log=False, lifespan="off")
    uvicorn.Server(config).run(sockets=[sock])
