"""`fluxledger log summarize`: a skid log's actuals and excursions, without a database."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded, quantity_option

app = typer.Typer(help="Skid data logs: a quick look without a database.", no_args_is_help=True)

# (channel, column label) of the channel-means table, in this order when computed
MEANS = (
    ("tmp", "TMP"),
    ("pressure_drop", "ΔP"),
    ("feed_flow", "feed"),
    ("permeate_flow", "permeate"),
    ("flux", "flux"),
    ("wall_shear", "shear"),
    ("temperature", "temp."),
)


@app.command("summarize")
@guarded
def summarize(
    file: list[Path] = typer.Argument(
        ...,
        help="The skid's data log: CSV in any common dialect, or an .xlsx workbook; several "
        "files of one run are read in the order given and joined (read, never changed).",
    ),
    mapping: Path = typer.Option(..., "--mapping", help="TOML mapping of the file's columns."),
    limits: Path | None = typer.Option(
        None, "--limits", help="TOML file of [[range]] tables: channel, low/high, phase, name."
    ),
    area: str | None = quantity_option(None, "--area", help="Membrane area, for flux."),
    fibers: int | None = typer.Option(None, "--fibers", help="Fiber count, for wall shear."),
    lumen_diameter: str | None = quantity_option(
        None, "--lumen-diameter", help="Fiber lumen inner diameter, for wall shear."
    ),
    phase: list[str] = typer.Option(
        [],
        "--phase",
        help="A phase by time, NAME=START/END (ISO 8601 with offset); repeatable. "
        "Replaces the log's phase column.",
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Durations, TMP, flows, shear, flux, permeate volume, diavolumes, concentration factor
    and excursions, per phase and for the run. Excursions do not change the exit code."""
    import json

    from ledger.entries.runs import log_summary
    from ledger.runs.actuals import Geometry, summary_json
    from ledger.runs.summary import summarize_file

    e = log_summary(locals())
    s, with_limits = summarize_file(
        e.file,
        e.mapping,
        limits=e.limits,
        geometry=Geometry(e.area_m2, e.fibers, e.lumen_diameter_m),
        phases=e.phases,
    )
    if as_json:
        typer.echo(json.dumps(summary_json(s), indent=2, ensure_ascii=False))
        return
    _print(s, with_limits=with_limits)


def _when(t: Any) -> str:
    return str(t.strftime("%Y-%m-%d %H:%M:%S"))


def _print(s: Any, *, with_limits: bool) -> None:
    from ledger.cli.describe import SITE_NOTE
    from ledger.cli.output import Q, Report, Table

    report = Report("log summarize")
    head = report.section("Skid log")
    head.add("file", s.source)
    head.add("sha256", f"{s.sha256[:16]}…" if s.sha256 else None, "SHA-256")
    for f in s.files:
        if len(s.files) > 1:
            head.add(f"file {f['name']}", f"{f['rows']} rows, sha256 {(f['sha256'] or '')[:16]}…")
        head.add(f"read as ({f['name']})" if len(s.files) > 1 else "read as", _dialect(f))
    head.add("rows", s.rows)
    head.add("start", f"{_when(s.start)} UTC")
    head.add("end", f"{_when(s.end)} UTC")
    scopes = [s.run, *s.phases]

    def q(v: float | None, kind: str, unit: str | None = None) -> Any:
        return None if v is None else Q(v, kind, unit)

    table = Table("Actuals", [("phase", "phase"), ("duration", "duration"),
                              ("permeate", "permeate"), ("initial", "start vol."),
                              ("final", "end vol."), ("cf", "CF"), ("dv", "DV"),
                              ("decline", "flux decline")])  # fmt: skip
    for a in scopes:
        table.rows.append([
            a.phase or "whole run", _duration(a.duration_s), q(a.permeate_volume_m3, "volume"),
            q(a.initial_volume_m3, "volume"), q(a.final_volume_m3, "volume"),
            _fixed(a.concentration_factor, 2), _fixed(a.diavolumes, 2),
            None if a.flux_decline is None else f"{_fixed(100 * a.flux_decline, 1)} %",
        ])  # fmt: skip
    report.tables.append(table)
    # permeate flow only when there is no flux (the same figure per area), to fit 100 columns
    skip = {"permeate_flow"} if "flux" in s.run.stats else set()
    shown = [(k, label) for k, label in MEANS if k in s.run.stats and k not in skip]
    if shown:
        from ledger.runs.actuals import CHANNEL_KINDS

        means = Table("Time-weighted means", [("phase", "phase"), *shown])
        for a in scopes:
            means.rows.append(
                [a.phase or "whole run"] + [Q(a.stats[k].mean, CHANNEL_KINDS[k]) for k, _ in shown]
            )
        report.tables.append(means)
    if s.excursions:
        from ledger.runs.actuals import CHANNEL_KINDS

        exc = Table(
            "Excursions",
            [
                ("name", "range"),
                ("phase", "phase"),
                ("side", "side"),
                ("start", "start (UTC)"),
                ("duration", "duration"),
                ("samples", "samples"),
                ("worst", "worst"),
                ("limit", "limit"),
            ],
        )
        one_day = s.start.date() == s.end.date()
        clock = "%H:%M:%S" if one_day else "%m-%d %H:%M:%S"
        for e in s.excursions:
            exc.rows.append(
                [
                    e.name,
                    e.phase or "—",
                    e.side,
                    e.start.strftime(clock),
                    Q(e.duration_s, "time", "s"),
                    e.samples,
                    Q(e.worst, CHANNEL_KINDS[e.channel]),
                    Q(e.limit, CHANNEL_KINDS[e.channel]),
                ]
            )
        report.tables.append(exc)
    elif with_limits:
        report.notes.append("no excursions: every sample is within its range")
    for what, why in _grouped(s.not_computed):
        report.notes.append(f"not computed: {what}: {why}")
    report.notes.extend(f"warning: {w}" for w in s.warnings)
    report.notes.extend(f"assumption: {a}" for a in s.assumptions)
    if with_limits:
        report.notes.append(SITE_NOTE)
    report.print(False)


def _dialect(f: dict[str, Any]) -> str:
    """How the file was read, with what was detected rather than given in the mapping."""
    d = f.get("dialect")
    if not d:
        return "—"
    if d["encoding"] == "xlsx":
        text = f"workbook, sheet {d['sheet']!r}, header row {d['header_line']}"
    else:
        sep = {",": "comma", ";": "semicolon", "\t": "tab"}.get(d["delimiter"], d["delimiter"])
        mark = "decimal comma" if d["decimal"] == "," else "decimal point"
        text = f"{d['encoding']}, {sep}, {mark}, header line {d['header_line']}"
    if d["units_row"]:
        text += ", units row checked"
    if d["detected"]:
        text += f" (detected: {', '.join(d['detected'])})"
    return text


def _grouped(items: list[Any]) -> list[tuple[str, str]]:
    """Not-computed items with the same reason on one line."""
    out: dict[str, list[str]] = {}
    for n in items:
        out.setdefault(n.why, []).append(n.what)
    return [(", ".join(whats), why) for why, whats in out.items()]


def _duration(seconds: float) -> str:
    """H:MM:SS, to the second."""
    whole = round(seconds)
    return f"{whole // 3600}:{whole % 3600 // 60:02d}:{whole % 60:02d}"


def _fixed(x: float | None, decimals: int) -> str | None:
    """A plain number with fixed decimals (no "-0.0")."""
    return None if x is None else f"{round(x, decimals) + 0.0:.{decimals}f}"
