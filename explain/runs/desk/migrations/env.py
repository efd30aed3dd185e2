"""Alembic's environment: runs on the connection the store hands over (no alembic.ini, no URL here)."""

from alembic import context

from explain.runs.desk.store import metadata

connection = context.config.attributes["connection"]
context.configure(connection=connection, target_metadata=metadata)
with context.begin_transaction():
    context.run_migrations()
