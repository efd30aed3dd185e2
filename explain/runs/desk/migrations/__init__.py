"""Alembic migrations of the review database (run programmatically by ``explain.runs.desk.store``)."""
