"""The reviews table.

Revision ID: 0001
Revises:
"""

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "reviews",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("review_key", sa.String(64), nullable=False, unique=True),
        sa.Column("message_id", sa.Text, nullable=False),
        sa.Column("reviewer", sa.Text, nullable=False),
        sa.Column("role", sa.Text, nullable=False),
        sa.Column("recorded_at", sa.Text, nullable=False),
        sa.Column("outcome", sa.Text, nullable=False),
        sa.Column("reason", sa.Text, nullable=False),
        sa.Column("note", sa.Text, nullable=False),
        sa.Column("label", sa.Text, nullable=True),
        sa.Column("supersedes", sa.Integer, sa.ForeignKey("reviews.id"), nullable=True),
        sa.Column("decision", sa.Text, nullable=False),
        sa.Column("flagged", sa.Boolean, nullable=False),
        sa.Column("model_sha256", sa.Text, nullable=False),
        sa.Column("model_fingerprint", sa.Text, nullable=True),
        sa.Column("rule", sa.Text, nullable=False),
        sa.Column("text", sa.Text, nullable=False),
        sa.Column("ledger", sa.Text, nullable=False),
        sa.CheckConstraint("outcome IN ('upheld', 'overturned', 'escalated')", name="known_outcome"),
    )
    op.create_index("ix_reviews_message_id", "reviews", ["message_id"])


def downgrade() -> None:
    op.drop_table("reviews")
