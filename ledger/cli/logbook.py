"""What the operator records at the bench: tests (`test`), care (`care`), uses (`use`), `void`."""

from __future__ import annotations

from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.cli.describe import finish
from ledger.cli.session import (
    ACTIVITY_TIME,
    DB_OPTION,
    PASSWORD_STDIN,
    READ_USER_OPTION,
    USER_OPTION,
    read,
    write,
)

test_app = typer.Typer(help="Record water-flux and integrity tests.", no_args_is_help=True)
care_app = typer.Typer(
    help="Record cleanings, cleaning cycles, prepared solutions and storage. Each agent's "
    "caution comes from its hazard class (`fluxledger site agents`): follow your site's "
    "safety procedure.",
    no_args_is_help=True,
)
use_app = typer.Typer(help="Start and end a use (one processing cycle).", no_args_is_help=True)

NOTE = typer.Option(None, "--note", help="A free-text remark kept with the record.")


@test_app.command("water")
@guarded
def water(
    serial: str = typer.Argument(..., help="Module serial."),
    stage: str = typer.Option(..., "--stage", help="baseline, pre-use, post-use or post-clean."),
    feed: str | None = quantity_option(None, "--feed", help="Feed pressure (gauge), '10 psi'."),
    retentate: str | None = quantity_option(None, "--retentate", help="Retentate pressure."),
    permeate: str | None = quantity_option(
        None, "--permeate", help="Permeate pressure (default 0)."
    ),
    flow: str | None = quantity_option(None, "--flow", help="Permeate flow, '120 mL/min'."),
    volume: str | None = quantity_option(
        None, "--volume", help="Or: permeate collected, '250 mL'."
    ),
    time: str | None = quantity_option(None, "--time", help="... over this time, '2 min'."),
    temperature: str | None = quantity_option(None, "--temperature", help="Water, '22 degC'."),
    points_file: str | None = typer.Option(
        None,
        "--points-file",
        help="CSV of several TMP points: feed, retentate[, permeate] and permeate_flow (or volume "
        "and time), units in the headers, e.g. 'feed [psi]'.",
    ),
    water_grade: str | None = typer.Option(None, "--water-grade", help="e.g. WFI, PW."),
    activity_time: str | None = ACTIVITY_TIME,
    note: str | None = NOTE,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Record a water-flux test; prints NWP at T_ref and the recovery against baseline."""
    from ledger.cli.describe import water_line
    from ledger.entries.water import water_test
    from ledger.logbook.site import display_units
    from ledger.logbook.waterflux import record_water_test

    e = water_test(locals())

    def work(s: Any, a: Any) -> Any:
        test, status = record_water_test(
            s, a, e.serial, e.stage, e.points, e.temperature_k, water_grade=e.water_grade,
            activity_at=e.activity_at, note=e.note, entered=e.entered,
        )  # fmt: skip
        return test, water_line(test, display_units(s)), status

    with e.blame():
        test, text, status = write(db, user, password_stdin, work)
    finish("test water", test, text, status, as_json)


@test_app.command("integrity")
@guarded
def integrity(
    serial: str = typer.Argument(..., help="Module serial."),
    readings: str | None = typer.Option(
        None, "--readings", help="CSV of the hold: 'time [min]' and 'pressure [psi]' columns."
    ),
    start: str | None = quantity_option(None, "--start", help="Or: pressure at start, '30 psi'."),
    end: str | None = quantity_option(None, "--end", help="... pressure at the end."),
    hold_time: str | None = quantity_option(None, "--hold-time", help="... after '10 min'."),
    test_pressure: str | None = quantity_option(
        None, "--test-pressure", help="Test pressure (default: the first reading or --start)."
    ),
    upstream_volume: str | None = quantity_option(
        None,
        "--upstream-volume",
        help="Pressurized gas volume, '120 mL': reports a decay's gas flow; gives the flow of "
        "a diffusion or water-intrusion test from its decay.",
    ),
    bubble_point: str | None = quantity_option(
        None, "--bubble-point", help="Instead of a decay: the bubble point seen, '52 psi'."
    ),
    method: str | None = typer.Option(
        None,
        "--method",
        help="pressure-decay, bubble-point, diffusion or water-intrusion (default: a decay, or "
        "a bubble point when --bubble-point is given).",
    ),
    flow: str | None = quantity_option(
        None,
        "--flow",
        help="Diffusion or water-intrusion: the flow as measured, '8 mL/min' (with "
        "--test-pressure); or give the decay and --upstream-volume.",
    ),
    temperature: str | None = quantity_option(None, "--temperature", help="During the test."),
    activity_time: str | None = ACTIVITY_TIME,
    note: str | None = NOTE,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Record an integrity test (pressure decay, bubble point, diffusion or water intrusion);
    a failure holds the module."""
    from ledger.cli.describe import integrity_line
    from ledger.entries.integrity import integrity_test
    from ledger.logbook.integrity import record_bubble_point, record_decay_test, record_flow_test
    from ledger.logbook.site import display_units

    e = integrity_test(locals())

    def work(s: Any, a: Any) -> Any:
        if e.flow_test is not None:
            test, status = record_flow_test(
                s, a, e.serial, e.flow_test, activity_at=e.activity_at, note=e.note,
                entered=e.entered,
            )  # fmt: skip
        elif e.decay is None:
            test, status = record_bubble_point(
                s, a, e.serial, e.bubble_point(), temperature_k=e.temperature_k,
                activity_at=e.activity_at, note=e.note, entered=e.entered,
            )  # fmt: skip
        else:
            test, status = record_decay_test(
                s, a, e.serial, e.decay, activity_at=e.activity_at, note=e.note,
                entered=e.entered,
            )  # fmt: skip
        return test, integrity_line(test, display_units(s)), status

    with e.blame():
        test, line, status = write(db, user, password_stdin, work)
    finish("test integrity", test, line, status, as_json)


@care_app.command("clean")
@guarded
def clean(
    serial: str = typer.Argument(..., help="Module serial."),
    agent: str = typer.Option(..., "--agent", help="Cleaning agent, e.g. 'sodium hydroxide'."),
    concentration: str = quantity_option(..., "--concentration", help="'0.5 mol/L', '1 %'."),
    temperature: str = quantity_option(..., "--temperature", help="Solution temperature."),
    contact_time: str = quantity_option(..., "--contact-time", help="Contact time, '60 min'."),
    reagent_lot: str = typer.Option(..., "--reagent-lot", help="Lot of the cleaning solution."),
    rinse_ph: float | None = typer.Option(None, "--rinse-ph", help="Final rinse pH."),
    rinse_conductivity: str | None = quantity_option(
        None, "--rinse-conductivity", help="Final rinse conductivity, '1.3 uS/cm'."
    ),
    procedure: str | None = typer.Option(
        None,
        "--procedure",
        help="Code of the validated cleaning procedure to check against; a cleaning outside "
        "its ranges holds the module.",
    ),
    activity_time: str | None = ACTIVITY_TIME,
    note: str | None = NOTE,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Record a cleaning; the caution of its agent's hazard class is printed with it (follow
    the site's safety procedure)."""
    from ledger.entries.care import cleaning
    from ledger.logbook.care import record_cleaning
    from ledger.logbook.site import caution_of

    e = cleaning(locals())
    record, status, caution = write(
        db,
        user,
        password_stdin,
        lambda s, a: (*record_cleaning(
            s, a, e.serial, e.cleaning, procedure=e.procedure, activity_at=e.activity_at,
            note=e.note,
        ), caution_of(s, e.cleaning.agent)),
    )  # fmt: skip
    line = f"cleaning {record.id} recorded for {serial}" + (" (late entry)" if record.late else "")
    if record.deviations is not None:
        line += (
            f"; procedure {procedure}: " + "; ".join(record.deviations)
            if record.deviations
            else f"; follows procedure {procedure}"
        )
    finish("care clean", record, line, status, as_json, caution=caution)


@care_app.command("store")
@guarded
def store(
    serial: str = typer.Argument(..., help="Module serial."),
    solution: str = typer.Option(..., "--solution", help="Storage solution, '20 % ethanol'."),
    activity_time: str | None = ACTIVITY_TIME,
    note: str | None = NOTE,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Record the start of a storage period (its length counts against the storage limit)."""
    from ledger.entries.care import storage
    from ledger.logbook.care import record_storage
    from ledger.logbook.site import caution_of

    e = storage(locals())
    record, caution = write(
        db,
        user,
        password_stdin,
        lambda s, a: (
            record_storage(s, a, e.serial, e.solution, activity_at=e.activity_at, note=e.note),
            caution_of(s, e.solution),
        ),
    )
    line = f"storage {record.id} started for {serial} in {record.solution}"
    finish("care store", record, line, None, as_json, caution=caution)


@use_app.command("start")
@guarded
def use_start(
    serial: str = typer.Argument(..., help="Module serial."),
    product: str = typer.Option(..., "--product", help="Product processed."),
    lot: str = typer.Option(..., "--lot", help="Batch or lot."),
    override_reason: str | None = typer.Option(
        None,
        "--override-reason",
        help="Engineer or QA only: why a module dedicated to another product may be used.",
    ),
    activity_time: str | None = ACTIVITY_TIME,
    note: str | None = NOTE,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Start a use. Refused unless the module is FIT for this product."""
    from ledger.entries.uses import use_start
    from ledger.logbook.uses import start_use

    e = use_start(locals())
    use = write(
        db,
        user,
        password_stdin,
        lambda s, a: start_use(
            s, a, e.serial, e.product, e.lot, override_reason=e.override_reason,
            activity_at=e.activity_at, note=e.note,
        ),
    )  # fmt: skip
    line = f"use {use.id} started: {serial} for {use.product} lot {use.lot}"
    finish("use start", use, line, None, as_json)


@use_app.command("end")
@guarded
def use_end(
    serial: str = typer.Argument(..., help="Module serial."),
    activity_time: str | None = ACTIVITY_TIME,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """End the current use; the module then awaits cleaning."""
    from ledger.entries.uses import use_end
    from ledger.logbook.uses import end_use

    e = use_end(locals())
    use = write(
        db, user, password_stdin, lambda s, a: end_use(s, a, e.serial, activity_at=e.activity_at)
    )
    finish("use end", use, f"use {use.id} ended: {serial} is awaiting cleaning", None, as_json)


@guarded
def void(
    kind: str = typer.Argument(
        ..., help="water-test, integrity-test, cleaning, storage, use or skid-log."
    ),
    record_id: int = typer.Argument(..., help="The record's ID (see module show)."),
    reason: str = typer.Option(..., "--reason", help="Why the record is wrong."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Void a wrong record (engineer or QA). It is kept, marked void, and no longer counts."""
    from ledger.entries.uses import void as void_entry
    from ledger.logbook.voiding import void_record

    e = void_entry(locals())
    record = write(
        db, user, password_stdin, lambda s, a: void_record(s, a, e.kind, e.record_id, e.reason)
    )
    finish("void", record, f"{kind} {record_id} is void: {reason}", None, as_json)


procedure_app = typer.Typer(
    help="Validated cleaning procedures: the ranges each cleaning is checked against.",
    no_args_is_help=True,
)
care_app.add_typer(procedure_app, name="procedure")


def _cycle_procedures() -> typer.Typer:
    from ledger.cli.templates import controlled_app

    return controlled_app("cleaning procedure", "care cycle-procedure", "procedure",
                          "QC-CYCLE-05", "ledger.logbook.cycles", "cycles recorded")  # fmt: skip


care_app.add_typer(_cycle_procedures(), name="cycle-procedure")


@care_app.command("cycle")
@guarded
def cycle(
    serial: str = typer.Argument(..., help="Module serial."),
    procedure: str = typer.Option(
        ..., "--procedure", help="ID of the cleaning-cycle procedure (the version in force)."
    ),
    values: list[str] | None = typer.Option(
        None,
        "--value",
        help="A step's value as STEP.NAME=TEXT, e.g. 2.temperature='45 degC', "
        "2.solution=SOL-NAOH-01, 3.endpoint='1.2 uS/cm'. NAME is solution, concentration, "
        "temperature, contact_time, flow, tmp or endpoint, as the step asks.",
    ),
    activity_time: str | None = ACTIVITY_TIME,
    note: str | None = NOTE,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Record a cleaning cycle, every step against the procedure version in force; a step
    outside its ranges or an endpoint not reached holds the module. Each step's agent prints
    its caution (follow the site's safety procedure)."""
    from ledger.cli.describe import cycle_report
    from ledger.entries.care import cycle as entry
    from ledger.logbook.cycles import procedure_of, record_cycle

    e = entry(locals())
    cleaning, steps, status, version = write(
        db,
        user,
        password_stdin,
        lambda s, a: (
            *(done := record_cycle(s, a, e.serial, e.procedure, e.values,
                                   activity_at=e.activity_at, note=e.note)),
            procedure_of(s, done[0]),
        ),
    )  # fmt: skip
    cycle_report(serial, cleaning, steps, status, version, as_json)


@procedure_app.command("add")
@guarded
def procedure_add(
    code: str = typer.Argument(..., help="The procedure's code, e.g. CP-NAOH-05."),
    title: str = typer.Option(..., "--title", help="Its title in the site's SOP."),
    agent: str = typer.Option(..., "--agent", help="Cleaning agent, e.g. 'sodium hydroxide'."),
    concentration_min: str = quantity_option(..., "--concentration-min", help="'0.4 mol/L'."),
    concentration_max: str = quantity_option(..., "--concentration-max", help="'0.6 mol/L'."),
    temperature_min: str = quantity_option(..., "--temperature-min", help="'20 degC'."),
    temperature_max: str = quantity_option(..., "--temperature-max", help="'30 degC'."),
    contact_time_min: str = quantity_option(..., "--contact-time-min", help="'60 min'."),
    rinse_ph_min: float | None = typer.Option(None, "--rinse-ph-min", help="Rinse endpoint."),
    rinse_ph_max: float | None = typer.Option(None, "--rinse-ph-max", help="Rinse endpoint."),
    rinse_conductivity_max: str | None = quantity_option(
        None, "--rinse-conductivity-max", help="Rinse endpoint, '2 uS/cm'."
    ),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Define a cleaning procedure (engineer or QA). Its ranges are the site's validated ones."""
    from ledger.entries.care import procedure
    from ledger.logbook.procedures import add_procedure

    spec = procedure(locals())
    created = write(db, user, password_stdin, lambda s, a: add_procedure(s, a, spec))
    finish("care procedure add", created, f"added cleaning procedure {created.code}", None,
           as_json)  # fmt: skip


@procedure_app.command("list")
@guarded
def procedure_list(db: str | None = DB_OPTION, as_json: bool = JSON_OPTION) -> None:
    """List cleaning procedures and their ranges."""
    from ledger.cli.describe import SITE_NOTE, procedure_row
    from ledger.cli.output import Report, Table
    from ledger.cli.session import read
    from ledger.logbook.procedures import list_procedures

    report = Report("care procedure list")
    table = Table("Procedures", [("code", "code"), ("agent", "agent"),
                                 ("concentration", "concentration"),
                                 ("temperature", "temperature"),
                                 ("contact_time_min", "contact ≥"),
                                 ("rinse", "final rinse")])  # fmt: skip
    from ledger.logbook.site import agent_hazards
    from ledger.rules.hazards import cautions_for

    procedures, site = read(db, lambda s: (list_procedures(s), agent_hazards(s)))
    table.rows = [procedure_row(p) for p in procedures]
    report.tables.append(table)
    report.notes += [*cautions_for([p.agent for p in procedures], site), SITE_NOTE]
    report.print(as_json)


solution_app = typer.Typer(
    help="Prepared cleaning and storage solutions: registered when made, verified before use "
    "(conductivity for sodium hydroxide, or titration); a cycle step names the one it used.",
    no_args_is_help=True,
)
care_app.add_typer(solution_app, name="solution")
SOLUTION_CODE = typer.Argument(..., help="The solution's code, e.g. SOL-NAOH-0412.")


def _solution_line(row: Any, what: str) -> str:
    from ledger.cli.describe import solution_text

    return f"solution {row.code} {what}: {solution_text(row)}"


@solution_app.command("prepare")
@guarded
def solution_prepare(
    code: str = SOLUTION_CODE,
    agent: str = typer.Option(..., "--agent", help="The agent, e.g. 'sodium hydroxide'."),
    target: str = quantity_option(..., "--target", help="Strength made up to, '0.5 mol/L'."),
    reagent_lot: str = typer.Option(..., "--reagent-lot", help="Lot of the reagent used."),
    reagent_expiry: str = typer.Option(
        ..., "--reagent-expiry", help="The reagent lot's expiry date, e.g. 2027-06-30."
    ),
    use_by: str = typer.Option(
        ..., "--use-by", help="Use the solution until, e.g. 2026-12-11T16:00+01:00."
    ),
    activity_time: str | None = ACTIVITY_TIME,
    note: str | None = NOTE,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Register a solution you prepared; it must be verified before a cleaning uses it. The
    caution of its agent's hazard class is printed with it."""
    from ledger.entries.care import solution_prepare as entry
    from ledger.logbook.site import caution_of
    from ledger.logbook.solutions import prepare

    e = entry(locals())
    row, caution = write(
        db, user, password_stdin, lambda s, a: (prepare(s, a, e), caution_of(s, e.agent))
    )
    finish("care solution prepare", row, _solution_line(row, "prepared"), None, as_json,
           caution=caution)  # fmt: skip


@solution_app.command("verify")
@guarded
def solution_verify(
    code: str = SOLUTION_CODE,
    conductivity: str | None = quantity_option(
        None, "--conductivity", help="Conductivity read, '98.4 mS/cm' (sodium hydroxide only)."
    ),
    reading_temperature: str | None = quantity_option(
        None, "--reading-temperature", help="The solution's temperature at that reading."
    ),
    titration: str | None = quantity_option(
        None, "--titration", help="Strength found by titration, '0.49 mol/L'."
    ),
    calibration: str = typer.Option(
        ...,
        "--calibration",
        help="The meter's calibration (cell constant, standard, date) or the titrant and lot.",
    ),
    activity_time: str | None = ACTIVITY_TIME,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Record a solution's verified strength: from a conductivity reading (NaOH, CRC table at
    20 °C, referred to 20 °C) or a titration."""
    from ledger.entries.care import solution_verify as entry
    from ledger.logbook.solutions import verify

    e = entry(locals())
    row = write(db, user, password_stdin, lambda s, a: verify(s, a, e.code, e.verification))
    finish("care solution verify", row, _solution_line(row, "verified"), None, as_json)


@solution_app.command("list")
@guarded
def solution_list(
    user: str | None = READ_USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Every prepared solution, newest first, with its state now (usable, unverified,
    expired, void)."""
    from ledger.cli.describe import solutions_report
    from ledger.logbook.solutions import list_solutions

    rows = read(db, list_solutions, user, password_stdin)
    solutions_report(rows).print(as_json)
