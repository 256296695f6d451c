"""Part events: who created, edited, approved, retired or restored which revision, when and why.

Existing history is carried over: each stored revision gets its created/edited event (its author and time),
each approval its approved event, and each part already retired a retired event on its current revision (by
whoever last changed it, no reason recorded).

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-03
"""

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "part_events",
        sa.Column("id", sa.Integer(), primary_key=True),
        sa.Column("part_id", sa.String(64), sa.ForeignKey("parts.part_id"), nullable=False),
        sa.Column("revision", sa.Integer(), nullable=False),
        sa.Column("action", sa.String(16), nullable=False),
        sa.Column("actor", sa.String(64), nullable=False),
        sa.Column("at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("reason", sa.Text(), nullable=True),
    )
    op.create_index("ix_part_events_part_revision", "part_events", ["part_id", "revision"])
    op.execute(
        "INSERT INTO part_events (part_id, revision, action, actor, at)"
        " SELECT part_id, revision, CASE WHEN revision = 1 THEN 'created' ELSE 'edited' END, author, created_at"
        " FROM part_revisions ORDER BY part_id, revision"
    )
    op.execute(
        "INSERT INTO part_events (part_id, revision, action, actor, at)"
        " SELECT part_id, revision, 'approved', approved_by, COALESCE(approved_at, created_at)"
        " FROM part_revisions WHERE approved_by IS NOT NULL ORDER BY part_id, revision"
    )
    op.execute(
        "INSERT INTO part_events (part_id, revision, action, actor, at)"
        " SELECT part_id, revision, 'retired', updated_by, updated_at FROM parts WHERE status = 'retired'"
        " ORDER BY part_id"
    )


def downgrade() -> None:
    op.drop_index("ix_part_events_part_revision", "part_events")
    op.drop_table("part_events")
