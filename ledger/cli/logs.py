"""`fluxledger log summarize`: a skid log's actuals and excursions without a database."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.cli.describe import SITE_NOTE

app = typer.Typer(help="Skid data logs: a quick look without a database.", no_args_is_help=True)


@app.command("summarize")
@guarded
def summarize(
    file: Path = typer.Argument(..., help="The skid's CSV data log (read, never changed)."),
    mapping: Path = typer.Option(..., "--mapping", help="TOML mapping of the file's columns."),
    limits: Path | None = typer.Option(
        None, "--limits", help="TOML file of [[range]] tables: channel, low/high, phase."
    ),
    area: str | None = quantity_option(None, "--area", help="Membrane area, for flux."),
    fibers: int | None = typer.Option(None, "--fibers", help="Fiber count, for wall shear."),
    lumen_diameter: str | None = quantity_option(
        None, "--lumen-diameter", help="Fiber lumen ID, for wall shear."
    ),
    phase: list[str] = typer.Option(
        [], "--phase", help="A phase by time when the log has no phase column: NAME=START/END."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Durations, TMP, flows, shear, flux, permeate volume, diavolumes, concentration factor
    and excursions, per phase and for the run."""
    import json

    from ledger import units
    from ledger.cli.runs import windows
    from ledger.errors import InputError
    from ledger.runs.actuals import Geometry, summary_json
    from ledger.runs.actuals import summarize as compute
    from ledger.runs.limits import load_limits
    from ledger.runs.mapping import load_mapping
    from ledger.runs.skidlog import read_log

    if fibers is not None and fibers < 1:
        raise InputError("--fibers must be at least 1", field="fibers", value=fibers,
                         expected="a whole number of 1 or more")  # fmt: skip
    geometry = Geometry(
        units.parse(area, "area", field="--area", positive=True) if area else None,
        fibers,
        units.parse(lumen_diameter, "length", field="--lumen-diameter", positive=True)
        if lumen_diameter
        else None,
    )
    ranges = load_limits(limits) if limits else []
    spans = windows(phase)
    log = read_log(file, load_mapping(mapping))
    s = compute(log, geometry, ranges, spans or None)
    if as_json:
        typer.echo(json.dumps(summary_json(s), indent=2, ensure_ascii=False))
        return
    _print(s)


def _print(s: Any) -> None:
    from ledger.cli.output import Q, Report, Table

    report = Report("log summarize")
    head = report.section("Skid log")
    head.add("file", s.source)
    head.add("sha256", s.sha256, "SHA-256")
    head.add("rows", s.rows)
    head.add("start", s.start)
    head.add("end", s.end)

    def maybe(v: float | None, kind: str) -> Any:
        return None if v is None else Q(v, kind)

    table = Table("Actuals", [("phase", "phase"), ("duration", "duration"),
                              ("tmp", "mean TMP"), ("feed_flow", "mean feed"),
                              ("permeate", "permeate"), ("final_volume", "final volume"),
                              ("cf", "CF"), ("dv", "DV"), ("flux", "mean flux")])  # fmt: skip
    for a in [s.run, *s.phases]:

        def mean(k: str, kind: str, a: Any = a) -> Any:
            return Q(a.stats[k].mean, kind) if k in a.stats else None

        table.rows.append([
            a.phase or "whole run", Q(a.duration_s, "time"), mean("tmp", "pressure"),
            mean("feed_flow", "flow"), maybe(a.permeate_volume_m3, "volume"),
            None if a.final_volume_m3 is None else Q(a.final_volume_m3, "volume", "mL"),
            _round(a.concentration_factor), _round(a.diavolumes),
            mean("flux", "flux"),
        ])  # fmt: skip
    report.tables.append(table)
    if s.excursions:
        from ledger.runs.actuals import KINDS

        exc = Table("Excursions", [("name", "range"), ("phase", "phase"), ("side", "side"),
                                   ("start", "start"), ("duration", "duration"),
                                   ("worst", "worst"), ("limit", "limit")])  # fmt: skip
        for e in s.excursions:
            exc.rows.append([e.name, e.phase or "—", e.side, e.start.isoformat(timespec="seconds"),
                             Q(e.duration_s, "time", "s"), Q(e.worst, KINDS[e.channel]),
                             Q(e.limit, KINDS[e.channel])])  # fmt: skip
        report.tables.append(exc)
    for n in s.not_computed:
        report.notes.append(f"not computed: {n.what}: {n.why}")
    report.notes.extend(s.assumptions)
    report.notes.append(SITE_NOTE)
    report.print(False)


def _round(x: float | None) -> float | None:
    return None if x is None else round(x, 2) + 0.0  # + 0.0 turns -0.0 into 0.0
