"""Alembic's environment: runs on the connection the store hands over (no alembic.ini, no URL here)."""

from alembic import context

# The migrations are the one declaration of the schema; the store reads the table's shape from the database.
connection = context.config.attributes["connection"]
context.configure(connection=connection, target_metadata=None)
with context.begin_transaction():
    context.run_migrations()
