"""What logbook commands share: --db, the acting user and password, one transaction per write."""

from __future__ import annotations

import sys
from collections.abc import Callable
from contextvars import ContextVar
from typing import Any, TypeVar

import typer

from ledger.errors import InputError

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


def open_ledger(db: str | None, *, create: bool = False) -> Any:
    """The engine of an existing database at the current schema revision."""
    from ledger.logbook.workspace import open_ledger as open_db

    return open_db(db, create=create)


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


def write(
    db: str | None,
    login: str,
    password_stdin: bool,
    work: Callable[[Any, Any], T],
) -> T:
    """Authenticate (password prompted, or read with --password-stdin), then run ``work`` as
    one transaction (all or nothing)."""
    from ledger.logbook.workspace import write as run

    return run(db, login, lambda: read_secret("Password", from_stdin=password_stdin), work)


def change_own_password(db: str | None, login: str, password_stdin: bool) -> Any:
    """``login`` signs in with their current password (a temporary one too) and chooses a new
    one (prompted twice, or the next stdin line with --password-stdin)."""
    from ledger.logbook.workspace import change_own_password as run

    return run(
        db,
        login,
        lambda: read_secret("Password", from_stdin=password_stdin),
        lambda: read_secret(f"New password for {login}", from_stdin=password_stdin, confirm=True),
    )


def acting_user(engine: Any, login: str, password_stdin: bool) -> Any:
    """The authenticated user (password prompted, or read with --password-stdin)."""
    from ledger.logbook.workspace import sign_in

    return sign_in(engine, login, read_secret("Password", from_stdin=password_stdin))


READ_USER_OPTION = typer.Option(
    None, "--user", help="Your user ID, where the site lets only signed-in users read."
)


def read(
    db: str | None,
    work: Callable[[Any], T],
    user: str | None = None,
    password_stdin: bool = False,
) -> T:
    """Run ``work`` on the database; with ``user`` (or, for a command without --user, the
    FLUXLEDGER_USER environment variable), signed in: the site may require it."""
    import os

    from ledger.logbook.workspace import read as run

    if user is None:
        user = os.environ.get("FLUXLEDGER_USER") or None
    if user is None:
        return run(db, work)
    return run(db, work, user, lambda: read_secret("Password", from_stdin=password_stdin))
