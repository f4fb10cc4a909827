"""What the operator records at the bench: tests (`test`), care (`care`), uses (`use`), `void`."""

from __future__ import annotations

from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.cli.describe import CAUSTIC_NOTE, finish
from ledger.cli.session import ACTIVITY_TIME, DB_OPTION, PASSWORD_STDIN, USER_OPTION, when, write
from ledger.errors import InputError

test_app = typer.Typer(help="Record water-flux and integrity tests.", no_args_is_help=True)
care_app = typer.Typer(
    help="Record cleanings and storage. Cleaning agents are caustic: follow your site's "
    "safety procedure (eye and skin protection).",
    no_args_is_help=True,
)
use_app = typer.Typer(help="Start and end a use (one processing cycle).", no_args_is_help=True)

NOTE = typer.Option(None, "--note", help="A free-text remark kept with the record.")


def _water_points(points_file: str, temperature: str | None) -> tuple[list[Any], float, Any]:
    from ledger import units
    from ledger.logbook.waterflux import WaterPoint
    from ledger.pointsfile import Column, read_points

    pts = read_points(
        points_file,
        [
            Column("permeate_flow", "flow", required=False),
            Column("volume", "volume", required=False),
            Column("time", "time", required=False),
            Column("feed", "pressure"),
            Column("retentate", "pressure"),
            Column("permeate", "pressure", required=False),
            Column("temperature", "temperature", required=False),
        ],
    )
    c = pts.columns
    if not (pts.has("permeate_flow") or (pts.has("volume") and pts.has("time"))):
        raise InputError(
            f"{points_file}: needs a permeate_flow column, or volume and time",
            field="points_file",
            value=points_file,
            expected="columns permeate_flow [mL/min] or volume [mL] and time [s]",
        )
    n = len(pts)
    points = [
        WaterPoint(
            feed_pa=c["feed"][i],
            retentate_pa=c["retentate"][i],
            permeate_pa=c["permeate"][i] if pts.has("permeate") else 0.0,
            flow_m3_s=c["permeate_flow"][i] if pts.has("permeate_flow") else None,
            volume_m3=c["volume"][i]
            if pts.has("volume") and not pts.has("permeate_flow")
            else None,
            time_s=c["time"][i] if pts.has("time") and not pts.has("permeate_flow") else None,
        )
        for i in range(n)
    ]
    if temperature is not None:
        return points, units.parse(temperature, "temperature", field="--temperature"), pts
    if not pts.has("temperature"):
        raise InputError(
            "give --temperature, or a temperature column in the points file",
            field="temperature",
            value=None,
            expected="e.g. --temperature '22 degC'",
        )
    temps = c["temperature"]
    if max(temps) - min(temps) > 1.0:
        raise InputError(
            f"{points_file}: the water temperature varies by more than 1 K",
            field="temperature",
            value=max(temps) - min(temps),
            expected="one water temperature for the test (within 1 K)",
        )
    return points, sum(temps) / n, pts


@test_app.command("water")
@guarded
def water(
    serial: str = typer.Argument(..., help="Module serial."),
    stage: str = typer.Option(..., "--stage", help="baseline, pre-use, post-use or post-clean."),
    feed: str | None = quantity_option(None, "--feed", help="Feed pressure (gauge), '10 psi'."),
    retentate: str | None = quantity_option(None, "--retentate", help="Retentate pressure."),
    permeate: str = quantity_option("0 psi", "--permeate", help="Permeate pressure (default 0)."),
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
    from ledger import units
    from ledger.cli.describe import water_line
    from ledger.logbook.waterflux import WaterPoint, record_water_test

    if points_file is not None:
        if any(v is not None for v in (feed, retentate, flow, volume, time)):
            raise InputError(
                "give --points-file or single-point options, not both",
                field="points_file",
                value=points_file,
                expected="one of the two",
            )
        points, t, pts = _water_points(points_file, temperature)
    else:
        if feed is None or retentate is None or temperature is None:
            raise InputError(
                "a single-point test needs --feed, --retentate and --temperature",
                field="feed",
                value=feed,
                expected="all three (or --points-file)",
            )
        t = units.parse(temperature, "temperature", field="--temperature")

        def opt(text: str | None, kind: str, flag: str) -> float | None:
            return None if text is None else units.parse(text, kind, field=flag)

        points = [
            WaterPoint(
                feed_pa=units.parse(feed, "pressure", field="--feed"),
                retentate_pa=units.parse(retentate, "pressure", field="--retentate"),
                permeate_pa=units.parse(permeate, "pressure", field="--permeate"),
                flow_m3_s=opt(flow, "flow", "--flow"),
                volume_m3=opt(volume, "volume", "--volume"),
                time_s=opt(time, "time", "--time"),
            )
        ]
    at = when(activity_time)

    def work(s: Any, a: Any) -> Any:
        test, status = record_water_test(
            s, a, serial, stage, points, t, water_grade=water_grade, activity_at=at, note=note
        )
        return test, water_line(test), status

    if points_file is not None:
        with pts.blame():
            test, text, status = write(db, user, password_stdin, work)
    else:
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
        None, "--upstream-volume", help="Pressurized volume, to report the gas flow, '120 mL'."
    ),
    bubble_point: str | None = quantity_option(
        None, "--bubble-point", help="Instead of a decay: the bubble point seen, '52 psi'."
    ),
    temperature: str | None = quantity_option(None, "--temperature", help="During the test."),
    activity_time: str | None = ACTIVITY_TIME,
    note: str | None = NOTE,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Record an integrity test (pressure decay or bubble point); a failure holds the module."""
    from ledger import units
    from ledger.cli.describe import integrity_line
    from ledger.logbook.integrity import DecayInput, record_bubble_point, record_decay_test

    def q(text: str | None, kind: str, flag: str) -> float | None:
        return None if text is None else units.parse(text, kind, field=flag)

    temp = q(temperature, "temperature", "--temperature")
    at = when(activity_time)
    if bubble_point is not None:
        if any(v is not None for v in (readings, start, end, hold_time)):
            raise InputError(
                "a bubble-point test takes no decay readings",
                field="bubble_point",
                value=bubble_point,
                expected="--bubble-point alone, or a decay",
            )
        bp = units.parse(bubble_point, "pressure", field="--bubble-point")
        test, status = write(
            db,
            user,
            password_stdin,
            lambda s, a: record_bubble_point(
                s, a, serial, bp, temperature_k=temp, activity_at=at, note=note
            ),
        )
        finish("test integrity", test, integrity_line(test), status, as_json)
        return
    pairs = None
    if readings is not None:
        from ledger.pointsfile import Column, read_points

        pts = read_points(
            readings, [Column("time", "time"), Column("pressure", "pressure")], minimum=2
        )
        pairs = list(zip(pts.columns["time"], pts.columns["pressure"], strict=True))
    d = DecayInput(
        test_pressure_pa=q(test_pressure, "pressure", "--test-pressure"),
        readings=pairs,
        start_pa=q(start, "pressure", "--start"),
        end_pa=q(end, "pressure", "--end"),
        hold_time_s=q(hold_time, "time", "--hold-time"),
        upstream_volume_m3=q(upstream_volume, "volume", "--upstream-volume"),
        temperature_k=temp,
    )
    if pairs is not None:
        with pts.blame():
            test, status = write(
                db,
                user,
                password_stdin,
                lambda s, a: record_decay_test(s, a, serial, d, activity_at=at, note=note),
            )
    else:
        test, status = write(
            db,
            user,
            password_stdin,
            lambda s, a: record_decay_test(s, a, serial, d, activity_at=at, note=note),
        )
    finish("test integrity", test, integrity_line(test), status, as_json)


def _concentration(text: str, flag: str = "--concentration") -> tuple[float, str]:
    from ledger import units

    for kind, unit in (("molarity", "mol/m**3"), ("concentration", "kg/m**3"), ("fraction", "")):
        try:
            return units.parse(text, kind, field=flag, bare_ratio=False), unit
        except InputError:
            continue
    raise InputError(
        f"{flag}: {text!r} is not a concentration",
        field=flag.lstrip("-").replace("-", "_"),
        value=text,
        expected="a molarity (0.5 mol/L, 500 mM), a mass concentration "
        "(20 g/L) or a percentage (0.5 %)",
    )


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
    """Record a cleaning. CAUTION: sodium hydroxide and similar agents are caustic; wear eye
    and skin protection and follow the site's procedure."""
    from ledger import units
    from ledger.logbook.care import CleaningInput, record_cleaning

    value, unit = _concentration(concentration)
    c = CleaningInput(
        agent=agent,
        concentration=value,
        concentration_unit=unit,
        temperature_k=units.parse(temperature, "temperature", field="--temperature"),
        contact_time_s=units.parse(contact_time, "time", field="--contact-time"),
        reagent_lot=reagent_lot,
        rinse_ph=rinse_ph,
        rinse_conductivity_s_m=None
        if rinse_conductivity is None
        else units.parse(rinse_conductivity, "conductivity", field="--rinse-conductivity"),
    )
    at = when(activity_time)
    record, status = write(
        db,
        user,
        password_stdin,
        lambda s, a: record_cleaning(
            s, a, serial, c, procedure=procedure, activity_at=at, note=note
        ),
    )
    line = f"cleaning {record.id} recorded for {serial}" + (" (late entry)" if record.late else "")
    if record.deviations is not None:
        line += (
            f"; procedure {procedure}: " + "; ".join(record.deviations)
            if record.deviations
            else f"; follows procedure {procedure}"
        )
    finish("care clean", record, f"{line}\ncaution: {CAUSTIC_NOTE}", status, as_json)


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
    from ledger.logbook.care import record_storage

    at = when(activity_time)
    record = write(
        db,
        user,
        password_stdin,
        lambda s, a: record_storage(s, a, serial, solution, activity_at=at, note=note),
    )
    line = f"storage {record.id} started for {serial} in {record.solution}"
    finish("care store", record, line, None, as_json)


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
    from ledger.logbook.uses import start_use

    at = when(activity_time)
    use = write(
        db,
        user,
        password_stdin,
        lambda s, a: start_use(
            s, a, serial, product, lot, override_reason=override_reason, activity_at=at, note=note
        ),
    )
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
    from ledger.logbook.uses import end_use

    at = when(activity_time)
    use = write(db, user, password_stdin, lambda s, a: end_use(s, a, serial, activity_at=at))
    finish("use end", use, f"use {use.id} ended: {serial} is awaiting cleaning", None, as_json)


@guarded
def void(
    kind: str = typer.Argument(..., help="water-test, integrity-test, cleaning, storage or use."),
    record_id: int = typer.Argument(..., help="The record's ID (see module show)."),
    reason: str = typer.Option(..., "--reason", help="Why the record is wrong."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Void a wrong record (engineer or QA). It is kept, marked void, and no longer counts."""
    from ledger.logbook.voiding import void_record

    record = write(
        db, user, password_stdin, lambda s, a: void_record(s, a, kind, record_id, reason)
    )
    finish("void", record, f"{kind} {record_id} is void: {reason}", None, as_json)


procedure_app = typer.Typer(
    help="Validated cleaning procedures: the ranges each cleaning is checked against.",
    no_args_is_help=True,
)
care_app.add_typer(procedure_app, name="procedure")


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
    from ledger import units
    from ledger.logbook.procedures import ProcedureSpec, add_procedure

    low, unit = _concentration(concentration_min, "--concentration-min")
    high, unit_high = _concentration(concentration_max, "--concentration-max")
    if unit != unit_high:
        raise InputError(
            "--concentration-min and --concentration-max are different kinds of concentration",
            field="concentration_max",
            value=concentration_max,
            expected=f"the same kind as {concentration_min!r}",
        )

    def q(text: str | None, kind: str, flag: str) -> float | None:
        return None if text is None else units.parse(text, kind, field=flag)

    spec = ProcedureSpec(
        code=code, title=title, agent=agent, concentration_min=low, concentration_max=high,
        concentration_unit=unit,
        temperature_min_k=units.parse(temperature_min, "temperature", field="--temperature-min"),
        temperature_max_k=units.parse(temperature_max, "temperature", field="--temperature-max"),
        contact_time_min_s=units.parse(contact_time_min, "time", field="--contact-time-min"),
        rinse_ph_min=rinse_ph_min, rinse_ph_max=rinse_ph_max,
        rinse_conductivity_max_s_m=q(rinse_conductivity_max, "conductivity",
                                     "--rinse-conductivity-max"),
    )  # fmt: skip
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
    table.rows = [procedure_row(p) for p in read(db, list_procedures)]
    report.tables.append(table)
    report.notes += [SITE_NOTE, CAUSTIC_NOTE]
    report.print(as_json)
