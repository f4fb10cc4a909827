"""`fluxledger history SERIAL`: a module's wear trend — recovery and decay per cycle, control
limits and signals, and the projected end of reuse life."""

from __future__ import annotations

from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, read

RATE_UNIT = "mbar/min"
PDF_OPTION = typer.Option(None, "--pdf", help="Also write the report as a PDF to this file.")
PNG_OPTION = typer.Option(None, "--png", help="Also write the charts as a PNG to this file.")
OVERWRITE_OPTION = typer.Option(
    False, "--overwrite", help="Replace the --pdf / --png file if it exists (otherwise refused)."
)


def write_pictures(
    pdf: str | None, png: str | None, overwrite: bool, write_pdf: Any, write_png: Any
) -> list[str]:
    """Check both targets before writing either (so a refusal leaves nothing written), then
    write them; the paths written, for the user."""
    from ledger.records.wear_report import check_target

    for path, field in ((pdf, "pdf"), (png, "png")):
        if path is not None:
            check_target(path, field, overwrite)
    wrote = []
    if pdf is not None:
        wrote.append(str(write_pdf(pdf)))
    if png is not None:
        wrote.append(str(write_png(png)))
    return wrote


def tell_written(paths: list[str], as_json: bool) -> None:
    """Name the files written: on stderr under --json, so stdout stays one JSON document."""
    for path in paths:
        typer.echo(f"wrote {path}", err=as_json)


@guarded
def history(
    serial: str = typer.Argument(..., help="Module serial."),
    baseline_cycles: int | None = typer.Option(
        None,
        "--baseline-cycles",
        help="Fix the I-MR limits from the first N points of each series (default: all).",
    ),
    pdf: str | None = PDF_OPTION,
    png: str | None = PNG_OPTION,
    overwrite: bool = OVERWRITE_OPTION,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Recovery and decay rate per cycle against the limits, I-MR signals and reuse life;
    with --pdf and --png the same as a PDF report and as a picture of the charts."""
    from ledger.cli.describe import SITE_NOTE
    from ledger.logbook.module_trend import module_trend
    from ledger.records import wear_report

    trend = read(db, lambda s: module_trend(s, serial, baseline_cycles))
    wrote = write_pictures(
        pdf,
        png,
        overwrite,
        lambda p: wear_report.history_pdf(trend, p, note=SITE_NOTE, overwrite=overwrite),
        lambda p: wear_report.history_png(trend, p, overwrite=overwrite),
    )
    trend_report(trend).print(as_json)
    tell_written(wrote, as_json)


def _chart(report: Any, title: str, chart: Any, kind: str, unit: str | None) -> None:
    from ledger.cli.output import Q

    s = report.section(title)
    s.add("baseline_points", chart.baseline, "baseline points")
    lim = chart.limits
    if lim is None:
        s.add("note", chart.note)
        return
    for key, value, label in (
        ("centre", lim.centre, "centre"),
        ("ucl", lim.ucl, "upper control limit"),
        ("lcl", lim.lcl, "lower control limit"),
        ("mr_bar", lim.mr_bar, "mean moving range"),
        ("mr_ucl", lim.mr_ucl, "moving-range limit"),
    ):
        s.add(key, Q(value, kind, unit), label)
    s.add("signals", len(chart.signals))


def trend_report(t: Any) -> Any:
    """The report of a :class:`ledger.logbook.module_trend.ModuleTrend`."""
    from ledger.cli.describe import SITE_NOTE
    from ledger.cli.output import Q, Report, Table

    report = Report("history")
    m = report.section("Module")
    m.add("serial", t.serial)
    m.add("type", t.type_code)
    m.add("status", t.status)
    m.add("cycles_used", t.cycles_used, "cycles used")
    m.add("reuse_limit", t.reuse_limit, "reuse limit (cycles)")
    m.add("recovery_min", Q(t.recovery_min, "fraction"), "recovery action limit")
    m.add("recovery_alert", Q(t.recovery_alert, "fraction"), "recovery alert limit")

    p = t.projection
    life = report.section("Life projection")
    life.add("status", p.status)
    life.add("points", p.points)
    life.add("limit", Q(p.limit, "fraction"), "recovery limit")
    life.add("slope", None if p.slope is None else Q(p.slope, "fraction"), "change per cycle")
    life.add("intercept", None if p.intercept is None else Q(p.intercept, "fraction"),
             "intercept (cycle 0)")  # fmt: skip
    life.add("r_squared", p.r_squared, "r²")
    life.add("point_estimate_cycle", p.point_cycle, "fit reaches limit at cycle")
    life.add("bound_cycle", p.bound_cycle, "95 % bound reaches limit at cycle")
    life.add("cycles_left", p.cycles_left, "cycles left (bound − cycles used)")
    life.add("assumptions", p.assumptions)
    report.notes.append(p.note)

    _chart(report, "Recovery control chart", t.recovery_chart, "fraction", None)
    _chart(report, "Decay control chart", t.decay_chart, "pressure_rate", RATE_UNIT)

    rec = Table(
        "Recovery",
        [("cycle", "cycle"), ("at", "at (UTC)"), ("recovery", "recovery"),
         ("verdict", "verdict"), ("record_id", "water test")],
    )  # fmt: skip
    for r in t.recovery:
        rec.rows.append([r.cycle, r.at, Q(r.recovery, "fraction"), r.verdict, r.record_id])
    dec = Table(
        "Decay",
        [("cycle", "cycle"), ("at", "at (UTC)"), ("decay_rate", "decay rate"),
         ("record_id", "integrity test")],
    )  # fmt: skip
    for d in t.decay:
        dec.rows.append([d.cycle, d.at, Q(d.value, "pressure_rate", RATE_UNIT), d.record_id])
    signals = Table(
        "Signals",
        [("series", "series"), ("rule_set", "rule set"), ("rule", "rule"),
         ("description", "what"), ("cycle", "cycle"), ("record_id", "record")],
    )  # fmt: skip
    for series, c in (("recovery", t.recovery_chart), ("decay", t.decay_chart)):
        for v in c.signals:
            signals.rows.append([series, v.rule_set, v.rule, v.description, v.cycle, v.record_id])
    events = Table(
        "Uses and holds",
        [("at", "at (UTC)"), ("kind", "what"), ("record_id", "record"), ("text", "details")],
    )
    for e in t.events:
        events.rows.append([e.at, e.kind, e.record_id, e.text])
    report.tables += [rec, dec, signals, events]
    if not signals.rows:
        report.notes.append("no run-rule signal against the baseline limits")
    report.notes.append(SITE_NOTE)
    return report
