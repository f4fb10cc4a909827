"""The rules that read the clock, on a frozen clock (freezegun), exactly at each edge and one
second either side, through the CLI: the storage limit of the fit-for-reuse verdict, the
clean-hold window of a run start, late entries (an activity time may not be in the future,
nor before the module's latest recorded activity), and the lockout (a count that no amount
of elapsed time undoes).

The edges are the project's own rules (ledger/rules/fitness.py, ledger/rules/runs.py,
ledger/logbook/times.py, ledger/logbook/context.py, ledger/logbook/auth.py); the limits come
from the test module type (storage limit 30 d, no clean-hold window of its own, so the storage
limit stands in for it). The system clock is ledger.store.types.utc_now, which freezegun
stops. SQLite only: the database is not the subject here.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from datetime import UTC, datetime, timedelta
from typing import cast

import pytest
from freezegun import freeze_time
from freezegun.api import FrozenDateTimeFactory

from tests.cli.test_runs import plan
from tests.world import Result, World

pytestmark = pytest.mark.sqlite_only

SECOND = timedelta(seconds=1)
LIMIT = timedelta(days=30)  # --storage-limit of the test module type (tests/world.py)
EDGES = [pytest.param(-1, id="1s-before"), pytest.param(0, id="at"), pytest.param(1, id="1s-after")]


@pytest.fixture
def clock() -> Iterator[FrozenDateTimeFactory]:
    """A stopped clock one day after now, on a whole second: later than every record the
    world already holds, so the order of activity times is kept."""
    start = datetime.now(UTC).replace(microsecond=0) + timedelta(days=1)
    # pytest's own timing (--durations) keeps the real clock.
    with freeze_time(start, ignore=["_pytest"]) as frozen:
        yield cast(FrozenDateTimeFactory, frozen)


def _now() -> datetime:
    from ledger.store.types import utc_now

    return utc_now()


def _iso(t: datetime) -> str:
    return t.isoformat()


def _at(text: str) -> datetime:
    """A time as the CLI or the audit trail prints it (microseconds shown or not)."""
    return datetime.fromisoformat(text)


def test_the_clock_is_frozen_for_the_logbook(world: World, clock: FrozenDateTimeFactory) -> None:
    """Guard for the tests below: the record times are the frozen time, to the microsecond."""
    t = _now()
    world.add_module()
    out = world.ok(world.as_user(
        "op.kim", "test", "water", "QMB-0142", "--stage", "baseline", "--feed", "3.2 psi",
        "--retentate", "2.8 psi", "--flow", "170 mL/min", "--temperature", "20 degC", "--json",
    )).json()  # fmt: skip
    assert _at(out["record"]["activity_at"]) == t
    assert out["record"]["created_at"] == out["record"]["activity_at"]
    assert out["record"]["late"] is False


@pytest.mark.parametrize("offset", EDGES)
def test_storage_limit_edge(world: World, clock: FrozenDateTimeFactory, offset: int) -> None:
    """Stored for exactly the limit is still fit; one second longer is not (held > limit)."""
    world.ready()
    stored_at = _now() + timedelta(hours=1)
    clock.move_to(stored_at)
    world.ok(world.as_user("op.kim", "care", "store", "QMB-0142", "--solution", "20 % ethanol"))
    clock.move_to(stored_at + LIMIT + offset * SECOND)
    fit = world.cli("fitness", "QMB-0142", "--json")
    storage = next(r for r in fit.json()["reasons"] if r["check"] == "storage")
    held_days = (LIMIT + offset * SECOND).total_seconds() / 86400
    assert storage["value"]["unit"] == "d"
    assert storage["value"]["value"] == pytest.approx(held_days, abs=1e-9)
    assert storage["limit"] == {"value": 30.0, "unit": "d"}
    if offset <= 0:
        assert storage["outcome"] == "ok", storage
        assert fit.code == 0 and fit.json()["verdict"] == "FIT"
    else:
        assert storage["outcome"] == "fail", storage
        assert "clean and retest before use" in storage["reason"]
        assert fit.code == 1 and fit.json()["verdict"] == "NOT FIT"


@pytest.mark.parametrize("offset", EDGES)
def test_clean_hold_window_edge(world: World, clock: FrozenDateTimeFactory, offset: int) -> None:
    """A run starts while its pre-use and integrity tests are at most the clean-hold window
    old (the type has none of its own, so the 30 d storage limit applies); one second
    beyond, the start is refused and writes nothing."""
    tested_at = _now()
    world.ready()  # baseline and integrity test, both at tested_at
    world.ok(world.water("QMB-0142", "pre-use", "168 mL/min"))
    world.ok(cast(Result, plan(world)))
    clock.move_to(tested_at + LIMIT + offset * SECOND)
    before = world.snapshot()
    started = world.as_user("op.kim", "run", "start", "1")
    if offset <= 0:
        world.ok(started)
        run = world.ok(world.cli("run", "show", "1", "--json")).json()
        assert run["run_1"]["status"] == "in_progress"
        assert world.status() == "in_use"
    else:
        assert started.code == 3, started
        assert "beyond the clean-hold window of 720 h" in started.stderr
        assert "pre-use water-flux test is 720.0 h old" in started.stderr
        assert "integrity test is 720.0 h old" in started.stderr
        assert world.snapshot() == before


@pytest.mark.parametrize("offset", EDGES)
def test_activity_time_may_not_be_in_the_future(
    world: World, clock: FrozenDateTimeFactory, offset: int
) -> None:
    """--activity-time now is a late entry at exactly now; one second ahead is refused (exit 2,
    nothing written); one second back is a late entry."""
    world.add_module()
    now = _now()
    given = now + offset * SECOND
    before = world.snapshot()
    out = world.as_user(
        "op.kim", "test", "water", "QMB-0142", "--stage", "baseline", "--feed", "3.2 psi",
        "--retentate", "2.8 psi", "--flow", "170 mL/min", "--temperature", "20 degC",
        "--activity-time", _iso(given), "--json",
    )  # fmt: skip
    if offset <= 0:
        record = world.ok(out).json()["record"]
        assert record["late"] is True
        assert _at(record["activity_at"]) == given
        assert _at(record["created_at"]) == now
    else:
        assert out.code == 2 and out.exception is None, out
        assert "is in the future" in out.stderr and "activity" in out.stderr
        assert world.snapshot() == before


def test_activity_time_may_not_go_back_before_the_latest_activity(
    world: World, clock: FrozenDateTimeFactory
) -> None:
    """Records are entered in the order they happened: one second before the module's latest
    activity is refused (exit 2, nothing written); exactly at it, and one second after it,
    are accepted."""
    world.add_module()
    latest = _now() - timedelta(hours=2)
    world.ok(world.as_user(
        "op.kim", "test", "water", "QMB-0142", "--stage", "baseline", "--feed", "3.2 psi",
        "--retentate", "2.8 psi", "--flow", "170 mL/min", "--temperature", "20 degC",
        "--activity-time", _iso(latest),
    ))  # fmt: skip
    before = world.snapshot()
    early = world.integrity("QMB-0142", "14.95 psi", "--activity-time", _iso(latest - SECOND))
    assert early.code == 2 and "before module QMB-0142's latest recorded activity" in early.stderr
    assert world.snapshot() == before
    at = world.ok(world.integrity("QMB-0142", "14.95 psi", "--activity-time", _iso(latest)))
    assert "pass" in at.stdout
    assert world.status() == "available"
    after = world.water(
        "QMB-0142", "pre-use", "168 mL/min", "--activity-time", _iso(latest + SECOND)
    )
    world.ok(after)
    events = world.cli("audit", "show", "--entity", "water_flux_test", "--json").json()["events"]
    times = [
        _at(json.loads(e["new_value"])["activity_at"]) for e in events if e["action"] == "create"
    ]
    assert times == [latest, latest + SECOND]


def test_lockout_is_a_count_that_time_does_not_undo(
    world: World, clock: FrozenDateTimeFactory
) -> None:
    """Lockout has no time window: one failure short of the threshold the account still
    works, at the threshold it is locked, and one second, or a year, later it is still
    locked. Each failure is audited at the frozen time."""
    world.ok(world.as_user("sysadm", "user", "lockout", "--max-failures", "3", "--reason", "t"))
    wrong = ["module", "add", "QMB-0150", "--type", "HF-750", "--user", "op.kim"]
    locked_at = _now()
    first = [world.cli(*wrong, "--password-stdin", input="guess-guess\n") for _ in range(2)]
    assert [r.code for r in first] == [3, 3] and "1 attempts left" in first[1].stderr
    world.ok(world.as_user("op.kim", "module", "add", "QMB-0150", "--type", "HF-750"))  # resets
    three = [world.cli(*wrong, "--password-stdin", input="guess-guess\n") for _ in range(3)]
    assert "now locked" in three[2].stderr and "now locked" not in three[1].stderr
    for later in (SECOND, timedelta(days=365)):
        clock.move_to(locked_at + later)
        refused = world.as_user("op.kim", "module", "add", "QMB-0151", "--type", "HF-750")
        assert refused.code == 3 and "is locked after repeated wrong passwords" in refused.stderr
    events = world.cli("audit", "show", "--entity", "user", "--json").json()["events"]
    failed = [e for e in events if e["action"] == "sign_in_failed" and e["field"] == "locked"]
    assert [_at(e["at"]) for e in failed] == [locked_at]
