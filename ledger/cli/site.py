"""`fluxledger site set | show`: the site's name and IANA time zone (audited settings)."""

from __future__ import annotations

from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, READ_USER_OPTION, USER_OPTION, write

app = typer.Typer(help="The site's name and time zone.", no_args_is_help=True)


@app.command("set")
@guarded
def set_(
    name: str = typer.Option(..., "--name", help="The site's name, printed on records."),
    time_zone: str = typer.Option(
        ..., "--time-zone", help="IANA time zone, e.g. Europe/Berlin; times show in it."
    ),
    reason: str = typer.Option(..., "--reason", help="Why it is set or changed (recorded)."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Set the site's name and time zone (an administrator; audited). Meant to be set once;
    a later change needs a reason and the audit trail keeps the old and new value."""
    from ledger.logbook.site import set_site

    site = write(db, user, password_stdin, lambda s, a: set_site(s, a, name, time_zone, reason))
    _print("site set", site, as_json)


@app.command("show")
@guarded
def show(
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
    user: str | None = READ_USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
) -> None:
    """The site's name and time zone; times are shown in UTC while no zone is set."""
    from ledger.cli.session import read
    from ledger.logbook.site import site_settings

    _print("site show", read(db, site_settings, user, password_stdin), as_json)


def _print(command: str, site: Any, as_json: bool) -> None:
    from ledger.cli.output import Report

    report = Report(command)
    s = report.section("Site")
    s.add("name", site.name)
    s.add("time_zone", site.time_zone, "time zone")
    if site.time_zone is None:
        report.notes.append("no time zone set: times are shown in UTC")
    report.print(as_json)


def _needs(reason: str | None, user: str | None) -> tuple[str, str]:
    """The reason and user of a ``--set``, refused without either."""
    if reason is None or user is None:
        from ledger.errors import InputError

        missing = "reason" if reason is None else "user"
        raise InputError(
            f"--set needs --{missing}",
            field=missing,
            value=None,
            expected="--user ADMIN and --reason WHY with --set",
        )
    return reason, user


@app.command("units")
@guarded
def units_(
    set_: list[str] | None = typer.Option(
        None,
        "--set",
        help="KIND=UNIT, e.g. pressure=psi; values nobody typed (computed ones, old records) "
        "show in it. Repeat for several kinds. Without --set: show the units set.",
    ),
    reason: str | None = typer.Option(None, "--reason", help="Why they are set (recorded)."),
    user: str | None = typer.Option(None, "--user", help="Your user ID."),
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Show the site's display unit of each kind, or set some (an administrator; audited)."""
    from ledger.cli.output import Report, Table
    from ledger.cli.session import read
    from ledger.logbook.site import display_unit_rows, display_units, set_display_units

    if set_:
        why, login = _needs(reason, user)
        chosen = write(db, login, password_stdin, lambda s, a: set_display_units(s, a, set_, why))
    else:
        chosen = read(db, display_units, user, password_stdin)
    report = Report("site units")
    table = Table("Display units", [("kind", "kind"), ("unit", "unit"), ("set", "set by site")])
    table.rows = [list(row) for row in display_unit_rows(chosen)]
    report.tables.append(table)
    report.notes.append("values typed by a person are shown as they were typed")
    report.print(as_json)


@app.command("agents")
@guarded
def agents(
    set_: list[str] | None = typer.Option(
        None,
        "--set",
        help="AGENT=CLASS, e.g. 'sodium percarbonate=oxidizer'; CLASS is caustic, acid, "
        "oxidizer, solvent or none. Repeat for several agents. Without --set: show the list.",
    ),
    reason: str | None = typer.Option(None, "--reason", help="Why they are set (recorded)."),
    user: str | None = typer.Option(None, "--user", help="Your user ID."),
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Show the agent list whose hazard classes choose the caution printed with a cleaning,
    a solution or a storage period, or add agents to it (an administrator; audited)."""
    from ledger.cli.output import Report, Table
    from ledger.cli.session import read
    from ledger.logbook.site import agent_hazards, set_agent_hazards
    from ledger.rules.hazards import agent_rows

    if set_:
        why, login = _needs(reason, user)
        chosen = write(db, login, password_stdin, lambda s, a: set_agent_hazards(s, a, set_, why))
    else:
        chosen = read(db, agent_hazards, user, password_stdin)
    report = Report("site agents")
    table = Table("Agents", [("agent", "agent"), ("hazard_class", "hazard class"),
                             ("source", "listed by")])  # fmt: skip
    table.rows = [list(row) for row in agent_rows(chosen)]
    report.tables.append(table)
    report.notes.append(
        "the class chooses the caution printed; the site's safety procedure governs"
    )
    report.print(as_json)
