"""Where the database is and how to connect: SQLite by default, PostgreSQL by URL (§8)."""

from __future__ import annotations

import os
import re
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from sqlalchemy import Engine, create_engine, event
from sqlmodel import Session

from ledger.errors import InputError

ENV_URL = "FLUXLEDGER_DATABASE_URL"
DEFAULT_PATH = "fluxledger.db"
BUSY_TIMEOUT_MS = 10_000


def resolve_url(db: str | None = None) -> str:
    """``--db`` (path or SQLAlchemy URL), else $FLUXLEDGER_DATABASE_URL, else ./fluxledger.db."""
    given = db if db else os.environ.get(ENV_URL) or DEFAULT_PATH
    if "://" not in given:
        return f"sqlite:///{Path(given).expanduser()}"
    if given.startswith(("postgresql://", "postgres://")):
        # psycopg 3 is our PostgreSQL driver; a plain postgresql:// URL means it too.
        return "postgresql+psycopg://" + given.split("://", 1)[1]
    return given


def masked(url: str) -> str:
    """The URL with any password replaced by ***, for messages."""
    return re.sub(r"(://[^/:@]*:)[^@/]*@", r"\1***@", url)


def sqlite_path(url: str) -> Path | None:
    """The file of an SQLite URL (None for other backends or an in-memory database)."""
    if not url.startswith("sqlite"):
        return None
    rest = url.split(":///", 1)[1] if ":///" in url else ""
    return Path(rest.split("?", 1)[0]) if rest and rest != ":memory:" else None


def _sqlite_setup(engine: Engine) -> None:
    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_connection: Any, _record: Any) -> None:
        # Let SQLAlchemy, not the sqlite3 module, decide when transactions begin.
        dbapi_connection.isolation_level = None
        cursor = dbapi_connection.cursor()
        cursor.execute("PRAGMA foreign_keys = ON")
        cursor.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
        cursor.execute("PRAGMA journal_mode = WAL")
        cursor.close()

    @event.listens_for(engine, "begin")
    def _on_begin(connection: Any) -> None:
        # IMMEDIATE takes the write lock up front, so two writers wait for each other
        # (busy_timeout) instead of failing when a read transaction tries to write.
        connection.exec_driver_sql("BEGIN IMMEDIATE")


def connect(url: str, *, create: bool = False) -> Engine:
    """An engine for ``url``. An SQLite file must exist unless ``create`` (init) is asked."""
    path = sqlite_path(url)
    if path is not None and not create and not path.exists():
        raise InputError(
            f"no fluxledger database at {path}; run `fluxledger init` to create one, or give "
            f"--db PATH or ${ENV_URL}",
            field="db",
            value=str(path),
            expected="an existing database file",
        )
    if path is not None and create:
        path.parent.mkdir(parents=True, exist_ok=True)
    from sqlalchemy.exc import ArgumentError, NoSuchModuleError

    try:
        engine = create_engine(url)
    except (ArgumentError, NoSuchModuleError) as exc:
        raise InputError(
            f"{masked(url)!r} is not a database URL fluxledger can use ({exc})",
            field="db",
            value=masked(url),
            expected="a file path, sqlite:///PATH or postgresql://USER@HOST/DB",
        ) from None
    if engine.dialect.name == "sqlite":
        _sqlite_setup(engine)
    return engine


@contextmanager
def transaction(engine: Engine) -> Iterator[Session]:
    """One unit of work: commit on success, roll back everything on any error."""
    with Session(engine, expire_on_commit=False) as session:
        try:
            yield session
            session.commit()
        except BaseException:
            session.rollback()
            raise
