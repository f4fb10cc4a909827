"""The equipment revision (0005): a database at 0004 gains the skid tables on `init`, and a
downgrade removes them again. On SQLite and (in CI) PostgreSQL."""

from __future__ import annotations

from sqlalchemy import inspect

from ledger.store import schema
from ledger.store.engine import connect, resolve_url

SKID_TABLES = {"skid", "skid_instrument", "skid_mapping"}


def _at(db_url: str, revision: str):  # type: ignore[no-untyped-def]
    from alembic import command

    engine = connect(resolve_url(db_url), create=True)
    with engine.begin() as conn:
        command.upgrade(schema.alembic_config(engine, conn), revision)
    return engine


def test_a_0004_database_gains_the_skid_tables(db_url: str) -> None:
    engine = _at(db_url, "0004")
    assert not SKID_TABLES & set(inspect(engine).get_table_names())
    assert schema.upgrade(engine) == ("0004", schema.REVISION)
    assert set(inspect(engine).get_table_names()) >= SKID_TABLES
    columns = {c["name"] for c in inspect(engine).get_columns("skid_instrument")}
    assert {"tag", "measures", "calibration_due", "voided_at"} <= columns


def test_the_equipment_revision_downgrades_cleanly(db_url: str) -> None:
    from alembic import command

    engine = _at(db_url, "0005")
    with engine.begin() as conn:
        command.downgrade(schema.alembic_config(engine, conn), "0004")
    assert not SKID_TABLES & set(inspect(engine).get_table_names())
    assert schema.stored_revision(engine) == "0004"
