"""`calc lifetime`: reuse-life projection, I-MR limits and run rules."""

from __future__ import annotations

from enum import StrEnum
from pathlib import Path

import typer

from ledger.cli.calc import app
from ledger.cli.common import JSON_OPTION, guarded, quantity_option


class LifeModel(StrEnum):
    linear = "linear"
    exponential = "exponential"


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
    from ledger.entries import calc as calc_entries

    e = calc_entries.lifetime(locals())
    from ledger.cli.output import Q, Report, Table
    from ledger.science import trending

    pts, lim = e.points, e.limit
    cycles, recovery = pts.columns["cycle"], pts.columns["recovery"]
    with pts.blame():
        proj = trending.project_life(cycles, recovery, lim, e.model)
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
    if e.baseline_cycles is not None:
        limits = trending.imr_limits(recovery[: e.baseline_cycles])
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
