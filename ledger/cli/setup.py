"""`fluxledger init`: create or upgrade a database, and its first administrator."""

from __future__ import annotations

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, read_secret


@guarded
def init(
    db: str | None = DB_OPTION,
    admin: str | None = typer.Option(
        None, "--admin", help="User ID of the first administrator (new database only)."
    ),
    name: str | None = typer.Option(None, "--name", help="The administrator's printed name."),
    password_stdin: bool = PASSWORD_STDIN,
    as_json: bool = JSON_OPTION,
) -> None:
    """Create a database, or upgrade one to this software's schema.

    A new database gets its first user, an administrator who manages users and settings and
    cannot sign production records.
    """
    from ledger.cli.output import Report
    from ledger.cli.session import open_ledger
    from ledger.logbook.setup import has_users, initialize
    from ledger.logbook.workspace import database_label, stored_revision

    engine = open_ledger(db, create=True)
    new = stored_revision(engine) is None or not has_users(engine)
    password = None
    if new and admin:
        password = read_secret(f"Password for {admin}", from_stdin=password_stdin, confirm=True)
    result = initialize(engine, admin, name, password)
    report = Report("init")
    s = report.section("Database")
    s.add("database", database_label(engine))
    s.add("revision_before", result.before or "(none: new database)", "revision before")
    s.add("revision", result.after)
    if result.admin:
        s.add("administrator", result.admin)
    if result.note:
        s.add("note", result.note)
    if result.key:
        s.add("site_key", result.key, "site key")
    report.print(as_json)
