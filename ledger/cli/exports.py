"""`fluxledger export` and `fluxledger load-export`: the whole logbook as JSON, CSV or xlsx,
and a JSON export loaded into a new, empty database (audited)."""

from __future__ import annotations

from pathlib import Path

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, USER_OPTION, read_secret


@guarded
def export(
    kind: str = typer.Option(
        ...,
        "--format",
        help="json (the full copy, loadable, administrators only), csv (a folder of one file "
        "per table) or xlsx (one sheet per table). Headings carry SI units.",
    ),
    out: Path = typer.Option(..., "--out", help="The file (json, xlsx) or folder (csv) to write."),
    overwrite: bool = typer.Option(
        False, "--overwrite", help="Replace --out if it exists (otherwise it is refused)."
    ),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Export every table: modules, tests, cleanings, runs, records and the audit trail."""
    from ledger.cli.output import Report
    from ledger.logbook.exports import check_format, export_logbook
    from ledger.logbook.workspace import authenticated_read

    check_format(kind)  # before the password is asked for
    done = authenticated_read(
        db,
        user,
        lambda: read_secret("Password", from_stdin=password_stdin),
        lambda s, actor: export_logbook(s, actor, kind, out, overwrite=overwrite),
    )
    report = Report("export")
    s = report.section("Export")
    s.add("out", str(done.path))
    s.add("format", done.kind)
    s.add("tables", len(done.rows))
    s.add("rows", sum(done.rows.values()))
    report.print(as_json)


@guarded
def load_export(
    file: Path = typer.Argument(
        ..., metavar="FILE", help="A JSON export (`export --format json`)."
    ),
    user: str = typer.Option(
        ..., "--user", help="An administrator of the exported logbook; the password is asked for."
    ),
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Load a JSON export into a new, empty database (--db) in one transaction, and record the
    import in its audit trail. The export's site key must be configured for --db."""
    from ledger.cli.output import Report
    from ledger.logbook.exports import load_export as load

    done = load(db, file, user, lambda: read_secret("Password", from_stdin=password_stdin))
    report = Report("load-export")
    s = report.section("Loaded")
    s.add("file", str(done.path))
    s.add("sha256", done.sha256, "SHA-256")
    s.add("exported_at", done.exported_at, "exported at")
    s.add("tables", len(done.rows))
    s.add("rows", sum(done.rows.values()))
    s.add("import_event", done.event_seq, "import audit event")
    report.print(as_json)
