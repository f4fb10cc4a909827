"""`calc optimum`: gel-polarization fit and the diafiltration optimum."""

from __future__ import annotations

from pathlib import Path

import typer

from ledger.cli.calc import app
from ledger.cli.common import JSON_OPTION, guarded, quantity_option


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
    diavolumes: str | None = typer.Option(
        None, "--diavolumes", help="Diavolumes planned.", metavar="<float>"
    ),
    area: str | None = quantity_option(None, "--area", help="Membrane area, e.g. '0.5 m^2'."),
    at_concentration: str | None = quantity_option(
        None, "--at-concentration", help="A concentration to compare with the optimum."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Gel-polarization fit J = k·ln(Cg/Cb) and the diafiltration optimum Cb = Cg/e."""
    from ledger.entries import calc as calc_entries

    e = calc_entries.optimum(locals())
    from ledger.cli.output import Q, Report, Table
    from ledger.science import gel

    pts = e.points
    with pts.blame():
        fit = gel.fit_gel_model(pts.columns["concentration"], pts.columns["flux"])
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
    if e.product_mass is not None and e.diavolumes is not None and e.area is not None:
        m, n, a = e.product_mass, e.diavolumes, e.area
        plans = [("At optimum", gel.diafiltration_at(fit, m, c_opt, n, a))]
        if e.at_concentration is not None:
            cmp = gel.compare_with_optimum(fit, m, e.at_concentration, n, a)
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
