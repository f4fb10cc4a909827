"""Versions of master-record templates (template_version).

One row per submitted version of a template: the file's exact text and SHA-256, its author,
the QA approval and the time it takes effect from, and its retirement. ``state`` is draft,
approved or retired; "effective" is derived from ``effective_from`` and the clock.

Revision ID: 0011
Revises: 0010
Created: 2026-12-03 22:40:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0011"
down_revision = "0010"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "template_version",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("template_id", sa.String(length=64), nullable=False),
        sa.Column("version", sa.String(length=32), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("text", sa.String(), nullable=False),
        sa.Column("title", sa.String(), nullable=False),
        sa.Column("source", sa.String(), nullable=False),
        sa.Column("state", sa.String(length=16), nullable=False),
        sa.Column("authored_by", sa.String(length=64), nullable=False),
        sa.Column("approved_by", sa.String(length=64), nullable=True),
        sa.Column("approved_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("effective_from", sa.DateTime(timezone=True), nullable=True),
        sa.Column("late_reason", sa.String(), nullable=True),
        sa.Column("retired_by", sa.String(length=64), nullable=True),
        sa.Column("retired_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("retire_reason", sa.String(), nullable=True),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    op.create_index(
        "ix_template_version_id_version",
        "template_version",
        ["template_id", "version"],
        unique=True,
    )
    op.create_index("ix_template_version_sha256", "template_version", ["sha256"], unique=False)


def downgrade() -> None:
    op.drop_index("ix_template_version_sha256", table_name="template_version")
    op.drop_index("ix_template_version_id_version", table_name="template_version")
    op.drop_table("template_version")
