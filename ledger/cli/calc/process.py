"""`calc diafiltration` and `calc concentration`: wash-out, buffer, CF, yield, loading."""

from __future__ import annotations

import typer

from ledger.cli.calc import app
from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.entries import defaults as entry_defaults


@app.command("diafiltration")
@guarded
def diafiltration(
    removal: str | None = quantity_option(
        None, "--removal", help="Removal wanted, e.g. '99.9 %' (a bare number is a fraction)."
    ),
    diavolumes: str | None = typer.Option(
        None, "--diavolumes", help="Diavolumes to run.", metavar="<float>"
    ),
    sieving: str = quantity_option(
        entry_defaults.DIAFILTRATION_DEFAULTS["sieving"],
        "--sieving",
        help="Sieving coefficient S = 1 - rejection, as '60 %' or a bare ratio (default 1: "
        "passes freely).",
    ),
    volume: str | None = quantity_option(
        None, "--volume", help="Retentate volume held during diafiltration, e.g. '2 L'."
    ),
    dilution_factor: str | None = typer.Option(
        None,
        "--dilution-factor",
        help="Also compare with discontinuous diafiltration diluting by this factor per step.",
        metavar="<float>",
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Constant-volume diafiltration: diavolumes, wash-out and buffer volume."""
    from ledger.entries import calc as calc_entries

    e = calc_entries.diafiltration(locals())
    from ledger.cli.output import Q, Report
    from ledger.science import concentration as conc

    report = Report("calc diafiltration")
    inputs = report.section("Inputs")
    inputs.add("sieving", e.sieving)
    if e.removal is not None:
        n = conc.diavolumes_for_removal(e.removal, e.sieving)
        inputs.add("removal", Q(e.removal, "fraction"))
    else:
        assert e.diavolumes is not None
        n = e.diavolumes
        inputs.add("diavolumes", n)
    remaining = conc.washout_remaining(n, e.sieving)
    res = report.section("Results")
    res.add("diavolumes", n)
    res.add("remaining", Q(remaining, "fraction"), "remaining C/C0")
    res.add("removal", Q(1.0 - remaining, "fraction"))
    if e.volume is not None:
        inputs.add("volume", Q(e.volume, "volume"))
        res.add("buffer_volume", Q(conc.buffer_volume(n, e.volume), "volume"), "buffer volume")
    if e.dilution_factor is not None:
        target = 1.0 - remaining
        steps = conc.steps_for_removal(target, e.dilution_factor, e.sieving) if target > 0 else 0
        if steps:
            disc = conc.discontinuous_diafiltration(e.dilution_factor, steps, e.sieving)
            res_disc = report.section("Discontinuous")
            res_disc.add("dilution_factor", e.dilution_factor, "dilution factor")
            res_disc.add("steps", disc.steps)
            res_disc.add("remaining", Q(disc.remaining, "fraction"), "remaining C/C0")
            res_disc.add("buffer_per_volume", disc.buffer_per_volume, "buffer / retentate volume")
            if e.volume is not None:
                res_disc.add(
                    "buffer_volume",
                    Q(disc.buffer_per_volume * e.volume, "volume"),
                    "buffer volume",
                )
    report.notes.append("constant-volume wash-out C/C0 = exp(-N·S)")
    report.print(as_json)


@app.command("concentration")
@guarded
def concentration(
    factor: str | None = typer.Option(
        None, "--factor", help="Concentration factor V0/Vf.", metavar="<float>"
    ),
    initial_volume: str | None = quantity_option(
        None, "--initial-volume", help="Volume before concentration, e.g. '5 L'."
    ),
    final_volume: str | None = quantity_option(
        None, "--final-volume", help="Volume after concentration, e.g. '500 mL'."
    ),
    rejection: str = quantity_option(
        entry_defaults.CONCENTRATION_DEFAULTS["rejection"],
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
    from ledger.entries import calc as calc_entries

    e = calc_entries.concentration(locals())
    from ledger.cli.output import Q, Report
    from ledger.science import concentration as conc

    report = Report("calc concentration")
    inputs = report.section("Inputs")
    v0 = e.initial_volume
    if e.factor is not None:
        cf = e.factor
    else:
        assert v0 is not None and e.final_volume is not None
        cf = conc.concentration_factor(v0, e.final_volume)
    r = e.rejection
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
    c0 = e.initial_concentration
    if c0 is not None:
        inputs.add("initial_concentration", Q(c0, "concentration"), "initial concentration")
        res.add("final_concentration", Q(c0 * ratio, "concentration"), "final concentration")
    if e.area is not None:
        a = e.area
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
