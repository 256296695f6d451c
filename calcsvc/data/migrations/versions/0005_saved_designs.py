"""Saved designs: a named request (a channel review's or one calculation's body) with its owner, description and
the part revisions it resolved to, revisioned like parts; and the parts each design's current revision uses, so
the designs a part edit touches are one indexed query.

No existing table is changed: every part, revision and event is kept as it is.

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-03
"""

import sqlalchemy as sa
from alembic import op

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "designs",
        sa.Column("design_id", sa.String(64), primary_key=True),
        sa.Column("calculation", sa.String(32), nullable=False),
        sa.Column("owner", sa.String(64), nullable=False),
        sa.Column("description", sa.Text(), nullable=False),
        sa.Column("status", sa.String(16), nullable=False),
        sa.Column("revision", sa.Integer(), nullable=False),
        sa.Column("updated_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("updated_by", sa.String(64), nullable=False),
    )
    op.create_index("ix_designs_status", "designs", ["status"])
    op.create_table(
        "design_revisions",
        sa.Column("design_id", sa.String(64), sa.ForeignKey("designs.design_id"), primary_key=True),
        sa.Column("revision", sa.Integer(), primary_key=True),
        sa.Column("calculation", sa.String(32), nullable=False),
        sa.Column("owner", sa.String(64), nullable=False),
        sa.Column("description", sa.Text(), nullable=False),
        sa.Column("body", sa.JSON(), nullable=False),
        sa.Column("inputs", sa.JSON(), nullable=False),
        sa.Column("parts", sa.JSON(), nullable=False),
        sa.Column("review", sa.JSON(), nullable=False),
        sa.Column("author", sa.String(64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
    )
    op.create_table(
        "design_parts",
        sa.Column("design_id", sa.String(64), sa.ForeignKey("designs.design_id"), primary_key=True),
        sa.Column("role", sa.String(32), primary_key=True),
        sa.Column("part_id", sa.String(64), nullable=False),
        sa.Column("revision", sa.Integer(), nullable=False),
    )
    op.create_index("ix_design_parts_part_id", "design_parts", ["part_id"])


def downgrade() -> None:
    op.drop_index("ix_design_parts_part_id", "design_parts")
    op.drop_table("design_parts")
    op.drop_table("design_revisions")
    op.drop_index("ix_designs_status", "designs")
    op.drop_table("designs")
