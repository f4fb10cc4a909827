"""Skid logs in several files, temporary passwords, and a keyed audit chain head.

Revision ID: 0008
Revises: 0007
Created: 2026-12-03 17:05:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0008"
down_revision = "0007"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "skid_log_part",
        sa.Column("log_id", sa.Integer(), sa.ForeignKey("skid_log_file.id"), nullable=False),
        sa.Column("position", sa.Integer(), autoincrement=False, nullable=False),
        sa.Column("file_name", sa.String(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("size_bytes", sa.Integer(), nullable=False),
        sa.Column("content", sa.LargeBinary(), nullable=False),
        sa.PrimaryKeyConstraint("log_id", "position"),
    )
    with op.batch_alter_table("skid_log_file", schema=None) as batch_op:
        batch_op.add_column(sa.Column("parts", sa.JSON(), nullable=True))
    with op.batch_alter_table("user_account", schema=None) as batch_op:
        batch_op.add_column(
            sa.Column("password_temporary", sa.Boolean(), nullable=False, server_default=sa.false())
        )
    with op.batch_alter_table("audit_head", schema=None) as batch_op:
        batch_op.add_column(sa.Column("key_id", sa.String(length=64), nullable=True))
        batch_op.add_column(sa.Column("mac", sa.String(length=64), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("audit_head", schema=None) as batch_op:
        batch_op.drop_column("mac")
        batch_op.drop_column("key_id")
    with op.batch_alter_table("user_account", schema=None) as batch_op:
        batch_op.drop_column("password_temporary")
    with op.batch_alter_table("skid_log_file", schema=None) as batch_op:
        batch_op.drop_column("parts")
    op.drop_table("skid_log_part")
