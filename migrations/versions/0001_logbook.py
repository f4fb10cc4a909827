"""Module logbook: users, module types, modules, tests, cleaning (and its procedures), storage,
uses, holds, audit.

The audit trail is append-only: triggers refuse UPDATE and DELETE on audit_event (and
TRUNCATE on PostgreSQL). audit_head starts at the genesis hash.

Revision ID: 0001
Revises: (none)
Created: 2026-12-01 23:03:11.773544
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "audit_event",
        sa.Column("seq", sa.Integer(), autoincrement=False, nullable=False),
        sa.Column("at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("actor", sa.String(length=64), nullable=False),
        sa.Column("action", sa.String(length=24), nullable=False),
        sa.Column("entity", sa.String(length=32), nullable=False),
        sa.Column("entity_id", sa.String(length=64), nullable=False),
        sa.Column("module_id", sa.Integer(), nullable=True),
        sa.Column("field", sa.String(length=64), nullable=True),
        sa.Column("old_value", sa.String(), nullable=True),
        sa.Column("new_value", sa.String(), nullable=True),
        sa.Column("reason", sa.String(), nullable=True),
        sa.Column("record_hash", sa.String(length=64), nullable=True),
        sa.Column("prev_hash", sa.String(length=64), nullable=False),
        sa.Column("hash", sa.String(length=64), nullable=False),
        sa.PrimaryKeyConstraint("seq"),
    )
    with op.batch_alter_table("audit_event", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_audit_event_actor"), ["actor"], unique=False)
        batch_op.create_index(batch_op.f("ix_audit_event_at"), ["at"], unique=False)
        batch_op.create_index("ix_audit_event_entity", ["entity", "entity_id"], unique=False)
        batch_op.create_index(batch_op.f("ix_audit_event_module_id"), ["module_id"], unique=False)

    op.create_table(
        "audit_head",
        sa.Column("id", sa.Integer(), autoincrement=False, nullable=False),
        sa.Column("seq", sa.Integer(), nullable=False),
        sa.Column("hash", sa.String(length=64), nullable=False),
        sa.PrimaryKeyConstraint("id"),
    )
    op.create_table(
        "module_type",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("code", sa.String(length=64), nullable=False),
        sa.Column("supplier", sa.String(), nullable=True),
        sa.Column("membrane", sa.String(), nullable=False),
        sa.Column("pore_rating", sa.String(), nullable=False),
        sa.Column("lumen_diameter_m", sa.Float(), nullable=False),
        sa.Column("fiber_count", sa.Integer(), nullable=False),
        sa.Column("effective_length_m", sa.Float(), nullable=False),
        sa.Column("area_m2", sa.Float(), nullable=False),
        sa.Column("reference_temperature_k", sa.Float(), nullable=False),
        sa.Column("recovery_min", sa.Float(), nullable=False),
        sa.Column("recovery_alert", sa.Float(), nullable=False),
        sa.Column("damage_ratio", sa.Float(), nullable=False),
        sa.Column("preuse_band", sa.Float(), nullable=False),
        sa.Column("decay_limit_pa_s", sa.Float(), nullable=False),
        sa.Column("integrity_test_pressure_pa", sa.Float(), nullable=False),
        sa.Column("bubble_point_min_pa", sa.Float(), nullable=True),
        sa.Column("reuse_limit_cycles", sa.Integer(), nullable=False),
        sa.Column("storage_limit_s", sa.Float(), nullable=False),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("code"),
        sqlite_autoincrement=True,
    )
    op.create_table(
        "setting",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("key", sa.String(length=64), nullable=False),
        sa.Column("value", sa.String(), nullable=False),
        sa.PrimaryKeyConstraint("key"),
    )
    op.create_table(
        "user_account",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("login", sa.String(length=64), nullable=False),
        sa.Column("full_name", sa.String(), nullable=False),
        sa.Column("role", sa.String(length=16), nullable=False),
        sa.Column("password_hash", sa.String(), nullable=False),
        sa.Column("active", sa.Boolean(), nullable=False),
        sa.Column("failed_logins", sa.Integer(), nullable=False),
        sa.Column("locked", sa.Boolean(), nullable=False),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("login"),
        sqlite_autoincrement=True,
    )
    op.create_table(
        "module",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("serial", sa.String(length=64), nullable=False),
        sa.Column("type_id", sa.Integer(), nullable=False),
        sa.Column("manufacturer_lot", sa.String(), nullable=True),
        sa.Column("received_on", sa.Date(), nullable=True),
        sa.Column("first_use_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("dedicated_product", sa.String(), nullable=True),
        sa.Column("status", sa.String(length=24), nullable=False),
        sa.Column("status_before_hold", sa.String(length=24), nullable=True),
        sa.Column("note", sa.String(), nullable=True),
        sa.ForeignKeyConstraint(
            ["type_id"],
            ["module_type.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("serial"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("module", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_module_type_id"), ["type_id"], unique=False)

    op.create_table(
        "cleaning_procedure",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("code", sa.String(length=64), nullable=False),
        sa.Column("title", sa.String(), nullable=False),
        sa.Column("agent", sa.String(), nullable=False),
        sa.Column("concentration_min", sa.Float(), nullable=False),
        sa.Column("concentration_max", sa.Float(), nullable=False),
        sa.Column("concentration_unit", sa.String(length=16), nullable=False),
        sa.Column("temperature_min_k", sa.Float(), nullable=False),
        sa.Column("temperature_max_k", sa.Float(), nullable=False),
        sa.Column("contact_time_min_s", sa.Float(), nullable=False),
        sa.Column("rinse_ph_min", sa.Float(), nullable=True),
        sa.Column("rinse_ph_max", sa.Float(), nullable=True),
        sa.Column("rinse_conductivity_max_s_m", sa.Float(), nullable=True),
        sa.PrimaryKeyConstraint("id"),
        sa.UniqueConstraint("code"),
        sqlite_autoincrement=True,
    )
    op.create_table(
        "cleaning",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("module_id", sa.Integer(), nullable=False),
        sa.Column("activity_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("late", sa.Boolean(), nullable=False),
        sa.Column("note", sa.String(), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("agent", sa.String(), nullable=False),
        sa.Column("concentration", sa.Float(), nullable=False),
        sa.Column("concentration_unit", sa.String(length=16), nullable=False),
        sa.Column("temperature_k", sa.Float(), nullable=False),
        sa.Column("contact_time_s", sa.Float(), nullable=False),
        sa.Column("reagent_lot", sa.String(), nullable=False),
        sa.Column("rinse_ph", sa.Float(), nullable=True),
        sa.Column("rinse_conductivity_s_m", sa.Float(), nullable=True),
        sa.Column("procedure_id", sa.Integer(), nullable=True),
        sa.Column("deviations", sa.JSON(), nullable=True),
        sa.ForeignKeyConstraint(
            ["procedure_id"],
            ["cleaning_procedure.id"],
        ),
        sa.ForeignKeyConstraint(
            ["module_id"],
            ["module.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("cleaning", schema=None) as batch_op:
        batch_op.create_index("ix_cleaning_module_time", ["module_id", "activity_at"], unique=False)

    op.create_table(
        "hold",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("module_id", sa.Integer(), nullable=False),
        sa.Column("cause", sa.String(length=16), nullable=False),
        sa.Column("reason", sa.String(), nullable=False),
        sa.Column("source_entity", sa.String(), nullable=True),
        sa.Column("source_id", sa.Integer(), nullable=True),
        sa.Column("decision", sa.String(length=16), nullable=True),
        sa.Column("decision_reason", sa.String(), nullable=True),
        sa.Column("decided_by", sa.String(length=64), nullable=True),
        sa.Column("decided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("meaning", sa.String(length=16), nullable=True),
        sa.ForeignKeyConstraint(
            ["module_id"],
            ["module.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("hold", schema=None) as batch_op:
        batch_op.create_index(batch_op.f("ix_hold_module_id"), ["module_id"], unique=False)

    op.create_table(
        "integrity_test",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("module_id", sa.Integer(), nullable=False),
        sa.Column("activity_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("late", sa.Boolean(), nullable=False),
        sa.Column("note", sa.String(), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("kind", sa.String(length=16), nullable=False),
        sa.Column("test_pressure_pa", sa.Float(), nullable=True),
        sa.Column("hold_time_s", sa.Float(), nullable=True),
        sa.Column("upstream_volume_m3", sa.Float(), nullable=True),
        sa.Column("temperature_k", sa.Float(), nullable=True),
        sa.Column("readings", sa.JSON(), nullable=True),
        sa.Column("decay_rate_pa_s", sa.Float(), nullable=True),
        sa.Column("r_squared", sa.Float(), nullable=True),
        sa.Column("gas_flow_m3_s", sa.Float(), nullable=True),
        sa.Column("bubble_point_pa", sa.Float(), nullable=True),
        sa.Column("limit_value", sa.Float(), nullable=False),
        sa.Column("passed", sa.Boolean(), nullable=False),
        sa.Column("method", sa.String(), nullable=False),
        sa.Column("method_version", sa.String(), nullable=False),
        sa.ForeignKeyConstraint(
            ["module_id"],
            ["module.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("integrity_test", schema=None) as batch_op:
        batch_op.create_index(
            "ix_integrity_test_module_time", ["module_id", "activity_at"], unique=False
        )

    op.create_table(
        "module_use",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("module_id", sa.Integer(), nullable=False),
        sa.Column("activity_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("late", sa.Boolean(), nullable=False),
        sa.Column("note", sa.String(), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("product", sa.String(), nullable=False),
        sa.Column("lot", sa.String(), nullable=False),
        sa.Column("ended_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("override_reason", sa.String(), nullable=True),
        sa.ForeignKeyConstraint(
            ["module_id"],
            ["module.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("module_use", schema=None) as batch_op:
        batch_op.create_index(
            "ix_module_use_module_time", ["module_id", "activity_at"], unique=False
        )

    op.create_table(
        "storage",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("module_id", sa.Integer(), nullable=False),
        sa.Column("activity_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("late", sa.Boolean(), nullable=False),
        sa.Column("note", sa.String(), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("solution", sa.String(), nullable=False),
        sa.ForeignKeyConstraint(
            ["module_id"],
            ["module.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("storage", schema=None) as batch_op:
        batch_op.create_index("ix_storage_module_time", ["module_id", "activity_at"], unique=False)

    op.create_table(
        "water_flux_test",
        sa.Column("record_hash", sa.String(length=64), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("created_by", sa.String(length=64), nullable=False),
        sa.Column("voided_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("voided_by", sa.String(length=64), nullable=True),
        sa.Column("void_reason", sa.String(), nullable=True),
        sa.Column("module_id", sa.Integer(), nullable=False),
        sa.Column("activity_at", sa.DateTime(timezone=True), nullable=False),
        sa.Column("late", sa.Boolean(), nullable=False),
        sa.Column("note", sa.String(), nullable=True),
        sa.Column("id", sa.Integer(), nullable=False),
        sa.Column("stage", sa.String(length=16), nullable=False),
        sa.Column("water_grade", sa.String(), nullable=True),
        sa.Column("temperature_k", sa.Float(), nullable=False),
        sa.Column("reference_temperature_k", sa.Float(), nullable=False),
        sa.Column("points", sa.JSON(), nullable=False),
        sa.Column("tmp_pa", sa.Float(), nullable=False),
        sa.Column("flux_m_s", sa.Float(), nullable=False),
        sa.Column("nwp_m_s_pa", sa.Float(), nullable=False),
        sa.Column("intercept_m_s", sa.Float(), nullable=True),
        sa.Column("r_squared", sa.Float(), nullable=True),
        sa.Column("resistance_per_m", sa.Float(), nullable=False),
        sa.Column("baseline_test_id", sa.Integer(), nullable=True),
        sa.Column("recovery", sa.Float(), nullable=True),
        sa.Column("verdict", sa.String(length=16), nullable=True),
        sa.Column("method", sa.String(), nullable=False),
        sa.Column("method_version", sa.String(), nullable=False),
        sa.ForeignKeyConstraint(
            ["baseline_test_id"],
            ["water_flux_test.id"],
        ),
        sa.ForeignKeyConstraint(
            ["module_id"],
            ["module.id"],
        ),
        sa.PrimaryKeyConstraint("id"),
        sqlite_autoincrement=True,
    )
    with op.batch_alter_table("water_flux_test", schema=None) as batch_op:
        batch_op.create_index(
            "ix_water_flux_test_module_stage_time",
            ["module_id", "stage", "activity_at"],
            unique=False,
        )

    op.bulk_insert(
        sa.table("audit_head", sa.column("id"), sa.column("seq"), sa.column("hash")),
        [{"id": 1, "seq": 0, "hash": "0" * 64}],
    )
    _append_only_triggers()


APPEND_ONLY = "audit_event is append-only: its rows cannot be changed or deleted"


def _append_only_triggers() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute(
            "CREATE FUNCTION audit_event_append_only() RETURNS trigger LANGUAGE plpgsql AS "
            f"$$ BEGIN RAISE EXCEPTION '{APPEND_ONLY}'; END $$"
        )
        op.execute(
            "CREATE TRIGGER audit_event_no_change BEFORE UPDATE OR DELETE ON audit_event "
            "FOR EACH ROW EXECUTE FUNCTION audit_event_append_only()"
        )
        op.execute(
            "CREATE TRIGGER audit_event_no_truncate BEFORE TRUNCATE ON audit_event "
            "FOR EACH STATEMENT EXECUTE FUNCTION audit_event_append_only()"
        )
    else:
        for action in ("UPDATE", "DELETE"):
            op.execute(
                f"CREATE TRIGGER audit_event_no_{action.lower()} BEFORE {action} ON audit_event "
                f"BEGIN SELECT RAISE(ABORT, '{APPEND_ONLY}'); END"
            )


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute("DROP TRIGGER audit_event_no_truncate ON audit_event")
        op.execute("DROP TRIGGER audit_event_no_change ON audit_event")
        op.execute("DROP FUNCTION audit_event_append_only()")
    else:
        op.execute("DROP TRIGGER audit_event_no_update")
        op.execute("DROP TRIGGER audit_event_no_delete")
    with op.batch_alter_table("water_flux_test", schema=None) as batch_op:
        batch_op.drop_index("ix_water_flux_test_module_stage_time")

    op.drop_table("water_flux_test")
    with op.batch_alter_table("storage", schema=None) as batch_op:
        batch_op.drop_index("ix_storage_module_time")

    op.drop_table("storage")
    with op.batch_alter_table("module_use", schema=None) as batch_op:
        batch_op.drop_index("ix_module_use_module_time")

    op.drop_table("module_use")
    with op.batch_alter_table("integrity_test", schema=None) as batch_op:
        batch_op.drop_index("ix_integrity_test_module_time")

    op.drop_table("integrity_test")
    with op.batch_alter_table("hold", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_hold_module_id"))

    op.drop_table("hold")
    with op.batch_alter_table("cleaning", schema=None) as batch_op:
        batch_op.drop_index("ix_cleaning_module_time")

    op.drop_table("cleaning")
    op.drop_table("cleaning_procedure")
    with op.batch_alter_table("module", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_module_type_id"))

    op.drop_table("module")
    op.drop_table("user_account")
    op.drop_table("setting")
    op.drop_table("module_type")
    op.drop_table("audit_head")
    with op.batch_alter_table("audit_event", schema=None) as batch_op:
        batch_op.drop_index(batch_op.f("ix_audit_event_module_id"))
        batch_op.drop_index("ix_audit_event_entity")
        batch_op.drop_index(batch_op.f("ix_audit_event_at"))
        batch_op.drop_index(batch_op.f("ix_audit_event_actor"))

    op.drop_table("audit_event")
