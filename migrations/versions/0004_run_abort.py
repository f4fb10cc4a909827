"""Runs can be aborted (when, by whom and why), and a plan entered late keeps its time.

Revision ID: 0004
Revises: 0003
Created: 2026-12-03 15:05:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.add_column(sa.Column("planned_at", sa.DateTime(timezone=True), nullable=True))
        batch_op.add_column(sa.Column("aborted_at", sa.DateTime(timezone=True), nullable=True))
        batch_op.add_column(sa.Column("aborted_by", sa.String(length=64), nullable=True))
        batch_op.add_column(sa.Column("abort_reason", sa.String(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.drop_column("abort_reason")
        batch_op.drop_column("aborted_by")
        batch_op.drop_column("aborted_at")
        batch_op.drop_column("planned_at")
