"""A run's master record executed step by step through the CLI (`run step`, `run steps`):
values typed with their units against ranges from the plan, performer and verifier, late
entries, refusals that write nothing, and the batch record's step table."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta
from typing import Any

import pytest

from tests.cli.test_runs import INPUTS
from tests.world import World

# The LNP template's plan for INPUTS, worked out by hand from the template's expressions:
# product mass 1.2 L x 0.5 g/L = 0.6 g; df_volume = 0.6 g / (2 g/L) = 300 mL; final_volume =
# 0.6 g / (6 g/L) = 100 mL; diavolumes for 99.5 % removal at sieving 1 = ln(1 / 0.005);
# buffer_volume = diavolumes x df_volume.
DF_VOLUME_ML = 1.2 * 0.5 / 2 * 1000
FINAL_VOLUME_ML = 1.2 * 0.5 / 6 * 1000
BUFFER_L = math.log(1 / 0.005) * DF_VOLUME_ML / 1000


def iso(at: datetime) -> str:
    return at.isoformat(timespec="seconds")


def started(w: World) -> datetime:
    """Run 1 planned, approved and started; when it started."""
    w.ready()
    w.ok(w.water("QMB-0142", "pre-use", "168 mL/min"))
    w.ok(w.as_user("eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0142",
                   "--product", "QB-117", "--lot", "QB117-26-031", *INPUTS))  # fmt: skip
    w.ok(w.as_user("qa.lin", "run", "approve-plan", "1"))
    w.ok(w.as_user("op.kim", "run", "start", "1"))
    return datetime.fromisoformat(
        w.ok(w.cli("run", "show", "1", "--json")).json()["run_1"]["started_at"]
    )


def clock_ahead(monkeypatch: pytest.MonkeyPatch, hours: float) -> None:
    """Every record from now on is entered ``hours`` later than the system clock says: the
    run's steps are then entered long after the run started, without waiting."""
    from ledger.store import audit, types

    monkeypatch.setattr(audit, "utc_now", lambda: types.utc_now() + timedelta(hours=hours))


def step(w: World, user: str, number: int, meaning: str, *more: str) -> Any:
    return w.as_user(user, "run", "step", "1", str(number), "--meaning", meaning, *more)


def values(*pairs: str) -> list[str]:
    return [x for p in pairs for x in ("--value", p)]


STEP1 = values("permeate_ph=7.4", "permeate_conductivity=15.2 mS/cm")
STEP2 = values("retentate_volume=302 mL", "tmp_observed=0.31 bar")
STEP4 = values("final_retentate_volume=101 mL")
STEP5 = values("recovered_volume=112 mL", "product_bottle=PB-117-031")


def test_a_run_executed_step_by_step(world: World, monkeypatch: pytest.MonkeyPatch) -> None:
    """Every step performed and verified through the CLI; the refusals on the way write
    nothing; `run steps` and the record context show each value, performer, verifier and
    time (SQLite and PostgreSQL)."""
    start = started(world)
    clock_ahead(monkeypatch, 1)
    done_1 = (start + timedelta(minutes=5)).replace(microsecond=0)
    late = world.ok(step(world, "op.kim", 1, "performed", *STEP1,
                         "--activity-time", iso(done_1), "--json")).json()  # fmt: skip
    assert late["late"].startswith(f"late: done at {iso(done_1)}, entered at ")
    assert late["records"][0]["late"] is True

    before = world.snapshot()
    # Step 2 before step 1 is signed is fine (step 1 needs only "performed"), but step 3
    # before step 2 is performed and verified is out of order.
    out_of_order = step(world, "op.kim", 3, "performed", *values("buffer_used=1.7 L"))
    assert out_of_order.code == 3, out_of_order
    assert "step 3 comes after step 2, which is not yet performed and verified" in (
        out_of_order.stderr
    )
    world.ok(step(world, "op.kim", 2, "performed", *STEP2))
    after_2 = world.snapshot()
    assert after_2 != before
    own = step(world, "op.kim", 2, "verified")
    assert own.code == 3 and "op.kim performed step 2; another person verifies it" in own.stderr
    twice = step(world, "op.kim", 2, "performed", *STEP2)
    assert twice.code == 3 and "step 2 is already performed by op.kim" in twice.stderr
    assert world.snapshot() == after_2
    world.ok(step(world, "eng.ray", 2, "verified"))

    # 2.2 L of buffer is above the range's top, 1.25 x the planned buffer volume.
    assert 1.25 * BUFFER_L < 2.2
    before_3 = world.snapshot()
    unexplained = step(world, "op.kim", 3, "performed", *values("buffer_used=2.2 L"))
    assert unexplained.code == 3, unexplained
    assert "OUT OF RANGE: Diafiltration buffer used 2.2 L" in unexplained.stderr
    assert "fluxledger run deviation 1 --description" in unexplained.stderr
    no_such = step(world, "op.kim", 3, "performed", *values("buffer_used=2.2 L"),
                   "--deviation", "1")  # fmt: skip
    assert no_such.code == 2 and "has no deviation 1" in no_such.stderr
    assert world.snapshot() == before_3 and before_3["step_entry"] == 3
    world.ok(world.as_user("op.kim", "run", "deviation", "1", "--description",
                           "buffer pump overshot: 2.2 L used"))  # fmt: skip
    flagged = world.ok(step(world, "op.kim", 3, "performed", *values("buffer_used=2.2 L"),
                            "--deviation", "1"))  # fmt: skip
    assert "OUT OF RANGE: Diafiltration buffer used 2.2 L" in flagged.stdout
    assert "(deviation 1)" in flagged.stdout
    world.ok(step(world, "eng.ray", 3, "verified"))
    for number, typed in ((4, STEP4), (5, STEP5)):
        world.ok(step(world, "op.kim", number, "performed", *typed))
        world.ok(step(world, "eng.ray", number, "verified"))

    listed = world.ok(world.cli("run", "steps", "1", "--json")).json()["steps"]
    assert [s["complete"] for s in listed] == [True] * 5
    first = listed[0]
    assert [(x["name"], x["typed"], x["in_range"]) for x in first["entries"]] == [
        ("permeate_ph", "7.4", True),
        ("permeate_conductivity", "15.2 mS/cm", True),
    ]
    # 15.2 mS/cm is 1.52 S/m, shown back in the entry's display unit.
    assert first["entries"][1]["value"] == {"value": pytest.approx(15.2), "unit": "mS/cm"}
    assert first["signatures"][0]["late"] is True
    buffer = listed[2]["entries"][0]
    assert buffer["in_range"] is False
    assert buffer["value"]["value"] == pytest.approx(2.2)
    assert listed[2]["signatures"][0]["deviation"] == 1

    from sqlmodel import Session

    from ledger.records.assemble import assemble

    engine = world.engine()
    with Session(engine) as session:
        ctx = assemble(session, 1)
    engine.dispose()
    steps = ctx.steps
    assert [len(s.signoffs or ()) for s in steps] == [1, 2, 2, 2, 2]
    for s in steps[1:]:
        assert s.signoffs is not None
        assert [(o.meaning, o.login) for o in s.signoffs] == [
            ("performed", "op.kim"), ("verified", "eng.ray"),
        ]  # fmt: skip
        assert all(o.done_at and o.entered_at for o in s.signoffs)
    p1 = steps[0].signoffs[0]  # type: ignore[index]
    assert p1.late and p1.done_at == iso(done_1) and p1.entered_at > p1.done_at
    assert p1.note == f"late: done at {iso(done_1)}, entered at {p1.entered_at}"
    assert all(not o.late for s in steps[1:] for o in s.signoffs or ())
    rv = steps[1].values[0]  # type: ignore[index]
    # 300 mL planned, range ±5 %: 285-315 mL.
    assert pytest.approx((285, 315)) == (DF_VOLUME_ML * 0.95, DF_VOLUME_ML * 1.05)
    assert (rv.name, rv.value, rv.range, rv.verdict) == (
        "retentate_volume", "302 mL", "285–315 mL", "in range",
    )  # fmt: skip
    low, high = BUFFER_L, 1.25 * BUFFER_L
    b = steps[2].values[0]  # type: ignore[index]
    assert (b.value, b.verdict) == ("2.2 L", "OUT OF RANGE")
    assert b.range == f"{low:.4g}–{high:.4g} L"
    assert steps[2].signoffs[0].deviation == 1  # type: ignore[index]
    final = steps[3].values[0]  # type: ignore[index]
    assert final.range == f"{FINAL_VOLUME_ML * 0.95:.4g}–{FINAL_VOLUME_ML * 1.05:.4g} mL"
    assert [v.value for v in steps[4].values or ()] == ["112 mL", "PB-117-031"]


@pytest.mark.sqlite_only
def test_every_missing_or_wrong_value_is_reported_at_once(world: World) -> None:
    started(world)
    before = world.snapshot()
    bad = step(world, "op.kim", 1, "performed", *values("permeate_ph=7.4 mL", "colour=blue"))
    assert bad.code == 2, bad
    assert "3 values of step 1 are missing or wrong" in bad.stderr
    assert "--value colour: step 1 has no entry 'colour'" in bad.stderr
    assert "--value permeate_ph: '7.4 mL' should be a plain number" in bad.stderr
    assert "--value permeate_conductivity=...: Final permeate conductivity is entered" in (
        bad.stderr
    )
    wrong_kind = step(world, "op.kim", 1, "performed",
                      *values("permeate_ph=7.4", "permeate_conductivity=15 bar"))  # fmt: skip
    assert wrong_kind.code == 2 and "--value permeate_conductivity" in wrong_kind.stderr
    assert "Traceback" not in bad.stderr + wrong_kind.stderr
    assert world.snapshot() == before


@pytest.mark.sqlite_only
def test_steps_need_a_started_run_and_a_valid_meaning(world: World) -> None:
    world.ready()
    world.ok(world.water("QMB-0142", "pre-use", "168 mL/min"))
    world.ok(world.as_user("eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0142",
                           "--product", "QB-117", "--lot", "L-2", *INPUTS))  # fmt: skip
    before = world.snapshot()
    planned = step(world, "op.kim", 1, "performed", *STEP1)
    assert planned.code == 3 and "cannot sign a step of run 1: it is planned" in planned.stderr
    world.ok(world.as_user("qa.lin", "run", "approve-plan", "1"))
    world.ok(world.as_user("op.kim", "run", "start", "1"))
    before = world.snapshot()
    for args, code, needle in (
        ((1, "reviewed"), 2, "--meaning reviewed: not a step signature"),
        ((1, "verified"), 2, "step 1 is signed as performed only"),
        ((9, "performed"), 2, "run 1 has no step 9"),
        (("two", "performed"), 2, "--step"),
    ):
        got = step(world, "op.kim", args[0], args[1])  # type: ignore[arg-type]
        assert got.code == code and needle in got.stderr, (args, got)
    admin = step(world, "sysadm", 1, "performed", *STEP1)
    assert admin.code == 3 and "may not sign a step as performed" in admin.stderr
    future = step(world, "op.kim", 1, "performed", *STEP1, "--activity-time",
                  iso(datetime.now(UTC) + timedelta(hours=1)))  # fmt: skip
    assert future.code == 2 and "in the future" in future.stderr
    early = step(world, "op.kim", 1, "performed", *STEP1, "--activity-time",
                 iso(datetime.now(UTC) - timedelta(hours=3)))  # fmt: skip
    assert early.code == 2 and "before run 1 started" in early.stderr
    wrong = world.cli("run", "step", "1", "1", "--meaning", "performed", *STEP1, "--user",
                      "op.kim", "--password-stdin", input="not-the-password\n")  # fmt: skip
    assert wrong.code != 0
    assert world.snapshot()["step_entry"] == before["step_entry"]
    world.ok(step(world, "op.kim", 1, "performed", *STEP1))
    with_values = step(world, "eng.ray", 2, "verified", *STEP2)
    assert with_values.code in (2, 3)
    world.ok(world.as_user("op.kim", "run", "finish", "1"))
    finished = step(world, "op.kim", 2, "performed", *STEP2)
    assert finished.code == 3 and "it is finished" in finished.stderr
