"""`fluxledger user ...`: accounts, roles and the site's account settings (administrators),
and break-glass recovery of an administrator (someone with access to the database host)."""

from __future__ import annotations

from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import (
    DB_OPTION,
    PASSWORD_STDIN,
    READ_USER_OPTION,
    USER_OPTION,
    change_own_password,
    read_secret,
    write,
)

app = typer.Typer(
    help="User accounts: add, change password, change role, disable, list, site settings, "
    "administrator recovery.",
    no_args_is_help=True,
)


@app.command("add")
@guarded
def add(
    login: str = typer.Argument(..., help="The new user ID (never reused)."),
    name: str = typer.Option(..., "--name", help="Printed name, as on signatures."),
    role: str = typer.Option(..., "--role", help="operator, engineer, qa or admin."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
) -> None:
    """Add a user. With --password-stdin, line 1 is your password and line 2 the new one.

    The password you give is temporary: the new user changes it before recording anything."""
    from ledger.logbook.users import add_user

    def work(session: Any, actor: Any) -> Any:
        new = read_secret(f"Password for {login}", from_stdin=password_stdin, confirm=True)
        return add_user(session, actor, login, name, role, new)

    created = write(db, user, password_stdin, work)
    typer.echo(
        f"added user {created.login} ({created.role}), ID {created.id}; "
        + _temporary_note(created.login)
    )


@app.command("passwd")
@guarded
def passwd(
    login: str = typer.Argument(..., help="Whose password (yours, or anyone's for an admin)."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
) -> None:
    """Change a password. Your own: allowed with a temporary one, and no longer temporary.
    An administrator's reset of someone else's unlocks the account and is temporary: its owner
    changes it (`user passwd ID --user ID`) before recording or signing anything."""
    from ledger.logbook.users import set_password

    if login == user:
        change_own_password(db, user, password_stdin)
        typer.echo(f"password of {login} changed")
        return

    def work(session: Any, actor: Any) -> Any:
        new = read_secret(f"New password for {login}", from_stdin=password_stdin, confirm=True)
        return set_password(session, actor, login, new)

    changed = write(db, user, password_stdin, work)
    typer.echo(f"password of {changed.login} reset; {_temporary_note(changed.login)}")


def _temporary_note(login: str) -> str:
    from ledger.logbook.auth import own_password_command

    return (
        f"the password is temporary: {login} must change it with "
        f"`{own_password_command(login)}` before recording or signing anything"
    )


@app.command("role")
@guarded
def role(
    login: str = typer.Argument(..., help="Whose role (never your own)."),
    new_role: str = typer.Option(..., "--role", help="operator, engineer, qa or admin."),
    reason: str = typer.Option(..., "--reason", help="Why (kept in the audit trail)."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
) -> None:
    """Change someone else's role (administrators; audited with who granted it)."""
    from ledger.logbook.users import set_role

    done = write(db, user, password_stdin, lambda s, a: set_role(s, a, login, new_role, reason))
    typer.echo(f"user {done.login} now has the role {done.role}")


@app.command("reads-need-login")
@guarded
def reads_need_login(
    state: str = typer.Argument(..., help="on or off."),
    reason: str = typer.Option(..., "--reason", help="Why the setting changes."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
) -> None:
    """Whether every read command needs --user (audited). Default: on for PostgreSQL."""
    from ledger.logbook.users import set_reads_need_login

    row = write(db, user, password_stdin, lambda s, a: set_reads_need_login(s, a, state, reason))
    typer.echo(f"reads need a signed-in user: {row.value}")


@app.command("recover-admin")
@guarded
def recover_admin(
    login: str = typer.Argument(..., help="The administrator account to restore."),
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
) -> None:
    """Break-glass: restore an administrator, proving access to the database host.

    The first run writes a one-time code into a file beside the database (DB.recover, only
    its owner may read it). Type that code back (interactively at once, or with
    --password-stdin on a second run: line 1 the code, line 2 the new password). The account
    is unlocked and re-enabled with the new password; the audit trail records it.
    """
    from ledger.cli.session import open_ledger
    from ledger.logbook.recovery import pending_code, recover_admin, write_code

    engine = open_ledger(db)
    if not pending_code(engine):
        path = write_code(engine)
        typer.echo(f"wrote a one-time code to {path} (valid 15 minutes)")
        if password_stdin:
            typer.echo("run the command again with the code and the new password on stdin")
            return
    code = read_secret("Code from the recovery file", from_stdin=password_stdin)
    new = read_secret(f"New password for {login}", from_stdin=password_stdin, confirm=True)
    done = recover_admin(engine, login, code, new)
    typer.echo(f"administrator {done.login} restored: unlocked, enabled, new password set")


@app.command("disable")
@guarded
def disable(
    login: str = typer.Argument(..., help="The user ID to disable."),
    reason: str = typer.Option(..., "--reason", help="Why (kept in the audit trail)."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
) -> None:
    """Disable a user. The ID stays in the records and is never given to anyone else."""
    from ledger.logbook.users import disable_user

    done = write(db, user, password_stdin, lambda s, a: disable_user(s, a, login, reason))
    typer.echo(f"user {done.login} disabled")


@app.command("lockout")
@guarded
def lockout(
    max_failures: int = typer.Option(
        ..., "--max-failures", help="Wrong passwords in a row that lock an account."
    ),
    reason: str = typer.Option(..., "--reason", help="Why the policy changes."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
) -> None:
    """Set the lockout threshold (audited)."""
    from ledger.logbook.users import set_lockout

    write(db, user, password_stdin, lambda s, a: set_lockout(s, a, max_failures, reason))
    typer.echo(f"accounts now lock after {max_failures} wrong passwords in a row")


@app.command("list")
@guarded
def list_(
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
    user: str | None = READ_USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
) -> None:
    """List every user, active or not."""
    from ledger.cli.output import Report, Table
    from ledger.cli.session import read
    from ledger.logbook.users import account_state, list_users

    rows = read(db, list_users, user, password_stdin)
    report = Report("user list")
    table = Table(
        "Users",
        [
            ("id", "ID"),
            ("login", "user"),
            ("name", "name"),
            ("role", "role"),
            ("state", "state"),
            ("created_at", "created"),
        ],
    )
    for u in rows:
        table.rows.append(
            [u.id, u.login, u.full_name, u.role, account_state(u), u.created_at.isoformat()]
        )
    report.tables.append(table)
    report.print(as_json)
