"""ledger.runs.report, the run's report that `run show`, `run checks` and the run page share:
quantities in their display units, the actions a status allows, the steps still to sign, and
what the skid log held, checked against the CSV file itself (read here with the csv module)
and against unit arithmetic done by hand."""

from __future__ import annotations

import csv
from datetime import UTC, datetime, timedelta
from itertools import groupby
from pathlib import Path

import pytest
from sqlmodel import Session

from ledger.runs.report import amount, qc_fields, run_lines, run_report, step_rows
from tests.cli.test_runs import MAPPING
from tests.web.test_runs import planned
from tests.world import World

pytestmark = pytest.mark.sqlite_only


def test_amount_shows_si_values_in_the_display_unit() -> None:
    # 1 mL/min = 1e-6 m³ / 60 s, so 353.4 mL/min is 353.4e-6 / 60 m³/s (arithmetic by hand).
    flow = amount(353.4e-6 / 60, "flow", "mL/min")
    assert flow.unit == "mL/min" and flow.value == pytest.approx(353.4)
    assert flow.text == "353.4 mL/min"
    # 0.45 bar = 45,000 Pa; a temperature in °C is the kelvin value less 273.15.
    assert amount(45_000.0, "pressure", "bar").value == pytest.approx(0.45)
    assert amount(293.15, "temperature", "degC").text == "20 °C"
    assert amount(float("inf"), "time").value is None


def test_the_report_of_a_run_before_and_after_its_log(world: World, tmp_path: Path) -> None:
    from ledger.cli.demo_log import write_log

    run = planned(world, "QMB-0142", "QB117-26-061")
    engine = world.engine()
    with Session(engine) as s:
        r = run_report(s, run)
        steps = step_rows(s, run)
        qc = qc_fields(s, run)
        lines = run_lines(s)
    assert r.head.status == "planned" and r.head.plan_approved_by == "qa.lin"
    assert r.checks is None  # no checks while the run is planned
    assert r.allowed == ("approve_plan", "start", "deviation", "close_deviation")
    feed = next(v for v in r.plan if v.name == "feed_flow")
    assert feed.planned.unit == "mL/min"  # type: ignore[union-attr]
    assert feed.planned.value == pytest.approx(feed.planned.si * 60e6)  # type: ignore[union-attr]
    assert [s.needs for s in steps] == [s.signatures for s in steps]
    assert not any(s.complete for s in steps)
    assert [q.name for q in qc][:2] == ["particle_size", "pdi"] and qc[0].result is None
    assert [(x.run, x.status, x.module) for x in lines] == [(run, "planned", "QMB-0142")]

    world.ok(world.as_user("op.kim", "run", "start", str(run)))
    world.wide_log_tolerance()
    log = write_log(tmp_path / "skid.csv", datetime.now(UTC) - timedelta(hours=2))
    world.ok(
        world.as_user("op.kim", "run", "import", str(run), str(log), "--mapping", str(MAPPING))
    )
    world.ok(world.as_user("op.kim", "run", "qc", str(run), "--result", "ph=7.4"))
    with Session(engine) as s:
        r = run_report(s, run)
        qc = qc_fields(s, run)
    engine.dispose()
    assert r.allowed == ("step", "import", "qc", "deviation", "close_deviation", "finish")
    assert next(q for q in qc if q.name == "ph").result == "7.4"
    assert r.checks is not None and r.checks.log is not None
    facts = r.checks.log

    # The file itself: its times (day-first, local) and its step column, read with csv.
    with log.open(newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    stamp = "%d/%m/%Y %H:%M:%S"
    first, last = (datetime.strptime(rows[i]["Time Stamp"], stamp) for i in (0, -1))
    assert facts.rows == len(rows)
    assert facts.duration.si == pytest.approx((last - first).total_seconds())
    assert facts.duration.unit == "min"
    runs_of_steps = [(label, len(list(g))) for label, g in groupby(r["Step"] for r in rows)]
    assert [(p.name, p.samples) for p in facts.phases] == runs_of_steps
    assert {"feed_flow", "feed_pressure", "temperature", "tmp", "wall_shear"} <= set(facts.channels)
    assert facts.files[0]["file_name"] == "skid.csv" and facts.imported_by == "op.kim"
    assert facts.detected is not None and facts.detected["delimiter"] == ","
    # The TMP spike: samples above 0.45 bar (45,000 Pa), counted in the file's own columns
    # as TMP = (feed + retentate) / 2 - permeate, in psi (the skid writes psi).
    psi = 6894.757293168  # Pa per psi (NIST SP 811 conversion factor)
    above = sum(
        1
        for x in rows
        if (float(x["PT-101 Feed"]) + float(x["PT-102 Retentate"])) / 2
        - float(x["PT-103 Permeate"])
        > 45_000 / psi
    )
    (spike,) = r.checks.excursions
    assert spike.name == "tmp" and spike.side == "high" and spike.samples == above
    assert spike.limit.value == pytest.approx(0.45)  # type: ignore[union-attr]
    tmp = next(c for c in r.checks.checks if c.name == "tmp")
    assert tmp.verdict == "FAIL"
