"""`fluxledger template ...` and `fluxledger care cycle-procedure ...`: versions of controlled
documents (master-record templates, cleaning-cycle procedures). An engineer submits a file as
a draft, QA (another person) approves it from a stated time or retires it; list and history
show each version, who wrote and approved it, and from when it is in force.

Both command groups are made by :func:`controlled_app` over a service module with the same
functions (``ledger.runs.versions``, ``ledger.logbook.cycles``)."""

from __future__ import annotations

import importlib
from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, READ_USER_OPTION, USER_OPTION, read, write

VERSION = typer.Argument(..., help="The version, as the file's version key names it.")


def controlled_app(
    word: str, command: str, key: str, example: str, service: str, used: str
) -> typer.Typer:
    """The submit/approve/retire/list/history commands for one kind of controlled document:
    ``word`` names it in messages ("template"), ``command`` is its command group
    ("template", "care cycle-procedure"), ``key`` its JSON key for the ID, ``service`` the
    module with submit/approve/retire/catalogue/history, ``used`` what is made under it."""
    app = typer.Typer(
        help=f"{word.capitalize()} versions: submit a draft, approve it from a time (QA), "
        "retire, list, history.",
        no_args_is_help=True,
    )
    doc_id = typer.Argument(..., metavar=key.upper(), help=f"The {word}'s ID, e.g. {example}.")
    columns = [(key, word), *COLUMNS[1:]]

    def svc() -> Any:
        return importlib.import_module(service)

    def table(title: str, lines: list[Any]) -> Any:
        from ledger.cli.output import Table

        return Table(title, columns, [_row(line) for line in lines],
                     json_only=frozenset({"sha256"}))  # fmt: skip

    def show(name: str, found: Any, fields: tuple[str, ...], **more: Any) -> None:
        """One version as JSON: its identity and state, then ``fields``, then ``more``."""
        from ledger.cli.output import Report

        report = Report(f"{command} {name}")
        s = report.section("Version")
        for field in ("template_id", "version", "state", *fields):
            s.add(key if field == "template_id" else field, getattr(found, field))
        for field, value in more.items():
            s.add(field, value)
        report.print(as_json=True)

    @app.command("submit")
    @guarded
    def submit(
        file: str = typer.Argument(..., help=f"The {word} file (TOML) to submit as a draft."),
        user: str = USER_OPTION,
        password_stdin: bool = PASSWORD_STDIN,
        db: str | None = DB_OPTION,
        as_json: bool = JSON_OPTION,
    ) -> None:
        """Submit a file as a draft version (engineer). QA approves it next; the same file
        again changes nothing."""
        from ledger.entries.templates import submit as entry

        e = entry(locals())
        found, created = write(db, user, password_stdin,
                               lambda s, a: svc().submit(s, a, e.raw, e.source))  # fmt: skip
        if not as_json:
            if created:
                typer.echo(f"{word} {found.template_id} version {found.version} submitted as a "
                           f"draft by {found.authored_by} (SHA-256 {found.sha256}); QA approves "
                           f"it with `fluxledger {command} approve`")  # fmt: skip
            else:
                typer.echo(f"{word} {found.template_id} version {found.version} is submitted "
                           f"already ({found.state}); nothing changed")  # fmt: skip
            return
        show("submit", found, ("sha256", "authored_by"), created=created)

    @app.command("approve")
    @guarded
    def approve(
        template: str = doc_id,
        version: str = VERSION,
        effective_from: str = typer.Option(
            ...,
            "--effective-from",
            help=f"When the version takes effect: `now`, or ISO 8601 with offset ({used} "
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

        e = entry(locals())
        found = write(
            db, user, password_stdin,
            lambda s, a: svc().approve(s, a, e.template, e.version, e.effective_from,
                                       e.late_reason),
        )  # fmt: skip
        if not as_json:
            at = found.effective_from
            when = at.isoformat(timespec="seconds") if at else "now"
            typer.echo(f"{word} {found.template_id} version {found.version} approved by "
                       f"{found.approved_by}, effective from {when}")  # fmt: skip
            return
        show("approve", found, ("approved_by", "approved_at", "effective_from"))

    @app.command("retire")
    @guarded
    def retire(
        template: str = doc_id,
        version: str = VERSION,
        reason: str = typer.Option(..., "--reason", help="Why the version is retired (recorded)."),
        user: str = USER_OPTION,
        password_stdin: bool = PASSWORD_STDIN,
        db: str | None = DB_OPTION,
        as_json: bool = JSON_OPTION,
    ) -> None:
        """Retire a version (QA): nothing new is made under it from now on."""
        from ledger.entries.templates import retire as entry

        e = entry(locals())
        found = write(db, user, password_stdin,
                      lambda s, a: svc().retire(s, a, e.template, e.version, e.reason))  # fmt: skip
        if not as_json:
            typer.echo(f"{word} {found.template_id} version {found.version} retired by "
                       f"{found.retired_by}: {found.retire_reason}")  # fmt: skip
            return
        show("retire", found, ("retired_by", "retired_at"))

    @app.command("list")
    @guarded
    def list_(
        user: str | None = READ_USER_OPTION,
        password_stdin: bool = PASSWORD_STDIN,
        db: str | None = DB_OPTION,
        as_json: bool = JSON_OPTION,
    ) -> None:
        """Every submitted version of every document of this kind, with its status now."""
        from ledger.cli.output import Report

        report = Report(f"{command} list")
        lines = read(db, lambda s: svc().catalogue(s), user, password_stdin)
        report.tables.append(table(f"{word.capitalize()} versions", lines))
        report.print(as_json)

    @app.command("history")
    @guarded
    def history(
        template: str = doc_id,
        user: str | None = READ_USER_OPTION,
        password_stdin: bool = PASSWORD_STDIN,
        db: str | None = DB_OPTION,
        as_json: bool = JSON_OPTION,
    ) -> None:
        """One document's versions, oldest first: who wrote and approved each, from when each
        was in force, and who retired it and why."""
        from ledger.cli.output import Report

        lines = read(db, lambda s: svc().history(s, template), user, password_stdin)
        report = Report(f"{command} history")
        report.tables.append(table(f"Versions of {template}", lines))
        report.print(as_json)

    return app


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


app = controlled_app("template", "template", "template", "QB-MR-LNP-101", "ledger.runs.versions",
                     "runs planned")  # fmt: skip
