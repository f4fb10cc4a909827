"""Where the database is and how to connect: SQLite by default, PostgreSQL by URL (§8)."""

from __future__ import annotations

import os
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from sqlalchemy import Engine, create_engine, event
from sqlmodel import Session

from ledger.errors import InputError
from ledger.secrets import mask_secrets

ENV_URL = "FLUXLEDGER_DATABASE_URL"
DEFAULT_PATH = "fluxledger.db"
BUSY_TIMEOUT_MS = 10_000
BEGIN_ATTEMPTS = 3  # BEGIN IMMEDIATE asked this often, each waiting up to BUSY_TIMEOUT_MS
# The URL schemes fluxledger runs on (psycopg 3 is the one PostgreSQL driver it ships with).
SCHEMES = ("sqlite", "sqlite+pysqlite", "postgresql", "postgresql+psycopg")
SUPPORTED = "a file path, sqlite:///PATH, or postgresql://USER@HOST/DB"
# A new database file is readable by its owner only: it holds names and password hashes.
FILE_MODE = 0o600


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
    """The URL with any password (userinfo or parameter) replaced by ***, for messages."""
    return mask_secrets(url)


def check_scheme(url: str) -> str:
    """``url`` if fluxledger can run on its scheme; else InputError naming --db and $ENV."""
    scheme = url.split("://", 1)[0].lower() if "://" in url else ""
    if scheme not in SCHEMES:
        shown = masked(url)
        raise InputError(
            f"--db / ${ENV_URL}: {shown!r} is not a database URL fluxledger can use: the "
            f"scheme {scheme!r} is not supported; supported schemes: sqlite, postgresql "
            f"({SUPPORTED})",
            field="db",
            value=shown,
            expected=SUPPORTED,
        )
    return url


def unique_violation(exc: Exception, table: str, column: str) -> bool:
    """True when the IntegrityError ``exc`` broke the unique constraint on ``table.column``
    (psycopg: SQLSTATE 23505 naming the key; sqlite3: "UNIQUE constraint failed: t.c")."""
    orig = getattr(exc, "orig", None)
    sqlstate = getattr(orig, "sqlstate", None)
    if sqlstate is not None:
        diag = getattr(orig, "diag", None)
        detail = f"{getattr(diag, 'message_detail', '')} {getattr(diag, 'constraint_name', '')}"
        return bool(sqlstate == "23505" and column in detail)
    return f"UNIQUE constraint failed: {table}.{column}" in str(orig)


def _create_private(path: Path) -> None:
    """Create an empty SQLite file readable by its owner only (SQLite gives its -wal and -shm
    files the database file's permissions)."""
    try:
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, FILE_MODE)
    except FileExistsError:
        return
    os.close(fd)
    os.chmod(path, FILE_MODE)  # whatever the umask took away, nothing more is granted


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
        # SQLite's busy handler is not fair: under many writers one can wait out the whole
        # timeout (tests/reliability/test_concurrency.py saw it). Nothing has run in the
        # transaction yet, so asking again is safe; after BEGIN_ATTEMPTS the error stands.
        import sqlite3

        raw = connection.connection.driver_connection
        for _ in range(BEGIN_ATTEMPTS - 1):
            try:
                raw.execute("BEGIN IMMEDIATE")
                return
            except sqlite3.OperationalError as exc:
                if "locked" not in str(exc) and "busy" not in str(exc):
                    break  # raised below, wrapped as SQLAlchemy wraps driver errors
        connection.exec_driver_sql("BEGIN IMMEDIATE")


def connect(url: str, *, create: bool = False) -> Engine:
    """An engine for ``url``. An SQLite file must exist unless ``create`` (init) is asked."""
    check_scheme(url)
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
        _create_private(path)
    from sqlalchemy.exc import ArgumentError, NoSuchModuleError

    try:
        engine = create_engine(url)
    except (ArgumentError, NoSuchModuleError, ImportError, ValueError) as exc:
        shown = masked(url)
        raise InputError(
            f"--db / ${ENV_URL}: {shown!r} is not a database URL fluxledger can use "
            f"({mask_secrets(str(exc))})",
            field="db",
            value=shown,
            expected=SUPPORTED,
        ) from None
    if engine.dialect.name == "sqlite":
        _sqlite_setup(engine)
    return engine


def shown_url(engine: Engine) -> str:
    """The engine's URL as messages show it: password and secret parameters masked."""
    return masked(engine.url.render_as_string(hide_password=True))


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
