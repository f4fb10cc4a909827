"""Controlled copies of batch records (record_copy), and values kept as they were entered.

``record_copy`` holds one row per printed or sealed copy: its copy number within the run,
the revision and the signatures it carries, and the SHA-256 of the file written.
``entered`` (JSON, field -> text as typed, e.g. {"concentration": "0.5 M"}) is added to the
tables whose values people type with a unit, so they are shown in that unit again.

Revision ID: 0010
Revises: 0009
Created: 2026-12-03 22:05:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0010"
down_revision = "0009"
branch_labels = None
depends_on = None

ENTERED = ("module_type", "water_flux_test", "integrity_test", "cleaning_procedure", "cleaning")


def upgrade() -> None:
    op.create_table(
        "record_copy",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("run_id", sa.Integer(), sa.ForeignKey("run.id"), nullable=False),
        sa.Column("copy_number", sa.Integer(), nullable=False),
        sa.Column("revision", sa.Integer(), nullable=False),
        sa.Column("revision_sha256", sa.String(length=64), nullable=True),
        sa.Column("state", sa.String(length=32), nullable=False),
        sa.Column("signatures", sa.JSON(), nullable=False),
        sa.Column("file_name", sa.String(), nullable=False),
        sa.Column("file_sha256", sa.String(length=64), nullable=False),
        sa.Column("kind", sa.String(length=16), nullable=False),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    op.create_index(
        "ix_record_copy_run_number", "record_copy", ["run_id", "copy_number"], unique=True
    )
    for table in ENTERED:
        with op.batch_alter_table(table, schema=None) as batch_op:
            batch_op.add_column(sa.Column("entered", sa.JSON(), nullable=True))


def downgrade() -> None:
    for table in reversed(ENTERED):
        with op.batch_alter_table(table, schema=None) as batch_op:
            batch_op.drop_column("entered")
    op.drop_index("ix_record_copy_run_number", table_name="record_copy")
    op.drop_table("record_copy")
