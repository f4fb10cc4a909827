"""Schema revisions: create or upgrade with Alembic (init), refuse an old or unknown schema."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from sqlalchemy import Engine, inspect, text

from ledger.errors import InputError, RefusedError
from ledger.secrets import mask_secrets
from ledger.store.engine import shown_url

# The Alembic head this software expects; tests assert it equals the newest revision file.
REVISION = "0015"


def migrations_dir() -> Path:
    """The Alembic scripts: migrations/ of a checkout, or ledger/migrations when installed."""
    import ledger

    here = Path(ledger.__file__).resolve().parent
    for candidate in (here / "migrations", here.parent / "migrations"):
        if (candidate / "env.py").exists():
            return candidate
    raise RuntimeError("the Alembic migrations are not installed with this package")


def alembic_config(engine: Engine, connection: Any = None) -> Any:
    """An Alembic Config for ``engine`` (no alembic.ini needed)."""
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(migrations_dir()))
    url = engine.url.render_as_string(hide_password=False)
    cfg.set_main_option("sqlalchemy.url", url.replace("%", "%%"))  # configparser escaping
    cfg.attributes["connection"] = connection
    return cfg


def stored_revision(engine: Engine) -> str | None:
    """The database's Alembic revision, or None when it has no fluxledger schema.

    Every command asks this first, so a database that cannot be opened (server down, wrong
    credentials, a file that is not a database) is reported here as an InputError on --db.
    """
    from sqlalchemy.exc import DatabaseError, InterfaceError

    try:
        with engine.connect() as conn:
            if not inspect(conn).has_table("alembic_version"):
                return None
            row = conn.execute(text("SELECT version_num FROM alembic_version")).first()
            return None if row is None else str(row[0])
    except (DatabaseError, InterfaceError) as exc:
        where = shown_url(engine)
        reason = str(exc.orig).strip().splitlines()[0] if exc.orig else type(exc).__name__
        reason = mask_secrets(reason)
        raise InputError(
            f"cannot open the database {where}: {reason}",
            field="db",
            value=where,
            expected="a reachable fluxledger database (an SQLite file or a PostgreSQL server)",
        ) from None


def require_current(engine: Engine) -> None:
    """Refuse to work on a database whose schema is missing, older or unknown."""
    found = stored_revision(engine)
    where = shown_url(engine)
    if found == REVISION:
        return
    if found is None:
        raise RefusedError(
            f"{where} holds no fluxledger schema; run `fluxledger init` first",
            field="db",
            value=where,
            expected="a database created by `fluxledger init`",
        )
    if found < REVISION and found.isdigit():
        raise RefusedError(
            f"{where} has schema revision {found}, older than this software's {REVISION}; "
            "run `fluxledger init` to upgrade it",
            field="db",
            value=found,
            expected=f"revision {REVISION}",
        )
    raise RefusedError(
        f"{where} has schema revision {found}, which this software does not know (it expects "
        f"{REVISION}); was it written by a newer fluxledger? Use that version",
        field="db",
        value=found,
        expected=f"revision {REVISION}",
    )


def upgrade(engine: Engine) -> tuple[str | None, str]:
    """Create or upgrade the schema to REVISION; return (revision before, revision after)."""
    from alembic import command

    before = stored_revision(engine)
    if before is not None and before != REVISION and not (before.isdigit() and before < REVISION):
        require_current(engine)  # unknown or newer: refuse with the message above
    with engine.begin() as conn:
        command.upgrade(alembic_config(engine, conn), "head")
    return before, REVISION
