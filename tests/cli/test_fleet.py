"""`fluxledger fleet`: every module, most urgent first, with its recovery trend and life.

Recovery of a post-clean test is its NWP over the baseline's; at the same TMP and temperature
that is the ratio of the flows (NWP = flux / (TMP · viscosity factor)), so the flows below give
the recovery series directly. The slope is checked against numpy.polyfit (PyPI reference
library); the cycles left against ledger.science.trending.project_life, whose ICH Q1E
projection is itself checked in tests/science (here only its use is checked).
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import numpy as np
import pytest

from tests.world import TYPE_OPTIONS, World, invoke

pytestmark = pytest.mark.sqlite_only

BASE, FLOWS = 170.0, (160.0, 148.0)  # mL/min: baseline, then post-clean after each use


def test_fleet_order_filters_and_json(sqlite_world: World) -> None:
    from ledger.science.trending import project_life

    w = sqlite_world
    # Serials in reverse order of urgency, so sorting by serial alone would fail.
    w.ready("QMB-0101")  # used twice, falling recovery: FIT, with a projection
    for flow in FLOWS:
        w.ok(w.cycle("QMB-0101", recovery_flow=f"{flow:g} mL/min"))
    before = datetime.now(UTC)
    w.ok(w.as_user("op.kim", "care", "store", "QMB-0101", "--solution", "20 % ethanol"))
    after = datetime.now(UTC)
    w.add_module("QMB-0202")  # commissioning: NOT FIT
    w.ok(w.as_user("eng.ray", "module-type", "add", "HF-300", *TYPE_OPTIONS))
    w.ok(w.as_user("op.kim", "module", "add", "QMB-0303", "--type", "HF-300"))
    w.ok(w.as_user("qa.lin", "module", "hold", "QMB-0303", "--reason", "housing crack"))

    out = w.ok(w.cli("fleet", "--json")).json()
    rows = out["fleet"]
    assert [r["serial"] for r in rows] == ["QMB-0303", "QMB-0202", "QMB-0101"]
    held, new, used = rows
    assert (held["status"], held["verdict"], held["holds"]) == (
        "on_hold",
        "NOT FIT",
        ["housing crack"],
    )
    assert (new["status"], new["verdict"], new["cycles_left"]) == ("commissioning", "NOT FIT", None)

    assert used["verdict"] == "FIT"
    assert (used["cycles"], used["reuse_limit"]) == (2, 3)
    cycles, recovery = [0, 1, 2], [1.0, *(f / BASE for f in FLOWS)]
    assert used["last_recovery"] == {
        "value": pytest.approx(100 * FLOWS[-1] / BASE),
        "unit": "percent",
    }
    reference = float(np.polyfit(cycles, recovery, 1)[0])  # numpy.polyfit
    assert used["slope_per_cycle"]["value"] == pytest.approx(100 * reference)
    assert used["trend"] == "falling"
    life = project_life(cycles, recovery, 0.80)  # the test world's recovery minimum (default)
    assert life.bound_crossing is not None
    assert used["cycles_left"] == pytest.approx(life.bound_crossing - 2, abs=0.05)
    assert used["life_projection"] == "projected"
    expires = datetime.fromisoformat(used["storage_expires"])  # stored now + limit of 30 d
    assert before + timedelta(days=30) <= expires <= after + timedelta(days=30)
    assert held["storage_expires"] is None  # not in storage

    typed = w.ok(w.cli("fleet", "--type", "HF-300", "--json")).json()["fleet"]
    assert [r["serial"] for r in typed] == ["QMB-0303"]
    product = w.ok(w.cli("fleet", "--product", "QB-117", "--json")).json()["fleet"]
    assert [r["serial"] for r in product] == ["QMB-0101"]

    unknown = w.cli("fleet", "--type", "HF-999")
    assert unknown.code == 2 and unknown.exception is None
    assert "HF-999" in unknown.stderr + unknown.stdout

    table = w.ok(invoke(["fleet", "--db", w.url], env={"COLUMNS": "200"})).stdout
    assert table.index("QMB-0303") < table.index("QMB-0202") < table.index("QMB-0101")
