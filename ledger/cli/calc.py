"""``fluxledger calc``: quick calculators for the bench. Each prints a table or ``--json``.

Every quantity option takes a number with its unit as typed ("20 psi", "250 mL/min",
"15 degC"); pressures are gauge unless the help says absolute. The science and pint are
imported inside each command so that ``fluxledger --help`` stays fast.
"""

from __future__ import annotations

from enum import StrEnum
from pathlib import Path

import typer

from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.errors import InputError

app = typer.Typer(
    help="Quick calculators: viscosity, NWP, shear, diafiltration, concentration, integrity, "
    "gel-model optimum and reuse-life projection.",
    no_args_is_help=True,
    rich_markup_mode=None,
)

GAUGE = "Gauge pressure with unit, e.g. '20 psi', '1.4 bar', '138 kPa'."


class CorrectionMethod(StrEnum):
    viscosity = "viscosity"
    exponential = "exponential"


class LifeModel(StrEnum):
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


def _typed_unit(text: str | None, kind: str | None = None) -> str | None:
    """The unit part of an option as typed ("0.1 psi/min" -> "psi/min"), to echo it back.

    With ``kind``, only a unit of that kind is returned (so a gas-flow limit does not set the
    unit in which a decay rate is shown).
    """
    from ledger import units

    if text is None:
        return None
    try:
        _, unit = units.split_number(text, field="", expected="")
        if kind is not None:
            units.to_si(1.0, unit, kind, field="")
    except InputError:
        return None
    return unit or None


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


@app.command("shear")
@guarded
def shear(
    fibers: int = typer.Option(..., "--fibers", help="Number of fibers in the module."),
    lumen_id: str = quantity_option(..., "--lumen-id", help="Fiber inner diameter, e.g. '0.5 mm'."),
    feed_flow: str | None = quantity_option(
        None, "--feed-flow", help="Total feed flow, e.g. '1.2 L/min'."
    ),
    target_shear: str | None = quantity_option(
        None, "--target-shear", help="Wall shear rate wanted, e.g. '4000 1/s'."
    ),
    length: str | None = quantity_option(
        None, "--length", help="Effective fiber length for the pressure drop, e.g. '30 cm'."
    ),
    temperature: str = quantity_option(
        "20 degC", "--temperature", help="Fluid temperature (water properties)."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Wall shear rate, pressure drop and Reynolds number in the fibers (laminar flow)."""
    from ledger import units
    from ledger.cli.output import Q, Report
    from ledger.science import hydraulics

    _one_of(("--feed-flow", feed_flow), ("--target-shear", target_shear))
    d = units.parse(lumen_id, "length", field="--lumen-id", positive=True)
    t = units.parse(temperature, "temperature", field="--temperature")
    q = (
        None
        if feed_flow is None
        else units.parse(feed_flow, "flow", field="--feed-flow", positive=True)
    )
    g = (
        None
        if target_shear is None
        else units.parse(target_shear, "shear_rate", field="--target-shear", positive=True)
    )
    length_m = (
        None if length is None else units.parse(length, "length", field="--length", positive=True)
    )
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
    removal: str | None = quantity_option(
        None, "--removal", help="Removal wanted, e.g. '99.9 %' (a bare number is a fraction)."
    ),
    diavolumes: float | None = typer.Option(None, "--diavolumes", help="Diavolumes to run."),
    sieving: str = quantity_option(
        "1",
        "--sieving",
        help="Sieving coefficient S = 1 - rejection, as '60 %' or a bare ratio (default 1: "
        "passes freely).",
    ),
    volume: str | None = quantity_option(
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
        v = units.parse(volume, "volume", field="--volume", positive=True)
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
                        disc.buffer_per_volume
                        * units.parse(volume, "volume", field="--volume", positive=True),
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
    initial_volume: str | None = quantity_option(
        None, "--initial-volume", help="Volume before concentration, e.g. '5 L'."
    ),
    final_volume: str | None = quantity_option(
        None, "--final-volume", help="Volume after concentration, e.g. '500 mL'."
    ),
    rejection: str = quantity_option(
        "1",
        "--rejection",
        help="Observed rejection of the product, as '99.5 %' or a bare ratio (default 1: fully "
        "retained).",
    ),
    initial_concentration: str | None = quantity_option(
        None, "--initial-concentration", help="Product concentration before, e.g. '0.5 g/L'."
    ),
    area: str | None = quantity_option(
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
            v0 = units.parse(initial_volume, "volume", field="--initial-volume", positive=True)
    else:
        if initial_volume is None or final_volume is None:
            raise InputError(
                "give --factor, or both --initial-volume and --final-volume",
                field="--factor",
                value=None,
                expected="a factor or two volumes",
            )
        v0 = units.parse(initial_volume, "volume", field="--initial-volume", positive=True)
        vf = units.parse(final_volume, "volume", field="--final-volume", positive=True)
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
        c0 = units.parse(
            initial_concentration, "concentration", field="--initial-concentration", positive=True
        )
        inputs.add("initial_concentration", Q(c0, "concentration"), "initial concentration")
        res.add("final_concentration", Q(c0 * ratio, "concentration"), "final concentration")
    if area is not None:
        a = units.parse(area, "area", field="--area", positive=True)
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

    _one_of(("--rate", rate), ("--readings-file", readings_file))
    shown_rate = _typed_unit(rate) or _typed_unit(limit, "pressure_rate") or "mbar/min"
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
        try:
            fit = integrity.decay_rate(pts.columns["time"], pts.columns["pressure"])
        except InputError as exc:
            exc.source = pts.source
            if exc.index is not None:
                exc.line = pts.lines[exc.index]
            raise
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
        inputs.add("limit", Q(allowed, kind, _typed_unit(limit, kind)), "allowed")
        res.add("fraction_of_limit", Q(verdict.fraction_of_limit, "fraction"), "share of limit")
        report.verdict = "PASS" if verdict.passed else "FAIL"
    lrv_inputs = (test_pressure, operating_tmp)
    if any(x is not None for x in lrv_inputs):
        if test_pressure is None or operating_tmp is None:
            raise InputError(
                "ALCR needs both --test-pressure and --operating-tmp",
                field="--test-pressure" if test_pressure is None else "--operating-tmp",
                value=None,
                expected="both options",
            )
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

    _one_of(("--pore-size", pore_size), ("--pressure", pressure))
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


@app.command("optimum")
@guarded
def optimum(
    points_file: Path = typer.Option(
        ...,
        "--points-file",
        help="CSV of flux against concentration: 'concentration [g/L]', 'flux [LMH]'.",
    ),
    product_mass: str | None = quantity_option(
        None, "--product-mass", help="Product mass in the batch, e.g. '25 g' (for time/buffer)."
    ),
    diavolumes: float | None = typer.Option(None, "--diavolumes", help="Diavolumes planned."),
    area: str | None = quantity_option(None, "--area", help="Membrane area, e.g. '0.5 m^2'."),
    at_concentration: str | None = quantity_option(
        None, "--at-concentration", help="A concentration to compare with the optimum."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Gel-polarization fit J = k·ln(Cg/Cb) and the diafiltration optimum Cb = Cg/e."""
    from ledger import units
    from ledger.cli.output import Q, Report, Table
    from ledger.pointsfile import Column, read_points
    from ledger.science import gel

    pts = read_points(
        points_file,
        [Column("concentration", "concentration"), Column("flux", "flux")],
        minimum=2,
    )
    try:
        fit = gel.fit_gel_model(pts.columns["concentration"], pts.columns["flux"])
    except InputError as exc:
        exc.source = pts.source
        raise
    c_opt = gel.optimum_concentration(fit)
    report = Report("calc optimum")
    report.section("Inputs").add("points_file", str(points_file), "points file")
    res = report.section("Results")
    res.add("k", Q(fit.k_m_s, "flux"), "mass-transfer coefficient k")
    res.add("k_se", Q(fit.k_se_m_s, "flux"), "standard error of k")
    res.add("gel_concentration", Q(fit.cg_kg_m3, "concentration"), "gel concentration Cg")
    res.add("gel_concentration_se", Q(fit.cg_se_kg_m3, "concentration"), "standard error of Cg")
    res.add("r_squared", fit.r_squared, "r²")
    res.add("optimum_concentration", Q(c_opt, "concentration"), "optimum Cb = Cg/e")
    res.add("flux_at_optimum", Q(fit.flux_at(c_opt), "flux"), "flux at optimum (= k)")
    table = Table(
        "Points",
        [("line", "line"), ("concentration", "concentration"), ("flux", "flux"),
         ("model_flux", "model flux")],
    )  # fmt: skip
    for line, c, j in zip(
        pts.lines, pts.columns["concentration"], pts.columns["flux"], strict=True
    ):
        table.rows.append([line, Q(c, "concentration"), Q(j, "flux"), Q(fit.flux_at(c), "flux")])
    report.tables.append(table)
    plan_opts = (product_mass, diavolumes, area)
    if any(x is not None for x in plan_opts):
        if product_mass is None or diavolumes is None or area is None:
            raise InputError(
                "time and buffer need --product-mass, --diavolumes and --area together",
                field="--product-mass",
                value=None,
                expected="all three options",
            )
        m = units.parse(product_mass, "mass", field="--product-mass", positive=True)
        a = units.parse(area, "area", field="--area", positive=True)
        plans = [("At optimum", gel.diafiltration_at(fit, m, c_opt, diavolumes, a))]
        if at_concentration is not None:
            c = units.parse(
                at_concentration, "concentration", field="--at-concentration", positive=True
            )
            cmp = gel.compare_with_optimum(fit, m, c, diavolumes, a)
            plans.append(("At chosen concentration", cmp.chosen))
            res.add("time_ratio", cmp.time_ratio, "time chosen / optimum")
        for title, plan in plans:
            s = report.section(title)
            s.add("concentration", Q(plan.concentration_kg_m3, "concentration"))
            s.add("volume", Q(plan.volume_m3, "volume"), "retentate volume")
            s.add("flux", Q(plan.flux_m_s, "flux"))
            s.add("buffer_volume", Q(plan.buffer_volume_m3, "volume"), "buffer volume")
            s.add("time", Q(plan.time_s, "time"), "diafiltration time")
    report.notes.append(
        "gel-polarization model (Ng, Lundblad & Mitra 1976); the optimum minimizes "
        "diafiltration time at fixed product mass, area and diavolumes"
    )
    report.print(as_json)


@app.command("lifetime")
@guarded
def lifetime(
    points_file: Path = typer.Option(
        ...,
        "--points-file",
        help="CSV of post-clean NWP recovery per cycle: 'cycle', 'recovery [%]'.",
    ),
    limit: str = quantity_option(
        ..., "--limit", help="Lowest acceptable recovery from the site's procedure, e.g. '80 %'."
    ),
    model: LifeModel = typer.Option(
        LifeModel.linear, "--model", help="Fit recovery (linear) or ln(recovery) (exponential)."
    ),
    baseline_cycles: int | None = typer.Option(
        None,
        "--baseline-cycles",
        help="Fix I-MR control limits from the first N points and apply the run rules to all.",
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Reuse-life projection of NWP recovery with a one-sided 95 % bound (ICH Q1E approach)."""
    from ledger import units
    from ledger.cli.output import Q, Report, Table
    from ledger.pointsfile import Column, read_points
    from ledger.science import trending

    lim = units.parse(limit, "fraction", field="--limit", positive=True, bare_ratio=False)
    pts = read_points(
        points_file, [Column("cycle", None), Column("recovery", "fraction")], minimum=3
    )
    cycles, recovery = pts.columns["cycle"], pts.columns["recovery"]
    try:
        proj = trending.project_life(cycles, recovery, lim, model.value)
    except InputError as exc:
        exc.source = pts.source
        raise
    report = Report("calc lifetime")
    inputs = report.section("Inputs")
    inputs.add("points_file", str(points_file), "points file")
    inputs.add("limit", Q(lim, "fraction"), "recovery limit")
    inputs.add("model", proj.model)
    res = report.section("Results")
    res.add("points", proj.n)
    if proj.model == "linear":
        res.add("slope", Q(proj.slope, "fraction"), "change per cycle")
        res.add("intercept", Q(proj.intercept, "fraction"), "intercept (cycle 0)")
    else:
        res.add("slope", proj.slope, "ln(recovery) per cycle")
        res.add("intercept", proj.intercept, "ln(recovery) at cycle 0")
    res.add("r_squared", proj.r_squared, "r²")
    res.add("fitted_crossing", proj.fitted_crossing, "fit reaches limit at cycle")
    res.add("bound_crossing", proj.bound_crossing, "95 % bound reaches limit at cycle")
    last = max(cycles)
    if proj.bound_crossing is not None:
        res.add("cycles_left", max(0.0, proj.bound_crossing - last), "cycles left (by bound)")
    res.add("status", proj.status)
    report.notes.append(proj.note)
    table = Table(
        "Points",
        [("line", "line"), ("cycle", "cycle"), ("recovery", "recovery"),
         ("lower_bound", "95 % lower bound")],
    )  # fmt: skip
    for line, c, r in zip(pts.lines, cycles, recovery, strict=True):
        table.rows.append([line, c, Q(r, "fraction"), Q(trending.lower_bound(proj, c), "fraction")])
    report.tables.append(table)
    if baseline_cycles is not None:
        if not 2 <= baseline_cycles <= len(recovery):
            raise InputError(
                f"--baseline-cycles {baseline_cycles} is outside 2..{len(recovery)}",
                field="--baseline-cycles",
                value=baseline_cycles,
                expected=f"a number of points from 2 to {len(recovery)}",
            )
        limits = trending.imr_limits(recovery[:baseline_cycles])
        chart = report.section("Control chart")
        chart.add("baseline_points", limits.n, "baseline points")
        chart.add("centre", Q(limits.centre, "fraction"))
        chart.add("ucl", Q(limits.ucl, "fraction"), "upper control limit")
        chart.add("lcl", Q(limits.lcl, "fraction"), "lower control limit")
        chart.add("mr_bar", Q(limits.mr_bar, "fraction"), "mean moving range")
        chart.add("mr_ucl", Q(limits.mr_ucl, "fraction"), "moving-range limit")
        signals = Table(
            "Signals",
            [("rule_set", "rule set"), ("rule", "rule"), ("description", "what"),
             ("cycles", "completed at cycles")],
        )  # fmt: skip
        found = [
            *trending.run_rules(recovery, limits, "western_electric"),
            *trending.run_rules(recovery, limits, "nelson"),
            *trending.moving_range_check(recovery, limits),
        ]
        grouped: dict[tuple[str, int, str], list[float]] = {}
        for v in found:
            grouped.setdefault((v.rule_set, v.rule, v.description), []).append(cycles[v.index])
        for (rule_set, rule, text), at in grouped.items():
            signals.rows.append([rule_set, rule, text, at])
        report.tables.append(signals)
        if not found:
            report.notes.append("no run-rule signal against the baseline limits")
    report.notes.append(
        "end of life where the one-sided 95 % lower confidence bound of the fit meets the limit "
        "(the ICH Q1E approach); the limit comes from the site's validated procedure"
    )
    report.print(as_json)
