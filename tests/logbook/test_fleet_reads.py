"""The fleet reads every module's records in a few bulk queries; each row must equal what
``standing`` gives for that module alone (its own queries, the same as ``fitness``), on a
logbook with the cases that bulk reads get wrong most easily: a voided test, a released and an
open hold, a failed integrity test, a module with no tests, a type with a new limits version,
several stages per module, and the type and product filters."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest

from tests.world import TYPE_OPTIONS, World

pytestmark = pytest.mark.sqlite_only


def _compare(w: World, **filters: str) -> int:
    from sqlmodel import Session

    from ledger.logbook.fleet import fleet, standing
    from ledger.logbook.modules import list_modules
    from ledger.rules.fleet import urgency

    engine = w.engine()
    try:
        with Session(engine) as s:
            for now in (datetime.now(UTC), datetime.now(UTC) + timedelta(days=45)):
                bulk = fleet(s, now=now, **filters)  # type: ignore[arg-type]
                one = [standing(s, m, t.code, now) for m, t in list_modules(s)]
                kept = {r.serial for r in bulk}
                one = [r for r in one if r.serial in kept]
                one.sort(key=lambda r: urgency(r.status, r.fit, r.cycles_left, r.serial))
                assert bulk == one
                assert bulk, "the comparison must cover some modules"
    finally:
        engine.dispose()
    return len(bulk)


def test_the_bulk_fleet_equals_each_module_read_alone(sqlite_world: World) -> None:
    w = sqlite_world
    w.ready("QMB-0101")
    for flow in ("160 mL/min", "150 mL/min"):
        w.ok(w.cycle("QMB-0101", recovery_flow=flow))
    w.ok(w.as_user("op.kim", "care", "store", "QMB-0101", "--solution", "20 % ethanol"))
    w.ready("QMB-0102")  # a wrong post-use test voided, then a good one
    w.ok(w.as_user("op.kim", "use", "start", "QMB-0102", "--product", "QB-205", "--lot", "L-1"))
    w.ok(w.as_user("op.kim", "use", "end", "QMB-0102"))
    wrong = w.ok(w.water("QMB-0102", "post-use", "20 mL/min", "--json")).json()
    w.ok(w.as_user("eng.ray", "void", "water-test", str(wrong["record"]["id"]), "--reason",
                   "flow read off the wrong scale"))  # fmt: skip
    w.ok(w.water("QMB-0102", "post-use", "95 mL/min"))
    w.ready("QMB-0103")  # held and released, then held again
    w.ok(w.as_user("qa.lin", "module", "hold", "QMB-0103", "--reason", "dropped on the bench"))
    w.ok(w.as_user("qa.lin", "module", "release", "QMB-0103", "--decision", "return",
                   "--reason", "inspected, no damage"))  # fmt: skip
    w.ok(w.as_user("qa.lin", "module", "hold", "QMB-0103", "--reason", "housing crack"))
    w.add_module("QMB-0104")  # no tests at all
    w.add_module("QMB-0105")
    w.ok(w.baseline("QMB-0105"))
    w.integrity("QMB-0105", "13 psi")  # fails: the module goes on hold
    w.ok(w.as_user("eng.ray", "module-type", "add", "HF-300", *TYPE_OPTIONS))
    w.ok(w.as_user("op.kim", "module", "add", "QMB-0301", "--type", "HF-300"))

    assert _compare(w) == 6
    assert _compare(w, type_code="HF-300") == 1
    assert _compare(w, product="QB-117") == 1
