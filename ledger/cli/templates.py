"""`fluxledger template ...`: versions of master-record templates. An engineer submits a file
as a draft, QA (another person) approves it from a stated time or retires it; list and
history show each version, who wrote and approved it, and from when it is in force."""

from __future__ import annotations

from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, READ_USER_OPTION, USER_OPTION, read, write

app = typer.Typer(
    help="Template versions: submit a draft, approve it from a time (QA), retire, list, history.",
    no_args_is_help=True,
)

TEMPLATE_ID = typer.Argument(..., help="The template's ID, e.g. QB-MR-LNP-101.")
VERSION = typer.Argument(..., help="The version, as the file's [template] version names it.")

COLUMNS = [("template", "template"), ("version", "version"), ("status", "status"),
           ("effective_from", "effective from"), ("authored_by", "written by"),
           ("submitted_at", "submitted at"), ("approved_by", "approved by"),
           ("approved_at", "approved at"), ("retired_by", "retired by"),
           ("retired_at", "retired at"), ("reason", "reason"), ("sha256", "SHA-256")]  # fmt: skip


def _row(line: Any) -> list[Any]:
    v = line.record
    reason = v.retire_reason or (f"entered late: {v.late_reason}" if v.late_reason else None)
    return [v.template_id, v.version, line.status, v.effective_from, v.authored_by, v.created_at,
            v.approved_by, v.approved_at, v.retired_by, v.retired_at, reason, v.sha256]  # fmt: skip


def _table(title: str, lines: list[Any]) -> Any:
    from ledger.cli.output import Table

    return Table(title, COLUMNS, [_row(line) for line in lines],
                 json_only=frozenset({"sha256"}))  # fmt: skip


@app.command("submit")
@guarded
def template_submit(
    file: str = typer.Argument(..., help="The template file (TOML) to submit as a draft."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Submit a template file as a draft version (engineer). QA approves it next; the same
    file again changes nothing."""
    from ledger.entries.templates import submit as entry
    from ledger.runs.versions import submit

    e = entry(locals())
    found, created = write(db, user, password_stdin, lambda s, a: submit(s, a, e.raw, e.source))
    if not as_json:
        if created:
            typer.echo(f"template {found.template_id} version {found.version} submitted as a "
                       f"draft by {found.authored_by} (SHA-256 {found.sha256}); QA approves it "
                       "with `fluxledger template approve`")  # fmt: skip
        else:
            typer.echo(f"template {found.template_id} version {found.version} is submitted "
                       f"already ({found.state}); nothing changed")  # fmt: skip
        return
    _print_version("template submit", found, ("sha256", "authored_by"), created=created)


@app.command("approve")
@guarded
def template_approve(
    template: str = TEMPLATE_ID,
    version: str = VERSION,
    effective_from: str = typer.Option(
        ...,
        "--effective-from",
        help="When the version takes effect: `now`, or ISO 8601 with offset (runs planned "
        "before it keep the version in force then).",
    ),
    late_reason: str | None = typer.Option(
        None,
        "--late-reason",
        help="Why an approval made earlier is entered now, when --effective-from is more "
        "than a few minutes past.",
    ),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Approve a draft version (QA, not its author; your password is your approval)."""
    from ledger.entries.templates import approve as entry
    from ledger.runs.versions import approve

    e = entry(locals())
    found = write(
        db, user, password_stdin,
        lambda s, a: approve(s, a, e.template, e.version, e.effective_from, e.late_reason),
    )  # fmt: skip
    if not as_json:
        when = found.effective_from.isoformat() if found.effective_from else "now"
        typer.echo(f"template {found.template_id} version {found.version} approved by "
                   f"{found.approved_by}, effective from {when}")  # fmt: skip
        return
    _print_version("template approve", found, ("approved_by", "approved_at", "effective_from"))


@app.command("retire")
@guarded
def template_retire(
    template: str = TEMPLATE_ID,
    version: str = VERSION,
    reason: str = typer.Option(..., "--reason", help="Why the version is retired (recorded)."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Retire a version (QA): no run is planned on it from now on."""
    from ledger.entries.templates import retire as entry
    from ledger.runs.versions import retire

    e = entry(locals())
    found = write(
        db, user, password_stdin, lambda s, a: retire(s, a, e.template, e.version, e.reason)
    )
    if not as_json:
        typer.echo(f"template {found.template_id} version {found.version} retired by "
                   f"{found.retired_by}: {found.retire_reason}")  # fmt: skip
        return
    _print_version("template retire", found, ("retired_by", "retired_at"))


@app.command("list")
@guarded
def template_list(
    user: str | None = READ_USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Every submitted version of every template, with its status now."""
    from ledger.cli.output import Report
    from ledger.runs.versions import catalogue

    report = Report("template list")
    report.tables.append(_table("Template versions", read(db, catalogue, user, password_stdin)))
    report.print(as_json)


@app.command("history")
@guarded
def template_history(
    template: str = TEMPLATE_ID,
    user: str | None = READ_USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """A template's versions, oldest first: who wrote and approved each, from when each was
    in force, and who retired it and why."""
    from ledger.cli.output import Report
    from ledger.runs.versions import history

    lines = read(db, lambda s: history(s, template), user, password_stdin)
    report = Report("template history")
    report.tables.append(_table(f"Versions of {template}", lines))
    report.print(as_json)


def _print_version(command: str, found: Any, fields: tuple[str, ...], **more: Any) -> None:
    """One version as JSON: its identity and state, then ``fields`` of it, then ``more``."""
    from ledger.cli.output import Report

    report = Report(command)
    s = report.section("Version")
    for name in ("template_id", "version", "state", *fields):
        s.add("template" if name == "template_id" else name, getattr(found, name))
    for name, value in more.items():
        s.add(name, value)
    report.print(as_json=True)
