"""`fluxledger skid ...`: the processing systems runs are made on, their instruments and
their approved mappings."""

from __future__ import annotations

from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, USER_OPTION, read, write

app = typer.Typer(
    help="Skids: register, instruments and calibration, approved mappings.",
    no_args_is_help=True,
)

CODE = typer.Argument(..., help="The skid's code, e.g. TFF-SKID-2.")


def _skid_section(report: Any, skid: Any) -> None:
    s = report.section("Skid")
    s.add("code", skid.code)
    s.add("description", skid.description)
    s.add("location", skid.location)
    s.add("registered_at", skid.created_at, "registered at")
    s.add("registered_by", skid.created_by, "registered by")


def _instrument_row(i: Any) -> list[Any]:
    return [i.tag, i.measures, i.calibration_due.isoformat()]


INSTRUMENT_COLUMNS = [("tag", "tag"), ("measures", "measures"),
                      ("calibration_due", "calibration due")]  # fmt: skip


def _mapping_row(m: Any) -> list[Any]:
    return [m.version, m.status, m.sha256, m.approved_by, m.approved_at]


MAPPING_COLUMNS = [("version", "version"), ("status", "status"), ("sha256", "SHA-256"),
                   ("approved_by", "approved by"), ("approved_at", "approved at")]  # fmt: skip


@app.command("add")
@guarded
def skid_add(
    code: str = CODE,
    description: str = typer.Option(..., "--description", help="What the skid is (one line)."),
    location: str | None = typer.Option(None, "--location", help="Where it stands (optional)."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Register a skid (engineer or QA). Add its instruments and approve its mapping next."""
    from ledger.cli.output import Report
    from ledger.entries.equipment import skid
    from ledger.equipment.service import register_skid

    e = skid(locals())
    made = write(
        db, user, password_stdin,
        lambda s, a: register_skid(s, a, e.code, e.description, e.location),
    )  # fmt: skip
    if not as_json:
        typer.echo(f"registered skid {made.code}: add its instruments and approve its mapping next")
        return
    report = Report("skid add")
    _skid_section(report, made)
    report.print(as_json)


@app.command("instrument")
@guarded
def skid_instrument(
    code: str = CODE,
    tag: str = typer.Option(..., "--tag", help="The instrument's tag, e.g. PT-101."),
    measures: str = typer.Option(
        ..., "--measures", help="The mapped channel it measures, e.g. feed_pressure."
    ),
    calibration_due: str = typer.Option(
        ..., "--calibration-due", help="When its calibration is due, e.g. 2027-03-31."
    ),
    reason: str | None = typer.Option(
        None, "--reason", help="Why, when it replaces the instrument in service under this tag."
    ),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Add an instrument to a skid, or replace the one in service under the same tag."""
    from ledger.cli.output import Report, Table
    from ledger.entries.equipment import instrument
    from ledger.equipment.service import set_instrument

    e = instrument(locals())
    new, old = write(
        db, user, password_stdin,
        lambda s, a: set_instrument(s, a, e.code, e.tag, e.measures, e.calibration_due, e.reason),
    )  # fmt: skip
    if not as_json:
        due = new.calibration_due.isoformat()
        done = f"replaced {old.tag}" if old is not None else f"added {new.tag}"
        typer.echo(f"{done} on skid {code}: measures {new.measures}, calibration due {due}")
        return
    report = Report("skid instrument")
    table = Table("Instrument", INSTRUMENT_COLUMNS, [_instrument_row(new)])
    report.tables.append(table)
    report.tables.append(Table("Replaced", INSTRUMENT_COLUMNS,
                               [_instrument_row(old)] if old is not None else []))  # fmt: skip
    report.print(as_json)


@app.command("mapping")
@guarded
def skid_mapping(
    code: str = CODE,
    file: str = typer.Argument(..., help="The mapping file (TOML) to approve."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Approve a mapping file as the skid's next version (engineer or QA; your password is
    your approval). The same text as the current version changes nothing."""
    from ledger.cli.output import Report
    from ledger.entries.equipment import mapping
    from ledger.equipment.service import approve_mapping

    e = mapping(locals())
    found, created = write(
        db, user, password_stdin, lambda s, a: approve_mapping(s, a, e.code, e.text, e.source)
    )
    if not as_json:
        if created:
            typer.echo(f"skid {code}: mapping version {found.version} approved by "
                       f"{found.approved_by} (SHA-256 {found.sha256})")  # fmt: skip
        else:
            typer.echo(f"skid {code}: the file is the current mapping version {found.version}; "
                       "nothing changed")  # fmt: skip
        return
    report = Report("skid mapping")
    m = report.section("Mapping")
    m.add("version", found.version)
    m.add("status", found.status)
    m.add("sha256", found.sha256)
    m.add("approved_by", found.approved_by)
    m.add("approved_at", found.approved_at)
    m.add("created", created)
    report.print(as_json)


@app.command("list")
@guarded
def skid_list(db: str | None = DB_OPTION, as_json: bool = JSON_OPTION) -> None:
    """List skids with their instruments and current mapping version."""
    from ledger.cli.output import Report, Table
    from ledger.equipment.service import list_skids

    report = Report("skid list")
    table = Table("Skids", [("code", "code"), ("description", "description"),
                            ("location", "location"), ("instruments", "instruments"),
                            ("mapping_version", "mapping version")])  # fmt: skip
    for v in read(db, list_skids):
        current = v.current
        table.rows.append([v.skid.code, v.skid.description, v.skid.location,
                           len(v.instruments), current.version if current else None])  # fmt: skip
    report.tables.append(table)
    report.print(as_json)


@app.command("show")
@guarded
def skid_show(code: str = CODE, db: str | None = DB_OPTION, as_json: bool = JSON_OPTION) -> None:
    """A skid, its instruments in service and every approved mapping version."""
    from ledger.cli.output import Report, Table
    from ledger.equipment.service import show_skid

    view = read(db, lambda s: show_skid(s, code))
    report = Report("skid show")
    _skid_section(report, view.skid)
    report.tables.append(
        Table("Instruments", INSTRUMENT_COLUMNS, [_instrument_row(i) for i in view.instruments])
    )
    report.tables.append(
        Table("Mappings", MAPPING_COLUMNS, [_mapping_row(m) for m in view.mappings])
    )
    if view.current is None:
        report.notes.append("no approved mapping yet: approve one with `fluxledger skid mapping`")
    report.print(as_json)
