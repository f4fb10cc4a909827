"""`calc viscosity` and `calc nwp`: water properties and normalized water permeability."""

from __future__ import annotations

from enum import StrEnum
from pathlib import Path

import typer

from ledger.cli.calc import GAUGE, app
from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.errors import InputError


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
    from ledger import units
    from ledger.cli.output import Q, Report
    from ledger.science import water

    t = units.parse(temperature, "temperature", field="--temperature")
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
    from ledger import units
    from ledger.cli.output import Q, Report, Table
    from ledger.science import permeability as perm
    from ledger.science import water

    a = units.parse(area, "area", field="--area", positive=True)
    t_ref = units.parse(reference_temperature, "temperature", field="--reference-temperature")
    u = (
        None
        if u_constant is None
        else units.parse(
            u_constant, "u_constant", field="--u-constant", default_unit="K", positive=True
        )
    )
    method = correction.value
    if method == "exponential" and u is None:
        raise InputError(
            "--correction exponential needs --u-constant (K), e.g. --u-constant '2640 K'",
            field="--u-constant",
            value=None,
            expected="a constant in K",
        )
    report = Report("calc nwp")
    inputs = report.section("Inputs")
    inputs.add("area", Q(a, "area"))
    inputs.add("reference_temperature", Q(t_ref, "temperature"), "reference temperature")
    inputs.add("correction", method)
    if u is not None:
        inputs.add("u_constant", Q(u, "u_constant"), "U")
    res = report.section("Results")
    if points_file is None:
        if permeate_flow is None or feed is None or retentate is None or temperature is None:
            missing = [
                opt
                for opt, v in (
                    ("--permeate-flow", permeate_flow),
                    ("--feed", feed),
                    ("--retentate", retentate),
                    ("--temperature", temperature),
                )
                if v is None
            ]
            raise InputError(
                f"missing {', '.join(missing)} (or give --points-file)",
                field=missing[0],
                value=None,
                expected="a value for each, or a points file",
            )
        q = units.parse(permeate_flow, "flow", field="--permeate-flow")
        pf = units.parse(feed, "pressure", field="--feed")
        pr = units.parse(retentate, "pressure", field="--retentate")
        pp = units.parse(permeate, "pressure", field="--permeate")
        t = units.parse(temperature, "temperature", field="--temperature")
        tmp = perm.transmembrane_pressure(pf, pr, pp)
        if tmp <= 0:
            raise InputError(
                f"TMP from --feed, --retentate and --permeate is {tmp / 1e5:.4g} bar; "
                "expected a positive TMP (feed and retentate above permeate)",
                field="--feed",
                value=tmp,
                expected="a positive TMP",
            )
        point = perm.normalized_permeability(q, a, pf, pr, pp, t, t_ref, method, u)  # type: ignore[arg-type]
        for key, value in (
            ("permeate_flow", Q(q, "flow")),
            ("feed", Q(pf, "pressure")),
            ("retentate", Q(pr, "pressure")),
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
        from ledger.pointsfile import Column, read_points

        pts = read_points(
            points_file,
            [
                Column("permeate_flow", "flow"),
                Column("tmp", "pressure", required=False),
                Column("feed", "pressure", required=False),
                Column("retentate", "pressure", required=False),
                Column("permeate", "pressure", required=False),
                Column("temperature", "temperature", required=False),
            ],
            minimum=2,
        )
        n = len(pts)
        if pts.has("tmp"):
            tmps = pts.columns["tmp"]
        elif pts.has("feed") and pts.has("retentate"):
            pperm = pts.columns.get("permeate", [0.0] * n)
            tmps = [
                perm.transmembrane_pressure(f, r, p)
                for f, r, p in zip(
                    pts.columns["feed"], pts.columns["retentate"], pperm, strict=True
                )
            ]
        else:
            raise InputError(
                "the points file needs a 'tmp' column, or 'feed' and 'retentate' columns",
                field="tmp",
                value=None,
                expected="tmp [unit] or feed [unit] and retentate [unit]",
                source=pts.source,
                line=1,
            )
        if pts.has("temperature"):
            temps = pts.columns["temperature"]
        elif temperature is not None:
            temps = [units.parse(temperature, "temperature", field="--temperature")] * n
        else:
            raise InputError(
                "no temperature: add a 'temperature [degC]' column or give --temperature",
                field="--temperature",
                value=None,
                expected="a temperature",
            )
        for line, tmp in zip(pts.lines, tmps, strict=True):
            if tmp <= 0:
                raise InputError(
                    f"TMP is {tmp / 1e5:.4g} bar; expected a positive TMP",
                    field="tmp",
                    value=tmp,
                    expected="a positive TMP",
                    source=pts.source,
                    line=line,
                )
        fluxes = [perm.flux(qp, a) for qp in pts.columns["permeate_flow"]]
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
        for line, tmp, j, t, jn in zip(
            pts.lines, tmps, fluxes, temps, slope.normalized_flux, strict=True
        ):
            table.rows.append(
                [line, Q(tmp, "pressure"), Q(j, "flux"), Q(t, "temperature"), Q(jn, "flux")]
            )
        report.tables.append(table)
        inputs.add("points_file", str(points_file), "points file")
        res.add("nwp", Q(slope.nwp, "permeability"), "NWP at Tref (slope)")
        res.add("intercept", Q(slope.intercept, "flux"))
        res.add("intercept_ratio", Q(slope.intercept_ratio, "fraction"), "intercept / mean flux")
        res.add("r_squared", slope.r_squared, "r²")
        res.add("points", slope.n)
        if abs(slope.intercept_ratio) > 0.1:
            report.notes.append(
                "the intercept exceeds 10 % of the mean flux: check the pressure zero, "
                "membrane compaction or residual fouling"
            )
        nwp_value = slope.nwp
    if baseline is not None:
        b = units.parse(baseline, "permeability", field="--baseline")
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
