"""Module-type limits under change control: a water-flux or integrity test names the limits
version it was judged under (``limits_version_id``, a ``template_version`` row of kind
type_limits; NULL: the limits as registered, as for every test before this revision).

Revision ID: 0015
Revises: 0014
Created: 2026-12-04 07:20:00
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0015"
down_revision = "0014"
branch_labels = None
depends_on = None

TABLES = ("water_flux_test", "integrity_test")


def upgrade() -> None:
    for table in TABLES:
        with op.batch_alter_table(table, schema=None) as batch_op:
            batch_op.add_column(sa.Column("limits_version_id", sa.Integer(), nullable=True))
            batch_op.create_foreign_key(
                f"fk_{table}_limits_version", "template_version", ["limits_version_id"], ["id"]
            )


def downgrade() -> None:
    for table in TABLES:
        with op.batch_alter_table(table, schema=None) as batch_op:
            batch_op.drop_constraint(f"fk_{table}_limits_version", type_="foreignkey")
            batch_op.drop_column("limits_version_id")
