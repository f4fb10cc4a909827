"""`calc decay` and `calc bubble-point`: integrity tests of a module."""

from __future__ import annotations

from pathlib import Path

import typer

from ledger.cli.calc import app
from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.entries import defaults as entry_defaults

DECAY = entry_defaults.DECAY_DEFAULTS
BUBBLE = entry_defaults.BUBBLE_POINT_DEFAULTS


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
        DECAY["atmosphere"], "--atmosphere", help="ABSOLUTE atmospheric pressure, e.g. '1013 mbar'."
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
        DECAY["back_pressure"],
        "--back-pressure",
        help="For ALCR/LRV: pressure on the other side (gauge).",
    ),
    operating_tmp: str | None = quantity_option(
        None, "--operating-tmp", help="For ALCR/LRV: TMP in normal operation, e.g. '5 psi'."
    ),
    filtrate_flow: str | None = quantity_option(
        None, "--filtrate-flow", help="For LRV: filtrate flow of the unit, e.g. '200 mL/min'."
    ),
    vcf: str = typer.Option(
        DECAY["vcf"],
        "--vcf",
        help="For LRV: volumetric concentration factor (default 1).",
        metavar="<float>",
    ),
    temperature: str = quantity_option(
        DECAY["temperature"], "--temperature", help="Test temperature (air and water viscosity)."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Pressure-decay integrity test: decay rate, gas flow, verdict, and optionally ALCR/LRV.

    Exits 1 when a --limit is given and the test fails it.
    """
    from ledger.entries import calc_integrity as calc_entries

    e = calc_entries.decay(locals())
    from ledger.cli.output import Q, Report, Table
    from ledger.science import integrity, water

    report = Report("calc decay")
    inputs = report.section("Inputs")
    inputs.add("volume", Q(e.volume, "volume", "mL"), "upstream volume")
    inputs.add("atmosphere", Q(e.atmosphere, "pressure", "mbar"), "atmosphere (absolute)")
    res = report.section("Results")
    if e.rate is not None:
        r = e.rate
        inputs.add("rate", Q(r, "pressure_rate", e.rate_unit))
    else:
        pts = e.readings
        assert pts is not None
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
    res.add("decay_rate", Q(r, "pressure_rate", e.rate_unit), "decay rate")
    gas = integrity.gas_flow_from_decay(r, e.volume, e.atmosphere) if r >= 0 else None
    if gas is not None:
        res.add("gas_flow", Q(gas, "gas_flow"), "gas flow at atmosphere")
    else:
        report.notes.append("pressure rose during the hold: check temperature stability")
    if e.limit is not None and e.limit_kind is not None:
        gas_or_zero = gas if gas is not None else 0.0
        measured = r if e.limit_kind == "pressure_rate" else gas_or_zero
        verdict = integrity.judge_decay(max(measured, 0.0), e.limit)
        inputs.add("limit", Q(e.limit, e.limit_kind, e.limit_unit), "allowed")
        res.add("fraction_of_limit", Q(verdict.fraction_of_limit, "fraction"), "share of limit")
        report.verdict = "PASS" if verdict.passed else "FAIL"
    if e.alcr is not None:
        t = e.temperature
        alcr = integrity.air_liquid_conversion_ratio(
            e.alcr.test_pressure,
            e.alcr.back_pressure,
            e.alcr.operating_tmp,
            water.viscosity(t),
            temperature_k=t,
            atmospheric_pressure_pa=e.atmosphere,
        )
        res.add("alcr", alcr, "air–liquid conversion ratio")
        if e.filtrate_flow is not None and gas is not None and gas > 0:
            res.add(
                "lrv",
                integrity.log_removal_value(e.filtrate_flow, alcr, gas, e.vcf),
                "LRV verified",
            )
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
    contact_angle: str = typer.Option(
        BUBBLE["contact_angle"],
        "--contact-angle",
        help="Contact angle in degrees.",
        metavar="<float>",
    ),
    temperature: str = quantity_option(
        BUBBLE["temperature"], "--temperature", help="Liquid temperature."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Young–Laplace bubble point from a pore size, or the pore size from a bubble point."""
    from ledger.entries import calc_integrity as calc_entries

    e = calc_entries.bubble_point(locals())
    from ledger.cli.output import Q, Report
    from ledger.science import integrity, water

    gamma = (
        e.surface_tension if e.surface_tension is not None else water.surface_tension(e.temperature)
    )
    theta = e.contact_angle
    report = Report("calc bubble-point")
    inputs = report.section("Inputs")
    inputs.add("surface_tension", Q(gamma, "surface_tension"), "surface tension")
    inputs.add("contact_angle", e.contact_angle_deg, "contact angle (°)")
    res = report.section("Results")
    if e.pore_size is not None:
        inputs.add("pore_size", Q(e.pore_size, "length", "um"), "pore size")
        res.add(
            "bubble_point",
            Q(integrity.bubble_point_pressure(e.pore_size, gamma, theta), "pressure", "psi"),
            "bubble point",
        )
    else:
        assert e.pressure is not None
        inputs.add("pressure", Q(e.pressure, "pressure", "psi"), "bubble point")
        res.add(
            "pore_size",
            Q(integrity.pore_diameter_from_bubble_point(e.pressure, gamma, theta), "length", "um"),
            "largest pore",
        )
    report.notes.append(
        "P = 4·γ·cosθ/d for cylindrical pores; real membranes need the shape correction of "
        "the site's validated method"
    )
    report.print(as_json)
