"""`fluxledger audit verify | show`: tamper evidence and review of the audit trail."""

from __future__ import annotations

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, read

app = typer.Typer(help="Check and review the audit trail.", no_args_is_help=True)


@app.command("verify")
@guarded
def verify(db: str | None = DB_OPTION, as_json: bool = JSON_OPTION) -> None:
    """Recompute every record hash and the event chain; exit 1 naming each bad row."""
    from ledger.cli.output import Report, Table
    from ledger.logbook.history import verify_audit as run

    result = read(db, run)
    report = Report("audit verify", verdict="intact" if result.ok else "PROBLEMS FOUND")
    s = report.section("Checked")
    s.add("events", result.events)
    s.add("records", result.records)
    s.add("problems", len(result.problems))
    if result.problems:
        table = Table("Problems", [("entity", "table"), ("key", "row"), ("what", "what")])
        for p in result.problems:
            table.rows.append([p.entity, p.key, p.what])
        report.tables.append(table)
    report.print(as_json)
    if not result.ok:
        raise typer.Exit(1)


@app.command("show")
@guarded
def show(
    entity: str | None = typer.Option(None, "--entity", help="e.g. module, water_flux_test."),
    module: str | None = typer.Option(None, "--module", help="Events about this module serial."),
    user: str | None = typer.Option(None, "--by", help="Events by this user ID."),
    since: str | None = typer.Option(None, "--since", help="From this time (ISO 8601, offset)."),
    until: str | None = typer.Option(None, "--until", help="Up to this time."),
    last: int | None = typer.Option(None, "--last", help="Only the last N matching events."),
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """List audit events: who, when (UTC), what, old and new value, why."""
    from ledger.cli.output import Report, Table
    from ledger.entries.uses import audit_filter
    from ledger.logbook.history import audit_events

    filters = audit_filter(locals())
    events = read(db, lambda s: audit_events(s, **filters))  # type: ignore[arg-type]
    if as_json:
        report = Report("audit show")
        table = Table("Events", [(k, k) for k in EVENT_FIELDS])
        table.rows = [[getattr(e, k) for k in EVENT_FIELDS] for e in events]
        report.tables.append(table)
        report.print(as_json=True)
        return
    # An event has too many fields for one table row on a terminal: one block per event.
    for e in events:
        module = f" (module ID {e.module_id})" if e.module_id is not None else ""
        typer.echo(
            f"#{e.seq}  {e.at.isoformat(timespec='seconds')}  {e.actor}  {e.action} "
            f"{e.entity} {e.entity_id}{module}"
        )
        if e.field is not None:
            typer.echo(f"    {e.field}: {e.old_value} -> {e.new_value}")
        elif e.new_value is not None:
            typer.echo(f"    values: {e.new_value}")
        if e.reason:
            typer.echo(f"    reason: {e.reason}")
    typer.echo(f"{len(events)} events")


EVENT_FIELDS = (
    "seq",
    "at",
    "actor",
    "action",
    "entity",
    "entity_id",
    "module_id",
    "field",
    "old_value",
    "new_value",
    "reason",
    "record_hash",
    "prev_hash",
    "hash",
)
