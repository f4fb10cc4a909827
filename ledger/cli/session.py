"""What logbook commands share: --db, the acting user and password, one transaction per write."""

from __future__ import annotations

import sys
from collections.abc import Callable
from contextvars import ContextVar
from typing import TYPE_CHECKING, Any, TypeVar

import typer

from ledger.errors import InputError

if TYPE_CHECKING:
    from sqlalchemy import Engine
    from sqlmodel import Session

    from ledger.store.tables import UserAccount

T = TypeVar("T")

DB_OPTION = typer.Option(
    None,
    "--db",
    help="Database file or SQLAlchemy URL (default: $FLUXLEDGER_DATABASE_URL, else "
    "./fluxledger.db).",
    metavar="PATH|URL",
)
USER_OPTION = typer.Option(..., "--user", help="Your user ID; the password is asked for.")
PASSWORD_STDIN = typer.Option(
    False,
    "--password-stdin",
    help="Read the password from the first line of standard input (for scripts).",
)
ACTIVITY_TIME = typer.Option(
    None,
    "--activity-time",
    help="When it was done, for a late entry: ISO 8601 with offset, e.g. 2026-11-30T14:05+01:00. "
    "The entry is flagged late. Default: now.",
)


def open_ledger(db: str | None, *, create: bool = False) -> Engine:
    """The engine of an existing database at the current schema revision."""
    from ledger.store.engine import connect, resolve_url
    from ledger.store.schema import require_current

    engine = connect(resolve_url(db), create=create)
    if not create:
        require_current(engine)
    return engine


# Lines of stdin read for --password-stdin, per command invocation (reset by the root callback).
_stdin_lines: ContextVar[list[str] | None] = ContextVar("stdin_lines", default=None)


def read_secret(prompt: str, *, from_stdin: bool, confirm: bool = False) -> str:
    """A password: the next line of stdin with --password-stdin, else a hidden prompt."""
    if from_stdin:
        lines = _stdin_lines.get()
        if lines is None:
            lines = sys.stdin.read().splitlines()
            _stdin_lines.set(lines)
        if not lines:
            raise InputError(
                f"--password-stdin: standard input has no line left for the {prompt.lower()}",
                field="password_stdin",
                value="(empty)",
                expected="one password per line",
            )
        return lines.pop(0)
    return str(typer.prompt(prompt, hide_input=True, confirmation_prompt=confirm))


def reset_stdin() -> None:
    """Forget buffered stdin lines (each CLI invocation in tests starts afresh)."""
    _stdin_lines.set(None)


def acting_user(engine: Engine, login: str, password_stdin: bool) -> UserAccount:
    from ledger.logbook.auth import authenticate

    return authenticate(engine, login, read_secret("Password", from_stdin=password_stdin))


def write(
    db: str | None,
    login: str,
    password_stdin: bool,
    work: Callable[[Session, UserAccount], T],
) -> T:
    """Authenticate, then run ``work`` as one transaction (all or nothing)."""
    from ledger.store.engine import transaction

    engine = open_ledger(db)
    actor = acting_user(engine, login, password_stdin)
    with transaction(engine) as session:
        return work(session, actor)


def read(db: str | None, work: Callable[[Session], T]) -> T:
    from ledger.store.engine import transaction

    with transaction(open_ledger(db)) as session:
        return work(session)


def when(text: str | None, field: str = "activity_time") -> Any:
    if text is None:
        return None
    from ledger.logbook.times import parse_time

    return parse_time(text, field=field)
