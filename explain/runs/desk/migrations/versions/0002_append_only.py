"""Reviews are append-only: the database itself refuses UPDATE and DELETE on the table.

Revision ID: 0002
Revises: 0001
"""

from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None

MESSAGE = "reviews are append-only: record a new review that supersedes the old one"


def upgrade() -> None:
    if op.get_bind().dialect.name == "sqlite":
        for action in ("UPDATE", "DELETE"):
            op.execute(
                f"CREATE TRIGGER reviews_no_{action.lower()} BEFORE {action} ON reviews "
                f"BEGIN SELECT RAISE(ABORT, '{MESSAGE}'); END"
            )
        return
    op.execute(
        "CREATE FUNCTION reviews_append_only() RETURNS trigger LANGUAGE plpgsql AS "
        f"$$ BEGIN RAISE EXCEPTION '{MESSAGE}'; END $$"
    )
    op.execute(
        "CREATE TRIGGER reviews_append_only BEFORE UPDATE OR DELETE OR TRUNCATE ON reviews "
        "FOR EACH STATEMENT EXECUTE FUNCTION reviews_append_only()"
    )


def downgrade() -> None:
    if op.get_bind().dialect.name == "sqlite":
        op.execute("DROP TRIGGER reviews_no_update")
        op.execute("DROP TRIGGER reviews_no_delete")
        return
    op.execute("DROP TRIGGER reviews_append_only ON reviews")
    op.execute("DROP FUNCTION reviews_append_only()")
