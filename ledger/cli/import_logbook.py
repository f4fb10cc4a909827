"""`fluxledger import-logbook FILE --mapping M`: back-enter an old logbook sheet (CSV or .xlsx).

All or nothing by default: one rejected row writes nothing (exit 2) and every rejected row is
listed as "row N: field: reason". With --skip-rejected the accepted rows are written and the
rejected ones listed (exit 1: the import is incomplete). A mapping or sheet that cannot be used
at all is exit 2 before anything is read into the database.
"""

from __future__ import annotations

import json
import sys
from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, USER_OPTION, write


def _line(r: Any) -> str:
    return f"row {r.row}: {r.field}: {r.message}"


@guarded
def import_logbook(
    file: str = typer.Argument(..., help="The sheet: a CSV file (UTF-8) or an .xlsx workbook."),
    mapping: str = typer.Option(
        ...,
        "--mapping",
        help="TOML or JSON file: the record kind and the column (and unit) of "
        'each field, e.g. feed = { column = "Feed", unit = "psi" }.',
    ),
    skip_rejected: bool = typer.Option(
        False,
        "--skip-rejected",
        help="Write the accepted rows even if some are rejected (default: none are written).",
    ),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Import an old logbook's water-flux or pressure-decay tests, one per row, each checked
    as the typed test would be, with their audit events."""
    from ledger.entries.logbook_mapping import load_mapping, read_logbook
    from ledger.logbook.import_logbook import import_rows

    sheet = read_logbook(load_mapping(mapping), file)
    show_bar = sys.stdout.isatty() and not as_json

    def work(s: Any, a: Any) -> Any:
        if not show_bar:
            return import_rows(s, a, sheet, keep_valid=skip_rejected)
        with typer.progressbar(length=2 * len(sheet.rows), label="importing") as bar:
            return import_rows(s, a, sheet, keep_valid=skip_rejected, progress=bar.update)

    result = write(db, user, password_stdin, work)
    if as_json:
        typer.echo(json.dumps({
            "kind": result.kind, "source": result.source, "read": result.read,
            "accepted": result.accepted, "written": result.written, "blank": result.blank,
            "rejected": [{"row": r.row, "field": r.field, "value": str(r.value),
                          "expected": r.expected, "message": r.message} for r in result.rejected],
        }))  # fmt: skip
    else:
        typer.echo(
            f"{result.read} rows read, {result.accepted} accepted, {result.written} written, "
            f"{len(result.rejected)} rejections, {len(result.blank)} blank rows skipped"
        )
        for r in result.rejected:
            typer.echo(_line(r), err=True)
    if result.rejected:
        if not result.written:
            typer.echo("error: rows were rejected; nothing was written (fix them, or "
                       "--skip-rejected to write the others)", err=True)  # fmt: skip
            raise typer.Exit(2)
        raise typer.Exit(1)
