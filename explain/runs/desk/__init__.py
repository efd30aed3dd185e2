"""The review desk: a long-lived web application that holds one model, shows queued messages as ledgers
and keeps every review in a database.

:func:`explain.runs.desk.app.build_app` makes the Starlette application from a
:class:`~explain.runs.desk.settings.DeskSettings`; ``nbledger serve`` (``explain/cli/serve.py``) runs it
with uvicorn. The reviews live in :mod:`explain.runs.desk.store` (SQLAlchemy Core, Alembic migrations in
``migrations/``); users and roles in :mod:`explain.runs.desk.users`.
"""
