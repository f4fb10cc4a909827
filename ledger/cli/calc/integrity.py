"""`calc decay` and `calc bubble-point`: integrity tests of a module."""

from __future__ import annotations

from pathlib import Path

import typer

from ledger.cli.calc import app, one_of, together, typed_unit
from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.errors import InputError


@app.command("decay")
@guarded
def decay(
    volume: str = quantity_option(
        ..., "--volume", help="Upstream (pressurized) gas volume of the test, e.g. '45 mL'."
    ),
    rate: str | None = quantity_option(
        None, "--rate", help="Measured pressure-decay rate, e.g. '0.05 psi/min'."
    ),
    readings_file: Path | None = typer.Option(
        None,
        "--readings-file",
        help="CSV of readings with units in the headers: 'time [s]' (or [min]) and "
        "'pressure [psi]' (gauge).",
    ),
    atmosphere: str = quantity_option(
        "1 atm", "--atmosphere", help="ABSOLUTE atmospheric pressure, e.g. '1013 mbar'."
    ),
    limit: str | None = quantity_option(
        None,
        "--limit",
        help="Allowed decay rate ('0.1 psi/min') or allowed gas flow ('2 mL/min') from the "
        "module type's validated procedure.",
    ),
    test_pressure: str | None = quantity_option(
        None, "--test-pressure", help="For ALCR/LRV: test pressure (gauge), e.g. '15 psi'."
    ),
    back_pressure: str = quantity_option(
        "0 psi", "--back-pressure", help="For ALCR/LRV: pressure on the other side (gauge)."
    ),
    operating_tmp: str | None = quantity_option(
        None, "--operating-tmp", help="For ALCR/LRV: TMP in normal operation, e.g. '5 psi'."
    ),
    filtrate_flow: str | None = quantity_option(
        None, "--filtrate-flow", help="For LRV: filtrate flow of the unit, e.g. '200 mL/min'."
    ),
    vcf: float = typer.Option(
        1.0, "--vcf", help="For LRV: volumetric concentration factor (default 1)."
    ),
    temperature: str = quantity_option(
        "20 degC", "--temperature", help="Test temperature (air and water viscosity)."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Pressure-decay integrity test: decay rate, gas flow, verdict, and optionally ALCR/LRV.

    Exits 1 when a --limit is given and the test fails it.
    """
    from ledger import units
    from ledger.cli.output import Q, Report, Table
    from ledger.science import integrity, water

    one_of(("--rate", rate), ("--readings-file", readings_file))
    shown_rate = typed_unit(rate) or typed_unit(limit, "pressure_rate") or "mbar/min"
    v = units.parse(volume, "volume", field="--volume", positive=True)
    p_atm = units.parse(atmosphere, "pressure", field="--atmosphere", positive=True)
    report = Report("calc decay")
    inputs = report.section("Inputs")
    inputs.add("volume", Q(v, "volume", "mL"), "upstream volume")
    inputs.add("atmosphere", Q(p_atm, "pressure", "mbar"), "atmosphere (absolute)")
    res = report.section("Results")
    if rate is not None:
        r = units.parse(rate, "pressure_rate", field="--rate")
        inputs.add("rate", Q(r, "pressure_rate", shown_rate))
    else:
        from ledger.pointsfile import Column, read_points

        assert readings_file is not None
        pts = read_points(
            readings_file, [Column("time", "time"), Column("pressure", "pressure")], minimum=2
        )
        with pts.blame():
            fit = integrity.decay_rate(pts.columns["time"], pts.columns["pressure"])
        r = fit.rate_pa_s
        inputs.add("readings_file", str(readings_file), "readings file")
        res.add("readings", fit.n)
        res.add("duration", Q(fit.duration_s, "time"))
        res.add("start_pressure", Q(fit.start_pressure_pa, "pressure", "psi"), "start pressure")
        res.add("end_pressure", Q(fit.end_pressure_pa, "pressure", "psi"), "end pressure")
        res.add("r_squared", fit.r_squared, "r² of the decay line")
        table = Table("Readings", [("line", "line"), ("time", "time"), ("pressure", "pressure")])
        for line, t, p in zip(pts.lines, pts.columns["time"], pts.columns["pressure"], strict=True):
            table.rows.append([line, Q(t, "time", "s"), Q(p, "pressure", "psi")])
        report.tables.append(table)
    res.add("decay_rate", Q(r, "pressure_rate", shown_rate), "decay rate")
    gas = integrity.gas_flow_from_decay(r, v, p_atm) if r >= 0 else None
    if gas is not None:
        res.add("gas_flow", Q(gas, "gas_flow"), "gas flow at atmosphere")
    else:
        report.notes.append("pressure rose during the hold: check temperature stability")
    if limit is not None:
        try:
            allowed = units.parse(limit, "pressure_rate", field="--limit")
            measured, kind = r, "pressure_rate"
        except InputError:
            try:
                allowed = units.parse(limit, "gas_flow", field="--limit")
            except InputError:
                raise InputError(
                    f"--limit: {limit!r} is neither a decay rate nor a gas flow",
                    field="--limit",
                    value=limit,
                    expected="a pressure per time ('0.1 psi/min') or a flow ('2 mL/min')",
                ) from None
            measured, kind = (gas if gas is not None else 0.0), "gas_flow"
        verdict = integrity.judge_decay(max(measured, 0.0), allowed)
        inputs.add("limit", Q(allowed, kind, typed_unit(limit, kind)), "allowed")
        res.add("fraction_of_limit", Q(verdict.fraction_of_limit, "fraction"), "share of limit")
        report.verdict = "PASS" if verdict.passed else "FAIL"
    if together("ALCR", ("--test-pressure", test_pressure), ("--operating-tmp", operating_tmp)):
        assert test_pressure is not None and operating_tmp is not None
        t = units.parse(temperature, "temperature", field="--temperature")
        alcr = integrity.air_liquid_conversion_ratio(
            units.parse(test_pressure, "pressure", field="--test-pressure", positive=True),
            units.parse(back_pressure, "pressure", field="--back-pressure"),
            units.parse(operating_tmp, "pressure", field="--operating-tmp", positive=True),
            water.viscosity(t),
            temperature_k=t,
            atmospheric_pressure_pa=p_atm,
        )
        res.add("alcr", alcr, "air–liquid conversion ratio")
        if filtrate_flow is not None and gas is not None and gas > 0:
            qp = units.parse(filtrate_flow, "flow", field="--filtrate-flow", positive=True)
            res.add("lrv", integrity.log_removal_value(qp, alcr, gas, vcf), "LRV verified")
        report.notes.append(
            "ALCR by the laminar (viscous-flow) defect model, isothermal ideal gas; the site's "
            "validated procedure decides which ALCR model applies"
        )
    report.notes.append("gas flow = V·(dP/dt)/P_atm (USEPA MFGM, EPA 815-R-06-009)")
    report.print(as_json)
    if report.verdict == "FAIL":
        raise typer.Exit(1)


@app.command("bubble-point")
@guarded
def bubble_point(
    pore_size: str | None = quantity_option(
        None, "--pore-size", help="Largest pore diameter, e.g. '0.2 um'."
    ),
    pressure: str | None = quantity_option(
        None, "--pressure", help="Measured bubble point (differential), e.g. '50 psi'."
    ),
    surface_tension: str | None = quantity_option(
        None,
        "--surface-tension",
        help="Wetting liquid surface tension, e.g. '22.3 mN/m'; default: water at --temperature.",
    ),
    contact_angle: float = typer.Option(0.0, "--contact-angle", help="Contact angle in degrees."),
    temperature: str = quantity_option("20 degC", "--temperature", help="Liquid temperature."),
    as_json: bool = JSON_OPTION,
) -> None:
    """Young–Laplace bubble point from a pore size, or the pore size from a bubble point."""
    import math

    from ledger import units
    from ledger.cli.output import Q, Report
    from ledger.science import integrity, water

    one_of(("--pore-size", pore_size), ("--pressure", pressure))
    t = units.parse(temperature, "temperature", field="--temperature")
    if surface_tension is None:
        gamma = water.surface_tension(t)
    else:
        gamma = units.parse(
            surface_tension, "surface_tension", field="--surface-tension", positive=True
        )
    theta = math.radians(contact_angle)
    report = Report("calc bubble-point")
    inputs = report.section("Inputs")
    inputs.add("surface_tension", Q(gamma, "surface_tension"), "surface tension")
    inputs.add("contact_angle", contact_angle, "contact angle (°)")
    res = report.section("Results")
    if pore_size is not None:
        d = units.parse(pore_size, "length", field="--pore-size", positive=True)
        inputs.add("pore_size", Q(d, "length", "um"), "pore size")
        res.add(
            "bubble_point",
            Q(integrity.bubble_point_pressure(d, gamma, theta), "pressure", "psi"),
            "bubble point",
        )
    else:
        assert pressure is not None
        p = units.parse(pressure, "pressure", field="--pressure")
        inputs.add("pressure", Q(p, "pressure", "psi"), "bubble point")
        res.add(
            "pore_size",
            Q(integrity.pore_diameter_from_bubble_point(p, gamma, theta), "length", "um"),
            "largest pore",
        )
    report.notes.append(
        "P = 4·γ·cosθ/d for cylindrical pores; real membranes need the shape correction of "
        "the site's validated method"
    )
    report.print(as_json)
