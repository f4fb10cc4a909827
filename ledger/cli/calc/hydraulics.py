"""`calc shear`: wall shear, pressure drop and Reynolds number in the fibers."""

from __future__ import annotations

import typer

from ledger.cli.calc import app
from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.entries import defaults as entry_defaults


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
        entry_defaults.SHEAR_DEFAULTS["temperature"],
        "--temperature",
        help="Fluid temperature (water properties).",
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Wall shear rate, pressure drop and Reynolds number in the fibers (laminar flow)."""
    from ledger.entries import calc as calc_entries

    e = calc_entries.shear(locals())
    from ledger.cli.output import Q, Report
    from ledger.science import hydraulics

    h = hydraulics.module_hydraulics(
        e.fibers,
        e.lumen_id,
        feed_flow_m3_s=e.feed_flow,
        target_shear_1_s=e.target_shear,
        length_m=e.length,
        temperature_k=e.temperature,
    )
    report = Report("calc shear")
    inputs = report.section("Inputs")
    inputs.add("fibers", e.fibers)
    inputs.add("lumen_id", Q(e.lumen_id, "length"), "lumen ID")
    if e.length is not None:
        inputs.add("length", Q(e.length, "fiber_length"))
    inputs.add("temperature", Q(e.temperature, "temperature"))
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
