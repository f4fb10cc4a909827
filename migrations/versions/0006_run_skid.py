"""A run names the skid it is made on.

Revision ID: 0006
Revises: 0005
Created: 2026-12-03 15:20:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0006"
down_revision = "0005"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("run", schema=None) as batch_op:
        # skid.id, checked by the run service; no foreign key (see ledger/store/tables.py)
        batch_op.add_column(sa.Column("skid_id", sa.Integer(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.drop_column("skid_id")
