"""Flow-type integrity tests: diffusion (forward flow) and water intrusion.

A module type may state a diffusion limit and a water-intrusion limit, each a maximum flow
(m³/s) at a gauge test pressure (Pa); all four columns are nullable (old types have none).
An integrity test of kind ``diffusion`` keeps its flow in ``gas_flow_m3_s``; one of kind
``water_intrusion`` in the new ``intrusion_flow_m3_s``.

Revision ID: 0012
Revises: 0011
Created: 2026-12-04 02:10:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0012"
down_revision = "0011"
branch_labels = None
depends_on = None

TYPE_LIMITS = (
    "diffusion_max_flow_m3_s",
    "diffusion_test_pressure_pa",
    "intrusion_max_flow_m3_s",
    "intrusion_test_pressure_pa",
)


def upgrade() -> None:
    with op.batch_alter_table("module_type", schema=None) as batch_op:
        for name in TYPE_LIMITS:
            batch_op.add_column(sa.Column(name, sa.Float(), nullable=True))
    with op.batch_alter_table("integrity_test", schema=None) as batch_op:
        batch_op.add_column(sa.Column("intrusion_flow_m3_s", sa.Float(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("integrity_test", schema=None) as batch_op:
        batch_op.drop_column("intrusion_flow_m3_s")
    with op.batch_alter_table("module_type", schema=None) as batch_op:
        for name in reversed(TYPE_LIMITS):
            batch_op.drop_column(name)
