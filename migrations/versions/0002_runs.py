"""Runs: master-record runs, their skid logs, QC results and deviations; module-type
loading limits and clean-hold window.

Revision ID: 0002
Revises: 0001
Created: 2026-12-02 14:09:43.581852
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "run",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("module_id", sa.Integer(), nullable=False),
        sa.Column("product", sa.String(), nullable=False),
        sa.Column("lot", sa.String(), nullable=False),
        sa.Column("template_id", sa.String(length=64), nullable=False),
        sa.Column("template_version", sa.String(length=32), nullable=False),
        sa.Column("template_sha256", sa.String(length=64), nullable=False),
        sa.Column("template_text", sa.String(), nullable=False),
        sa.Column("inputs", sa.JSON(), nullable=False),
        sa.Column("plan", sa.JSON(), nullable=False),
        sa.Column("status", sa.String(length=16), nullable=False),
        sa.Column("override_reason", sa.String(), nullable=True),
        sa.Column("use_id", sa.Integer(), nullable=True),
        sa.Column("started_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("finished_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("submitted_at", sa.DateTime(timezone=True), nullable=True),
        sa.ForeignKeyConstraint(
            ["module_id"],
            ["module.id"],
        ),
        sa.ForeignKeyConstraint(
            ["use_id"],
            ["module_use.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_run_module_id"), ["module_id"], unique=False)

    op.create_table(
        "deviation",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("run_id", sa.Integer(), nullable=False),
        sa.Column("number", sa.Integer(), nullable=False),
        sa.Column("check_name", sa.String(length=64), nullable=True),
        sa.Column("description", sa.String(), nullable=False),
        sa.Column("impact", sa.String(), nullable=True),
        sa.Column("closed_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("closed_by", sa.String(length=64), nullable=True),
        sa.Column("closure", sa.String(), nullable=True),
        sa.ForeignKeyConstraint(
            ["run_id"],
            ["run.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("deviation", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_deviation_run_id"), ["run_id"], unique=False)

    op.create_table(
        "qc_result",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("run_id", sa.Integer(), nullable=False),
        sa.Column("attribute", sa.String(length=64), nullable=False),
        sa.Column("value", sa.Float(), nullable=False),
        sa.Column("text", sa.String(), nullable=False),
        sa.Column("method", sa.String(), nullable=True),
        sa.ForeignKeyConstraint(
            ["run_id"],
            ["run.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("qc_result", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_qc_result_run_id"), ["run_id"], unique=False)

    op.create_table(
        "skid_log_file",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("run_id", sa.Integer(), nullable=False),
        sa.Column("file_name", sa.String(), nullable=False),
        sa.Column("sha256", sa.String(length=64), nullable=False),
        sa.Column("size_bytes", sa.Integer(), nullable=False),
        sa.Column("content", sa.LargeBinary(), nullable=False),
        sa.Column("mapping_text", sa.String(), nullable=False),
        sa.Column("mapping_sha256", sa.String(length=64), nullable=False),
        sa.Column("windows", sa.JSON(), nullable=True),
        sa.Column("rows", sa.Integer(), nullable=False),
        sa.Column("actuals", sa.JSON(), nullable=False),
        sa.ForeignKeyConstraint(
            ["run_id"],
            ["run.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("skid_log_file", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_skid_log_file_run_id"), ["run_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_skid_log_file_sha256"), ["sha256"], unique=False)

    with op.batch_alter_table("module_type", schema=None) as batch_op:
        batch_op.add_column(sa.Column("max_volume_loading_m", sa.Float(), nullable=True))
        batch_op.add_column(sa.Column("max_mass_loading_kg_m2", sa.Float(), nullable=True))
        batch_op.add_column(sa.Column("clean_hold_s", sa.Float(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("module_type", schema=None) as batch_op:
        batch_op.drop_column("clean_hold_s")
        batch_op.drop_column("max_mass_loading_kg_m2")
        batch_op.drop_column("max_volume_loading_m")

    with op.batch_alter_table("skid_log_file", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_skid_log_file_sha256"))
        batch_op.drop_index(batch_op.f("ix_skid_log_file_run_id"))

    op.drop_table("skid_log_file")
    with op.batch_alter_table("qc_result", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_qc_result_run_id"))

    op.drop_table("qc_result")
    with op.batch_alter_table("deviation", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_deviation_run_id"))

    op.drop_table("deviation")
    with op.batch_alter_table("run", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_run_module_id"))

    op.drop_table("run")
