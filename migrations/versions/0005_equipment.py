"""Equipment: skids (processing systems), their instruments with calibration due dates, and
their approved column-mapping versions.

Revision ID: 0005
Revises: 0004
Created: 2026-12-03 14:05:00.000000
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "skid",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("code", sa.String(length=64), nullable=False),
        sa.Column("description", sa.String(), nullable=False),
        sa.Column("location", sa.String(), nullable=True),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("code"),
        sqlite_autoincrement=True,
    )
    op.create_table(
        "skid_instrument",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("skid_id", sa.Integer(), nullable=False),
        sa.Column("tag", sa.String(length=64), nullable=False),
        sa.Column("measures", sa.String(length=32), nullable=False),
        sa.Column("calibration_due", sa.Date(), nullable=False),
        sa.ForeignKeyConstraint(["skid_id"], ["skid.id"]),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("skid_instrument", schema=None) as batch_op:
        batch_op.create_index("ix_skid_instrument_skid_tag", ["skid_id", "tag"], unique=False)

    op.create_table(
        "skid_mapping",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("skid_id", sa.Integer(), nullable=False),
        sa.Column("version", sa.Integer(), nullable=False),
        sa.Column("text", sa.String(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("approved_by", sa.String(length=64), nullable=False),
        sa.Column("approved_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("status", sa.String(length=16), nullable=False),
        sa.ForeignKeyConstraint(["skid_id"], ["skid.id"]),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("skid_mapping", schema=None) as batch_op:
        batch_op.create_index("ix_skid_mapping_skid_version", ["skid_id", "version"], unique=True)


def downgrade() -> None:
    with op.batch_alter_table("skid_mapping", schema=None) as batch_op:
        batch_op.drop_index("ix_skid_mapping_skid_version")

    op.drop_table("skid_mapping")
    with op.batch_alter_table("skid_instrument", schema=None) as batch_op:
        batch_op.drop_index("ix_skid_instrument_skid_tag")

    op.drop_table("skid_instrument")
    op.drop_table("skid")
