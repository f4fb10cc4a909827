"""Cleaning cycles against versioned cleaning-cycle procedures.

``template_version`` holds controlled documents of more than one kind: ``kind`` is template
(a master record, every row before this revision) or cleaning_procedure. A cleaning recorded
as a cycle names the procedure version it was done under (``cleaning.procedure_version_id``)
and has one ``cleaning_step`` row per step.

Revision ID: 0014
Revises: 0013
Created: 2026-12-04 02:40:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0014"
down_revision = "0013"
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table("template_version", schema=None) as batch_op:
        batch_op.add_column(
            sa.Column("kind", sa.String(length=32), nullable=False, server_default="template")
        )
    with op.batch_alter_table("cleaning", schema=None) as batch_op:
        batch_op.add_column(sa.Column("procedure_version_id", sa.Integer(), nullable=True))
        batch_op.create_foreign_key(
            "fk_cleaning_procedure_version", "template_version", ["procedure_version_id"], ["id"]
        )
    op.create_table(
        "cleaning_step",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("cleaning_id", sa.Integer(), sa.ForeignKey("cleaning.id"), nullable=False),
        sa.Column("number", sa.Integer(), nullable=False),
        sa.Column("name", sa.String(), nullable=False),
        sa.Column("agent", sa.String(), nullable=False),
        sa.Column("solution_code", sa.String(length=64), nullable=True),
        sa.Column("concentration", sa.Float(), nullable=True),
        sa.Column("concentration_unit", sa.String(length=16), nullable=False),
        sa.Column("temperature_k", sa.Float(), nullable=True),
        sa.Column("contact_time_s", sa.Float(), nullable=True),
        sa.Column("flow_m3_s", sa.Float(), nullable=True),
        sa.Column("tmp_pa", sa.Float(), nullable=True),
        sa.Column("endpoint_kind", sa.String(length=16), nullable=True),
        sa.Column("endpoint_value", sa.Float(), nullable=True),
        sa.Column("departures", sa.JSON(), nullable=False),
        sa.Column("entered", sa.JSON(), nullable=True),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    op.create_index(
        "ix_cleaning_step_cleaning_number", "cleaning_step", ["cleaning_id", "number"], unique=True
    )


def downgrade() -> None:
    op.drop_index("ix_cleaning_step_cleaning_number", table_name="cleaning_step")
    op.drop_table("cleaning_step")
    with op.batch_alter_table("cleaning", schema=None) as batch_op:
        batch_op.drop_constraint("fk_cleaning_procedure_version", type_="foreignkey")
        batch_op.drop_column("procedure_version_id")
    with op.batch_alter_table("template_version", schema=None) as batch_op:
        batch_op.drop_column("kind")
