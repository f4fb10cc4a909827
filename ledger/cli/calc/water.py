"""`calc viscosity` and `calc nwp`: water properties and normalized water permeability."""

from __future__ import annotations

from enum import StrEnum
from pathlib import Path

import typer

from ledger.cli.calc import GAUGE, app
from ledger.cli.common import JSON_OPTION, guarded, quantity_option


class CorrectionMethod(StrEnum):
    viscosity = "viscosity"
    exponential = "exponential"


@app.command("viscosity")
@guarded
def viscosity(
    temperature: str = quantity_option(
        ..., "--temperature", help="Water temperature with unit, e.g. '20 degC', '68 degF'."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Viscosity, density and surface tension of liquid water at 1 atm (IAPWS 2008 / 2014)."""
    from ledger.entries import calc as calc_entries

    t = calc_entries.viscosity(locals()).temperature
    from ledger.cli.output import Q, Report
    from ledger.science import water

    mu = water.viscosity(t)
    rho = water.density(t)
    report = Report("calc viscosity")
    report.section("Inputs").add("temperature", Q(t, "temperature"))
    res = report.section("Results")
    res.add("viscosity", Q(mu, "viscosity"))
    res.add("density", Q(rho, "density"))
    res.add("kinematic_viscosity", Q(mu / rho, "kinematic_viscosity"), "kinematic viscosity")
    res.add("surface_tension", Q(water.surface_tension(t), "surface_tension"), "surface tension")
    report.notes.append(
        "viscosity: IAPWS R12-08 at the Kell (1975) density for 101.325 kPa; "
        "surface tension: IAPWS R1-76(2014)"
    )
    report.print(as_json)


@app.command("nwp")
@guarded
def nwp(
    area: str = quantity_option(..., "--area", help="Membrane area, e.g. '0.5 m^2', '1200 cm^2'."),
    permeate_flow: str | None = quantity_option(
        None, "--permeate-flow", help="Clean-water permeate flow, e.g. '250 mL/min'."
    ),
    feed: str | None = quantity_option(None, "--feed", help="Feed (inlet) pressure. " + GAUGE),
    retentate: str | None = quantity_option(
        None, "--retentate", help="Retentate pressure. " + GAUGE
    ),
    permeate: str = quantity_option(
        "0 bar", "--permeate", help="Permeate pressure (default 0 bar: open). " + GAUGE
    ),
    temperature: str | None = quantity_option(
        None, "--temperature", help="Water temperature, e.g. '18.5 degC'."
    ),
    reference_temperature: str = quantity_option(
        "20 degC", "--reference-temperature", help="Temperature to normalize to."
    ),
    correction: CorrectionMethod = typer.Option(
        CorrectionMethod.viscosity,
        "--correction",
        help="viscosity: µ(T)/µ(Tref), right for water through UF/MF. exponential: "
        "exp(U(1/T-1/Tref)), the RO form; it over-corrects UF water flux.",
    ),
    u_constant: str | None = quantity_option(
        None, "--u-constant", help="U of the exponential form, in K (bare number = K)."
    ),
    baseline: str | None = quantity_option(
        None, "--baseline", help="Baseline NWP for recovery, e.g. '420 LMH/bar'."
    ),
    points_file: Path | None = typer.Option(
        None,
        "--points-file",
        help="CSV of several TMP points; headers carry units: 'permeate_flow [mL/min]' and "
        "'tmp [psi]' or 'feed [psi]','retentate [psi]'(,'permeate [psi]'); optional "
        "'temperature [degC]'.",
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Normalized water permeability (NWP) from a clean-water flux test."""
    from ledger.cli.output import Q, Report, Table
    from ledger.entries.water import nwp_calc
    from ledger.rules.water_test import INTERCEPT_RATIO_MAX, intercept_suspect
    from ledger.science import permeability as perm
    from ledger.science import water

    e = nwp_calc({**locals(), "correction": correction.value})
    a, t_ref, u, method = e.area, e.reference_temperature, e.u_constant, e.correction
    report = Report("calc nwp")
    inputs = report.section("Inputs")
    inputs.add("area", Q(a, "area"))
    inputs.add("reference_temperature", Q(t_ref, "temperature"), "reference temperature")
    inputs.add("correction", method)
    if u is not None:
        inputs.add("u_constant", Q(u, "u_constant"), "U")
    res = report.section("Results")
    if e.points is None:
        q, pf, pr, pp, t = e.permeate_flow, e.feed, e.retentate, e.permeate, e.temperatures[0]
        point = perm.normalized_permeability(q, a, pf, pr, pp, t, t_ref, method, u)  # type: ignore[arg-type]
        for key, value in (
            ("permeate_flow", Q(q, "flow")),  # type: ignore[arg-type]
            ("feed", Q(pf, "pressure")),  # type: ignore[arg-type]
            ("retentate", Q(pr, "pressure")),  # type: ignore[arg-type]
            ("permeate", Q(pp, "pressure")),
            ("temperature", Q(t, "temperature")),
        ):
            inputs.add(key, value, key.replace("_", " "))
        res.add("tmp", Q(point.tmp, "pressure"), "TMP")
        res.add("channel_pressure_drop", Q(point.channel_drop, "pressure"), "channel ΔP")
        res.add("flux", Q(point.flux, "flux"))
        res.add("permeability", Q(point.permeability, "permeability"), "permeability at T")
        res.add("correction_factor", point.factor, "correction factor")
        res.add("nwp", Q(point.nwp, "permeability"), "NWP at Tref")
        nwp_value = point.nwp
    else:
        readings = e.points.readings
        tmps = [r.tmp for r in readings]
        temps = e.temperatures
        fluxes = [perm.flux(r.permeate_flow, a) for r in readings]
        slope = perm.nwp_from_points(fluxes, tmps, temps, t_ref, method, u)  # type: ignore[arg-type]
        table = Table(
            "Points",
            [
                ("line", "line"),
                ("tmp", "TMP"),
                ("flux", "flux"),
                ("temperature", "temperature"),
                ("normalized_flux", "flux at Tref"),
            ],
        )
        for r, j, t, jn in zip(readings, fluxes, temps, slope.normalized_flux, strict=True):
            table.rows.append(
                [r.line, Q(r.tmp, "pressure"), Q(j, "flux"), Q(t, "temperature"), Q(jn, "flux")]
            )
        report.tables.append(table)
        inputs.add("points_file", str(points_file), "points file")
        res.add("nwp", Q(slope.nwp, "permeability"), "NWP at Tref (slope)")
        res.add("intercept", Q(slope.intercept, "flux"))
        res.add("intercept_ratio", Q(slope.intercept_ratio, "fraction"), "intercept / mean flux")
        res.add("r_squared", slope.r_squared, "r²")
        res.add("points", slope.n)
        if intercept_suspect(slope.intercept_ratio):
            report.notes.append(
                f"the intercept exceeds {INTERCEPT_RATIO_MAX * 100:g} % of the mean flux: check "
                "the pressure zero, membrane compaction or residual fouling"
            )
        nwp_value = slope.nwp
    if e.baseline is not None:
        b = e.baseline
        rec = perm.recovery(nwp_value, b)
        res.add("recovery", Q(rec, "fraction"), "recovery vs baseline")
        mu_ref = water.viscosity(t_ref)
        res.add(
            "membrane_resistance",
            Q(perm.resistance_from_permeability(b, mu_ref), "resistance"),
            "baseline resistance Rm",
        )
        res.add(
            "resistance",
            Q(perm.resistance_from_permeability(nwp_value, mu_ref), "resistance"),
            "resistance now",
        )
    report.notes.append(
        "NWP = Qp/(A·TMP) normalized to Tref; limits for recovery come from the site's "
        "validated procedures"
    )
    report.print(as_json)
