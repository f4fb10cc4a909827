"""Prepared solutions: a cleaning or storage solution as made and verified before use.

Revision ID: 0013
Revises: 0012
Created: 2026-12-04 02:10:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0013"
down_revision = "0012"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "prepared_solution",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("code", sa.String(length=64), nullable=False),
        sa.Column("agent", sa.String(), nullable=False),
        sa.Column("target_concentration", sa.Float(), nullable=False),
        sa.Column("concentration_unit", sa.String(length=16), nullable=False),
        sa.Column("reagent_lot", sa.String(), nullable=False),
        sa.Column("reagent_expiry", sa.Date(), nullable=False),
        sa.Column("prepared_by", sa.String(length=64), nullable=False),
        sa.Column("prepared_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("use_by", sa.DateTime(timezone=True), nullable=False),
        sa.Column("verified_concentration", sa.Float(), nullable=True),
        sa.Column("verification_method", sa.String(length=16), nullable=True),
        sa.Column("verification", sa.JSON(), nullable=True),
        sa.Column("verified_by", sa.String(length=64), nullable=True),
        sa.Column("verified_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("note", sa.String(), nullable=True),
        sa.Column("entered", sa.JSON(), nullable=True),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("code"),
        sqlite_autoincrement=True,
    )


def downgrade() -> None:
    op.drop_table("prepared_solution")
