"""`calc diafiltration` and `calc concentration`: wash-out, buffer, CF, yield, loading."""

from __future__ import annotations

import typer

from ledger.cli.calc import app, one_of
from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.errors import InputError


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

    one_of(("--removal", removal), ("--diavolumes", diavolumes))
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
