"""``fluxledger calc``: quick calculators for the bench. Each prints a table or ``--json``.

Every quantity option takes a number with its unit as typed ("20 psi", "250 mL/min",
"15 degC"); pressures are gauge unless the help says absolute. The science and pint are
imported inside each command so that ``fluxledger --help`` stays fast.
"""

from __future__ import annotations

from enum import Enum
from pathlib import Path

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.errors import InputError

app = typer.Typer(
    help="Quick calculators: viscosity, NWP, shear, diafiltration, concentration, integrity, "
    "gel-model optimum and reuse-life projection.",
    no_args_is_help=True,
)

GAUGE = "Gauge pressure with unit, e.g. '20 psi', '1.4 bar', '138 kPa'."


class CorrectionMethod(str, Enum):
    viscosity = "viscosity"
    exponential = "exponential"


class LifeModel(str, Enum):
    linear = "linear"
    exponential = "exponential"


def _one_of(first: tuple[str, object], second: tuple[str, object]) -> None:
    given = [name for name, value in (first, second) if value is not None]
    if len(given) != 1:
        raise InputError(
            f"give exactly one of {first[0]} and {second[0]} (got {len(given)})",
            field=first[0],
            value=given,
            expected=f"either {first[0]} or {second[0]}",
        )


@app.command("viscosity")
@guarded
def viscosity(
    temperature: str = typer.Option(
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
    area: str = typer.Option(..., "--area", help="Membrane area, e.g. '0.5 m^2', '1200 cm^2'."),
    permeate_flow: str | None = typer.Option(
        None, "--permeate-flow", help="Clean-water permeate flow, e.g. '250 mL/min'."
    ),
    feed: str | None = typer.Option(None, "--feed", help="Feed (inlet) pressure. " + GAUGE),
    retentate: str | None = typer.Option(None, "--retentate", help="Retentate pressure. " + GAUGE),
    permeate: str = typer.Option(
        "0 bar", "--permeate", help="Permeate pressure (default 0 bar: open). " + GAUGE
    ),
    temperature: str | None = typer.Option(
        None, "--temperature", help="Water temperature, e.g. '18.5 degC'."
    ),
    reference_temperature: str = typer.Option(
        "20 degC", "--reference-temperature", help="Temperature to normalize to."
    ),
    correction: CorrectionMethod = typer.Option(
        CorrectionMethod.viscosity,
        "--correction",
        help="viscosity: µ(T)/µ(Tref), right for water through UF/MF. exponential: "
        "exp(U(1/T-1/Tref)), the RO form; it over-corrects UF water flux.",
    ),
    u_constant: str | None = typer.Option(
        None, "--u-constant", help="U of the exponential form, in K (bare number = K)."
    ),
    baseline: str | None = typer.Option(
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

    a = units.parse(area, "area", field="--area")
    t_ref = units.parse(reference_temperature, "temperature", field="--reference-temperature")
    u = (
        None
        if u_constant is None
        else units.parse(u_constant, "u_constant", field="--u-constant", default_unit="K")
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


@app.command("shear")
@guarded
def shear(
    fibers: int = typer.Option(..., "--fibers", help="Number of fibers in the module."),
    lumen_id: str = typer.Option(..., "--lumen-id", help="Fiber inner diameter, e.g. '0.5 mm'."),
    feed_flow: str | None = typer.Option(
        None, "--feed-flow", help="Total feed flow, e.g. '1.2 L/min'."
    ),
    target_shear: str | None = typer.Option(
        None, "--target-shear", help="Wall shear rate wanted, e.g. '4000 1/s'."
    ),
    length: str | None = typer.Option(
        None, "--length", help="Effective fiber length for the pressure drop, e.g. '30 cm'."
    ),
    temperature: str = typer.Option(
        "20 degC", "--temperature", help="Fluid temperature (water properties)."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Wall shear rate, pressure drop and Reynolds number in the fibers (laminar flow)."""
    from ledger import units
    from ledger.cli.output import Q, Report
    from ledger.science import hydraulics

    _one_of(("--feed-flow", feed_flow), ("--target-shear", target_shear))
    d = units.parse(lumen_id, "length", field="--lumen-id")
    t = units.parse(temperature, "temperature", field="--temperature")
    q = None if feed_flow is None else units.parse(feed_flow, "flow", field="--feed-flow")
    g = (
        None
        if target_shear is None
        else units.parse(target_shear, "shear_rate", field="--target-shear")
    )
    length_m = None if length is None else units.parse(length, "length", field="--length")
    h = hydraulics.module_hydraulics(
        fibers, d, feed_flow_m3_s=q, target_shear_1_s=g, length_m=length_m, temperature_k=t
    )
    report = Report("calc shear")
    inputs = report.section("Inputs")
    inputs.add("fibers", fibers)
    inputs.add("lumen_id", Q(d, "length"), "lumen ID")
    if length_m is not None:
        inputs.add("length", Q(length_m, "fiber_length"))
    inputs.add("temperature", Q(t, "temperature"))
    res = report.section("Results")
    res.add("feed_flow", Q(h.feed_flow, "flow"), "feed flow")
    res.add("fiber_flow", Q(h.fiber_flow, "flow", "mL/min"), "flow per fiber")
    res.add("velocity", Q(h.velocity, "velocity"), "mean velocity")
    res.add("wall_shear_rate", Q(h.wall_shear_rate, "shear_rate"), "wall shear rate")
    res.add("wall_shear_stress", Q(h.wall_shear_stress, "pressure", "Pa"), "wall shear stress")
    res.add("reynolds", h.reynolds, "Reynolds number")
    res.add("laminar", h.laminar)
    if h.pressure_drop is not None:
        res.add("pressure_drop", Q(h.pressure_drop, "pressure"), "channel ΔP")
    if not h.laminar:
        report.notes.append(
            f"Re = {h.reynolds:.0f} exceeds 2100: the laminar formulas for shear and pressure "
            "drop do not hold; treat these values as rough estimates"
        )
    report.notes.append("water properties at the stated temperature; Hagen–Poiseuille flow")
    report.print(as_json)


@app.command("diafiltration")
@guarded
def diafiltration(
    removal: str | None = typer.Option(
        None, "--removal", help="Removal wanted, e.g. '99.9 %' (a bare number is a fraction)."
    ),
    diavolumes: float | None = typer.Option(None, "--diavolumes", help="Diavolumes to run."),
    sieving: str = typer.Option(
        "1", "--sieving", help="Sieving coefficient S = 1 - rejection (default 1: passes freely)."
    ),
    volume: str | None = typer.Option(
        None, "--volume", help="Retentate volume held during diafiltration, e.g. '2 L'."
    ),
    dilution_factor: float | None = typer.Option(
        None,
        "--dilution-factor",
        help="Also compare with discontinuous diafiltration diluting by this factor per step.",
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Constant-volume diafiltration: diavolumes, wash-out and buffer volume."""
    from ledger import units
    from ledger.cli.output import Q, Report
    from ledger.science import concentration as conc

    _one_of(("--removal", removal), ("--diavolumes", diavolumes))
    s = units.parse(sieving, "fraction", field="--sieving")
    report = Report("calc diafiltration")
    inputs = report.section("Inputs")
    inputs.add("sieving", s)
    if removal is not None:
        r = units.parse(removal, "fraction", field="--removal")
        n = conc.diavolumes_for_removal(r, s)
        inputs.add("removal", Q(r, "fraction"))
    else:
        assert diavolumes is not None
        n = diavolumes
        inputs.add("diavolumes", n)
    remaining = conc.washout_remaining(n, s)
    res = report.section("Results")
    res.add("diavolumes", n)
    res.add("remaining", Q(remaining, "fraction"), "remaining C/C0")
    res.add("removal", Q(1.0 - remaining, "fraction"))
    if volume is not None:
        v = units.parse(volume, "volume", field="--volume")
        inputs.add("volume", Q(v, "volume"))
        res.add("buffer_volume", Q(conc.buffer_volume(n, v), "volume"), "buffer volume")
    if dilution_factor is not None:
        target = 1.0 - remaining
        steps = conc.steps_for_removal(target, dilution_factor, s) if target > 0 else 0
        disc = res_disc = None
        if steps:
            disc = conc.discontinuous_diafiltration(dilution_factor, steps, s)
            res_disc = report.section("Discontinuous")
            res_disc.add("dilution_factor", dilution_factor, "dilution factor")
            res_disc.add("steps", disc.steps)
            res_disc.add("remaining", Q(disc.remaining, "fraction"), "remaining C/C0")
            res_disc.add("buffer_per_volume", disc.buffer_per_volume, "buffer / retentate volume")
            if volume is not None:
                res_disc.add(
                    "buffer_volume",
                    Q(
                        disc.buffer_per_volume * units.parse(volume, "volume", field="--volume"),
                        "volume",
                    ),
                    "buffer volume",
                )
    report.notes.append("constant-volume wash-out C/C0 = exp(-N·S)")
    report.print(as_json)


@app.command("concentration")
@guarded
def concentration(
    factor: float | None = typer.Option(None, "--factor", help="Concentration factor V0/Vf."),
    initial_volume: str | None = typer.Option(
        None, "--initial-volume", help="Volume before concentration, e.g. '5 L'."
    ),
    final_volume: str | None = typer.Option(
        None, "--final-volume", help="Volume after concentration, e.g. '500 mL'."
    ),
    rejection: str = typer.Option(
        "1", "--rejection", help="Observed rejection of the product (default 1 = fully retained)."
    ),
    initial_concentration: str | None = typer.Option(
        None, "--initial-concentration", help="Product concentration before, e.g. '0.5 g/L'."
    ),
    area: str | None = typer.Option(
        None, "--area", help="Membrane area, for the module loading, e.g. '0.1 m^2'."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Concentration factor, final concentration and yield with observed rejection."""
    from ledger import units
    from ledger.cli.output import Q, Report
    from ledger.science import concentration as conc

    report = Report("calc concentration")
    inputs = report.section("Inputs")
    v0 = None
    if factor is not None:
        if initial_volume is not None and final_volume is not None:
            raise InputError(
                "give --factor, or --initial-volume with --final-volume, not both",
                field="--factor",
                value=factor,
                expected="one way of stating the factor",
            )
        cf = factor
        if initial_volume is not None:
            v0 = units.parse(initial_volume, "volume", field="--initial-volume")
    else:
        if initial_volume is None or final_volume is None:
            raise InputError(
                "give --factor, or both --initial-volume and --final-volume",
                field="--factor",
                value=None,
                expected="a factor or two volumes",
            )
        v0 = units.parse(initial_volume, "volume", field="--initial-volume")
        vf = units.parse(final_volume, "volume", field="--final-volume")
        cf = conc.concentration_factor(v0, vf)
    r = units.parse(rejection, "fraction", field="--rejection")
    inputs.add("rejection", r)
    res = report.section("Results")
    res.add("factor", cf, "concentration factor")
    if v0 is not None:
        inputs.add("initial_volume", Q(v0, "volume"), "initial volume")
        res.add("final_volume", Q(conc.final_volume(v0, cf), "volume"), "final volume")
        res.add("permeate_volume", Q(v0 - conc.final_volume(v0, cf), "volume"), "permeate volume")
    ratio = conc.concentrated_ratio(cf, r)
    res.add("concentration_ratio", ratio, "Cf/C0")
    res.add("yield", Q(conc.concentration_yield(cf, r), "fraction"))
    c0 = None
    if initial_concentration is not None:
        c0 = units.parse(initial_concentration, "concentration", field="--initial-concentration")
        inputs.add("initial_concentration", Q(c0, "concentration"), "initial concentration")
        res.add("final_concentration", Q(c0 * ratio, "concentration"), "final concentration")
    if area is not None:
        a = units.parse(area, "area", field="--area")
        inputs.add("area", Q(a, "area"))
        if v0 is not None:
            res.add(
                "volume_loading",
                Q(conc.volumetric_loading(v0, a), "areal_volume"),
                "volume loading",
            )
            if c0 is not None:
                res.add(
                    "mass_loading", Q(conc.mass_loading(c0 * v0, a), "areal_mass"), "mass loading"
                )
        else:
            report.notes.append("module loading needs --initial-volume")
    report.notes.append("Cf/C0 = CF^R and yield = CF^(R-1) for a constant observed rejection R")
    report.print(as_json)
