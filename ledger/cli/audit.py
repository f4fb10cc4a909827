"""`fluxledger audit verify | show`: tamper evidence and review of the audit trail."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, read

app = typer.Typer(help="Check and review the audit trail.", no_args_is_help=True)


@app.command("verify")
@guarded
def verify(
    checkpoints: Path | None = typer.Option(
        None, "--checkpoints", help="Folder of signed checkpoints to check the chain against."
    ),
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Recompute every record hash and the keyed event chain, check the append-only triggers
    (and signed checkpoints); exit 1 naming each problem."""
    from ledger.cli.output import Report, Table
    from ledger.records.checkpoint import verify_with

    result, points = read(db, lambda s: verify_with(s, checkpoints))
    problems = list(result.problems) + (list(points.problems) if points else [])
    report = Report("audit verify", verdict="PROBLEMS FOUND" if problems else "intact")
    s = report.section("Checked")
    s.add("events", result.events)
    s.add("records", result.records)
    if points is not None:
        s.add("checkpoints", points.checked)
        s.add("covered_through_event", points.covered_seq, "covered through event")
        s.add("events_without_checkpoint", points.uncovered_events, "events without checkpoint")
    s.add("problems", len(problems))
    if problems:
        table = Table("Problems", [("entity", "table"), ("key", "row"), ("what", "what")])
        for p in problems:
            table.rows.append([p.entity, p.key, p.what])
        report.tables.append(table)
    if points is not None and points.notes:
        n = report.section("Notes")
        for i, note in enumerate(points.notes, start=1):
            n.add(f"note_{i}", note, f"note {i}")
    report.print(as_json)
    if problems:
        raise typer.Exit(1)


@app.command("checkpoint")
@guarded
def checkpoint(
    out: Path = typer.Option(..., "--out", help="Folder kept away from the database."),
    key: Path = typer.Option(
        ..., "--key", help="Signing key: PKCS#12 file, or a PEM key with --cert."
    ),
    cert: Path | None = typer.Option(None, "--cert", help="PEM certificate for a PEM --key."),
    key_password_stdin: bool = typer.Option(
        False, "--key-password-stdin", help="Read the key's password from standard input."
    ),
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Sign the chain head (event number, digest, time) with the site's signing key and write
    it as a new file in --out; `audit verify --checkpoints` checks the chain against it."""
    from ledger.cli.output import Report
    from ledger.cli.session import read_secret
    from ledger.logbook.workspace import database_label
    from ledger.records.checkpoint import make
    from ledger.records.checkpoint import read as read_point

    password = read_secret("Key password", from_stdin=key_password_stdin)

    def work(session: Any) -> Path:
        label = database_label(session.get_bind())
        return make(session, label, out, key_file=key, cert_file=cert,
                    passphrase=password.encode() or None)  # fmt: skip

    path = read(db, work)
    point, _ = read_point(path)
    report = Report("audit checkpoint")
    s = report.section("Checkpoint")
    s.add("file", str(path))
    if point is not None:
        s.add("event", point.seq)
        s.add("digest", point.hash)
        s.add("signed_at", point.made_at, "signed at")
        s.add("signer", point.signer)
    report.print(as_json)


@app.command("rekey")
@guarded
def rekey(
    user: str = typer.Option(..., "--user", help="Your user ID (an administrator)."),
    reason: str = typer.Option(..., "--reason", help="Why the key is rotated (recorded)."),
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Rotate the site key: a new key file, the chain re-linked under it, the old head recorded
    in an audited event, the old key file kept beside the new one."""
    from ledger.cli.output import Report
    from ledger.cli.session import read_secret
    from ledger.logbook.sitekeys import rotate

    done = rotate(db, user, lambda: read_secret("Password", from_stdin=password_stdin), reason)
    report = Report("audit rekey")
    s = report.section("Site key")
    s.add("event", done.event_seq)
    s.add("old_key_id", done.old_key_id, "old key ID")
    s.add("new_key_id", done.new_key_id, "new key ID")
    s.add("key_file", str(done.key_file), "key file")
    s.add("old_key_kept", str(done.kept), "old key kept at")
    s.add("checkpoints", "make a new checkpoint: earlier ones only match the head recorded now")
    report.print(as_json)


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
    """List audit events: who, when (the site's local time with its offset; UTC while no
    zone is set), what, old and new value, why."""
    import textwrap

    from ledger.cli.output import Report, Table
    from ledger.entries.uses import audit_filter
    from ledger.logbook.audit_trail import TrailEvent, TrailFilter, trail
    from ledger.logbook.site import site_zone
    from ledger.rules.localtime import local_text

    given: dict[str, Any] = audit_filter(locals())
    wanted = TrailFilter(
        user=given["user"], entity=given["entity"], serial=given["serial"],
        since=given["since"], until=given["until"],
    )  # fmt: skip

    def work(session: Any) -> tuple[list[TrailEvent], Any]:
        # The shared trail is newest first; this listing reads oldest first.
        page = trail(session, wanted, limit=given["limit"] or None)
        return list(reversed(page.events)), site_zone(session)

    events, zone = read(db, work)
    if as_json:
        report = Report("audit show")
        table = Table("Events", [(k, k) for k in EVENT_FIELDS])
        table.rows = [
            [e.at.astimezone(zone) if k == "at" else getattr(e, k) for k in EVENT_FIELDS]
            for e in events
        ]
        report.tables.append(table)
        report.print(as_json=True)
        return
    # An event has too many fields for one table row on a terminal: one block per event.
    for e in events:
        module = f" (module ID {e.module_id})" if e.module_id is not None else ""
        typer.echo(
            f"#{e.seq}  {local_text(e.at, zone)}  {e.actor}  {e.action} "
            f"{e.entity} {e.entity_id}{module}"
        )
        if e.field is not None or e.new_value is not None:
            for part in textwrap.wrap(e.change, width=96, break_long_words=False):
                typer.echo(f"    {part}")
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
