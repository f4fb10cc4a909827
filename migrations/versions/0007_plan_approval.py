"""A run's plan is approved by a second person before the run starts.

Revision ID: 0007
Revises: 0006
Created: 2026-12-03 15:45:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.add_column(
            sa.Column("plan_approved_at", sa.DateTime(timezone=True), nullable=True)
        )
        batch_op.add_column(sa.Column("plan_approved_by", sa.String(length=64), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.drop_column("plan_approved_by")
        batch_op.drop_column("plan_approved_at")
