"""Alembic environment of fluxledger. `fluxledger init` runs it; so can `alembic` by hand."""

from __future__ import annotations

from alembic import context
from sqlmodel import SQLModel

import ledger.store.tables  # noqa: F401  (registers the tables on SQLModel.metadata)
from ledger.store.engine import connect, resolve_url

config = context.config
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
