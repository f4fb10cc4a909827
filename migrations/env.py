"""Alembic environment of fluxledger. `fluxledger init` runs it; so can `alembic` by hand."""

from __future__ import annotations

from alembic import context
from sqlmodel import SQLModel

from ledger.store.engine import connect, resolve_url
from ledger.store.registry import load_all

config = context.config
load_all()  # registers every table on SQLModel.metadata
target_metadata = SQLModel.metadata


def run() -> None:
    connection = config.attributes.get("connection")
    if connection is None:
        url = config.get_main_option("sqlalchemy.url") or resolve_url()
        with connect(url, create=True).connect() as conn:
            _migrate(conn)
    else:
        _migrate(connection)


def _migrate(connection: object) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        compare_type=True,
        render_as_batch=True,  # SQLite alters tables by copying them
    )
    with context.begin_transaction():
        context.run_migrations()


run()
