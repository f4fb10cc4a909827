"""`fluxledger fleet`: every module's standing in one table, most urgent first."""

from __future__ import annotations

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.history import (
    OVERWRITE_OPTION,
    PDF_OPTION,
    PNG_OPTION,
    tell_written,
    write_pictures,
)
from ledger.cli.session import DB_OPTION, read


@guarded
def fleet(
    type_code: str | None = typer.Option(None, "--type", help="Only modules of this type."),
    product: str | None = typer.Option(
        None, "--product", help="Only modules dedicated to or used for this product."
    ),
    pdf: str | None = PDF_OPTION,
    png: str | None = PNG_OPTION,
    overwrite: bool = OVERWRITE_OPTION,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Fleet overview: status, verdict, cycles, recovery trend, projected cycles left, storage
    expiry and open holds of every module, on hold and NOT FIT first; with --pdf and --png the
    same as one PDF page and as a picture."""
    from ledger.cli.describe import SITE_NOTE
    from ledger.cli.output import Q, Report, Table
    from ledger.logbook.fleet import fleet as gather
    from ledger.records import wear_report

    rows = read(db, lambda s: gather(s, type_code, product))
    wrote = write_pictures(
        pdf,
        png,
        overwrite,
        lambda p: wear_report.fleet_pdf(rows, p, note=SITE_NOTE, overwrite=overwrite),
        lambda p: wear_report.fleet_png(rows, p, overwrite=overwrite),
    )
    report = Report("fleet")
    table = Table(
        "Fleet",
        [
            ("serial", "serial"),
            ("type", "type"),
            ("status", "status"),
            ("verdict", "verdict"),
            ("cycles", "cycles"),
            ("reuse_limit", "reuse limit"),
            ("last_recovery", "last recovery"),
            ("trend", "trend"),
            ("slope_per_cycle", "per cycle"),
            ("cycles_left", "cycles left"),
            ("life_projection", "life projection"),
            ("storage_expires", "storage expires"),
            ("holds", "open holds"),
        ],
        json_only=frozenset({"reuse_limit", "slope_per_cycle", "life_projection"}),
    )
    for r in rows:
        table.rows.append(
            [
                r.serial,
                r.type_code,
                r.status,
                r.verdict,
                r.cycles if as_json else f"{r.cycles} of {r.reuse_limit}",
                r.reuse_limit,
                Q(r.last_recovery, "fraction") if r.last_recovery is not None else None,
                r.trend
                if as_json or r.slope is None
                else f"{r.trend} {100 * r.slope:+.1f} %/cycle",
                Q(r.slope, "fraction") if r.slope is not None else None,
                round(r.cycles_left, 1) if r.cycles_left is not None else None,
                r.life_status,
                r.storage_expires,
                list(r.holds),
            ]
        )
    report.tables.append(table)
    if not rows:
        report.notes.append("no modules match")
    report.print(as_json)
    tell_written(wrote, as_json)
