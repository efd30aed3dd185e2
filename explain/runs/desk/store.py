"""The review database: one append-only table of reviews, through SQLAlchemy 2 Core, schema by Alembic.

SQLite (a file, write-ahead log) is the embedded default; PostgreSQL serves a team. Both run the same
statements. A review is never changed or removed: a correction is a new review naming the one it
supersedes, and the schema's triggers (migration ``0002``) refuse UPDATE and DELETE on the table.
The migrations are the schema's one declaration: an open store reads the table from the database.

A database is opened with :func:`open_store`: a new, empty one is given the schema; one at an older
schema is refused with one line saying how to upgrade it (:func:`upgrade`, ``nbledger reviews upgrade``).
"""

from __future__ import annotations

import datetime as _dt
import json
import sqlite3
import uuid
from dataclasses import dataclass
from pathlib import Path

import sqlalchemy as sa
from sqlalchemy.exc import IntegrityError, OperationalError, SQLAlchemyError

from explain.errors import NbledgerError

OUTCOMES = ("upheld", "overturned", "escalated")
MIGRATIONS = Path(__file__).with_name("migrations")
#: Seconds a writer waits for SQLite's lock before giving up with one line.
SQLITE_WAIT = 15.0

#: The columns of a review in the API and the CSV log (the ledger record and text only on request).
COLUMNS = (
    "id", "message_id", "reviewer", "role", "recorded_at", "outcome", "reason", "note", "label",
    "supersedes", "decision", "flagged", "model_sha256", "model_fingerprint", "rule",
)


def database_url(given: str | Path) -> str:
    """A database URL from ``--db``: a URL as given (``postgresql://`` uses psycopg 3), else an SQLite file path."""
    text = str(given)
    if "://" not in text:
        return f"sqlite:///{Path(text).expanduser().resolve()}"
    if text.startswith("postgresql://") or text.startswith("postgres://"):
        return "postgresql+psycopg://" + text.split("://", 1)[1]
    return text


def shown_url(url: str) -> str:
    """The URL without its password, for messages."""
    try:
        return sa.engine.make_url(url).render_as_string(hide_password=True)
    except sa.exc.ArgumentError:
        return "the database"


def _sqlite_path(url: str) -> Path | None:
    parsed = sa.engine.make_url(url)
    if parsed.get_backend_name() != "sqlite" or not parsed.database or parsed.database == ":memory:":
        return None
    return Path(parsed.database)


def make_engine(url: str) -> sa.Engine:
    """An engine: SQLite in WAL mode with full syncs and foreign keys, or PostgreSQL with pre-ping."""
    try:
        parsed = sa.engine.make_url(url)
    except sa.exc.ArgumentError:
        raise NbledgerError(f"--db {url!r} is neither a file path nor a database URL") from None
    if parsed.get_backend_name() == "sqlite":
        engine = sa.create_engine(url, connect_args={"timeout": SQLITE_WAIT, "check_same_thread": False})

        @sa.event.listens_for(engine, "connect")
        def _pragmas(dbapi_connection, _record):
            cursor = dbapi_connection.cursor()
            cursor.execute("PRAGMA journal_mode=WAL")
            cursor.execute("PRAGMA synchronous=FULL")  # committed means on disk before the 201
            cursor.execute("PRAGMA foreign_keys=ON")
            cursor.close()

        return engine
    if parsed.get_backend_name() == "postgresql":
        return sa.create_engine(url, pool_pre_ping=True, pool_size=10, max_overflow=20)
    raise NbledgerError(f"--db takes an SQLite file or a postgresql:// URL, got {parsed.get_backend_name()}://")


def _alembic_config(engine: sa.Engine, connection=None):
    from alembic.config import Config

    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    config.attributes["connection"] = connection
    return config


def head_revision() -> str:
    from alembic.script import ScriptDirectory

    return ScriptDirectory.from_config(_alembic_config(None)).get_current_head()


def current_revision(engine: sa.Engine) -> tuple[str | None, bool]:
    """``(schema revision or None, whether a reviews table exists)``."""
    from alembic.runtime.migration import MigrationContext

    with engine.connect() as conn:
        return MigrationContext.configure(conn).get_current_revision(), sa.inspect(conn).has_table("reviews")


def upgrade(engine: sa.Engine) -> None:
    """Bring the schema to the newest revision (Alembic ``upgrade head``)."""
    from alembic import command

    with engine.begin() as conn:
        command.upgrade(_alembic_config(engine, conn), "head")


def trouble(exc: Exception, url: str) -> NbledgerError:
    """One line for a database that cannot be used: locked, unreachable, refused."""
    text = str(getattr(exc, "orig", None) or exc).strip().splitlines()
    first = text[0] if text else type(exc).__name__
    if "locked" in first.lower():
        return NbledgerError(f"the review database {shown_url(url)} is locked by another process (waited {SQLITE_WAIT:.0f} s)")
    return NbledgerError(f"cannot use the review database {shown_url(url)}: {first}")


def _probe_sqlite_lock(path: Path) -> None:
    """Take and release SQLite's write lock once, so that a locked file is said at start, not at the first review."""
    if not path.exists():
        return
    probe = sqlite3.connect(str(path), timeout=SQLITE_WAIT, isolation_level=None)
    try:
        probe.execute("BEGIN IMMEDIATE")
        probe.execute("ROLLBACK")
    finally:
        probe.close()


@dataclass
class Store:
    """An open review database."""

    engine: sa.Engine
    url: str
    #: the reviews table as the database holds it (its one declaration is the migrations)
    table: sa.Table

    def close(self) -> None:
        self.engine.dispose()

    def add(self, review: dict) -> tuple[dict, bool]:
        """Insert one review and commit; ``(stored review, True)``, or the review already stored under
        the same ``review_key`` and ``False`` (a client's retry is never stored twice)."""
        row = dict(review)
        row.setdefault("review_key", uuid.uuid4().hex)
        row["recorded_at"] = utc_now()
        try:
            with self.engine.begin() as conn:
                if row.get("supersedes") is not None:
                    earlier = conn.execute(
                        sa.select(self.table.c.message_id).where(self.table.c.id == row["supersedes"])
                    ).scalar()
                    if earlier != row["message_id"]:
                        raise NbledgerError(f"review {row['supersedes']} is not a review of message {row['message_id']!r}")
                new_id = conn.execute(self.table.insert().values(**row).returning(self.table.c.id)).scalar_one()
            return self.get(new_id, ledger=True), True
        except IntegrityError:
            existing = self.by_key(row["review_key"])
            if existing is None:
                raise
            return existing, False

    def by_key(self, key: str) -> dict | None:
        with self.engine.connect() as conn:
            found = conn.execute(sa.select(self.table.c.id).where(self.table.c.review_key == key)).scalar()
        return None if found is None else self.get(found, ledger=True)

    def get(self, review_id: int, *, ledger: bool = False) -> dict | None:
        with self.engine.connect() as conn:
            row = conn.execute(sa.select(self.table).where(self.table.c.id == review_id)).mappings().first()
        return None if row is None else as_dict(row, ledger=ledger)

    def select(self, *, message_id=None, outcome=None, reviewer=None, current_only=False, ledger=False) -> list[dict]:
        """Reviews oldest first, filtered; ``current_only`` keeps the newest review of each message."""
        query = sa.select(self.table).order_by(self.table.c.id)
        if message_id is not None:
            query = query.where(self.table.c.message_id == message_id)
        if reviewer is not None:
            query = query.where(self.table.c.reviewer == reviewer)
        if current_only:
            newest = sa.select(sa.func.max(self.table.c.id)).group_by(self.table.c.message_id)
            query = query.where(self.table.c.id.in_(newest))
        if outcome is not None:
            query = query.where(self.table.c.outcome == outcome)
        with self.engine.connect() as conn:
            return [as_dict(r, ledger=ledger) for r in conn.execute(query).mappings()]

    def current_outcomes(self) -> dict[str, str]:
        """message id -> outcome of its newest review."""
        newest = sa.select(sa.func.max(self.table.c.id)).group_by(self.table.c.message_id)
        query = sa.select(self.table.c.message_id, self.table.c.outcome).where(self.table.c.id.in_(newest))
        with self.engine.connect() as conn:
            return {m: o for m, o in conn.execute(query)}


def as_dict(row, *, ledger: bool = False) -> dict:
    out = {c: row[c] for c in COLUMNS}
    out["flagged"] = bool(out["flagged"])
    if ledger:
        out["text"] = row["text"]
        out["ledger"] = json.loads(row["ledger"])
    return out


def utc_now() -> str:
    """Now in UTC, ISO 8601 with microseconds and ``Z``."""
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="microseconds").replace("+00:00", "Z")


def open_store(db: str | Path, *, create: bool = True) -> Store:
    """Open the review database at ``db`` (a path or URL), giving a new one the schema.

    Raises NbledgerError (one line) for a locked or unreachable database, and for one whose schema is
    older or newer than this nbledger's.
    """
    url = database_url(db)
    engine = make_engine(url)
    try:
        path = _sqlite_path(url)
        if path is not None:
            if not create and not path.exists():
                raise NbledgerError(f"no review database at {path}")
            if not path.parent.is_dir():
                raise NbledgerError(f"the folder of the review database {path} does not exist")
            _probe_sqlite_lock(path)
        revision, has_table = current_revision(engine)
        head = head_revision()
        if revision is None and not has_table and create:
            upgrade(engine)
        elif revision != head:
            engine.dispose()
            now = "no schema revision" if revision is None else f"schema {revision}"
            raise NbledgerError(
                f"the review database {shown_url(url)} needs a migration ({now}, this nbledger needs {head}): "
                f"run nbledger reviews upgrade {db}"
            )
        table = sa.Table("reviews", sa.MetaData(), autoload_with=engine)
    except (OperationalError, sqlite3.OperationalError, SQLAlchemyError, OSError) as exc:
        engine.dispose()
        raise trouble(exc, url) from None
    return Store(engine, url, table)


def read_reviews(db: str | Path) -> tuple[list[dict], str]:
    """Every review of an existing review database (oldest first), and the database named without its password."""
    store = open_store(db, create=False)
    try:
        return store.select(), shown_url(store.url)
    finally:
        store.close()
