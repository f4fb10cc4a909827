"""Steps signed as they are done (step_entry), and deviations with a classification.

Revision ID: 0009
Revises: 0008
Created: 2026-12-03 17:50:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0009"
down_revision = "0008"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "step_entry",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("run_id", sa.Integer(), sa.ForeignKey("run.id"), nullable=False),
        sa.Column("step", sa.Integer(), nullable=False),
        sa.Column("meaning", sa.String(length=16), nullable=False),
        sa.Column("login", sa.String(length=64), nullable=False),
        sa.Column("full_name", sa.String(), nullable=False),
        sa.Column("values", sa.JSON(), nullable=True),
        sa.Column("done_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("late", sa.Boolean(), nullable=False),
        sa.Column("deviation_number", sa.Integer(), nullable=True),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    op.create_index("ix_step_entry_run_step", "step_entry", ["run_id", "step"], unique=False)
    with op.batch_alter_table("deviation", schema=None) as batch_op:
        batch_op.add_column(sa.Column("classification", sa.String(length=32), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("deviation", schema=None) as batch_op:
        batch_op.drop_column("classification")
    op.drop_index("ix_step_entry_run_step", table_name="step_entry")
    op.drop_table("step_entry")
