"""Eight processes write at once, 70 writes each (water-flux tests, integrity tests,
cleanings, and signatures on two runs), through the services as the front ends call them, on
SQLite (WAL, BEGIN IMMEDIATE, busy timeout) and on PostgreSQL: afterwards every write is
there exactly once, the audit chain verifies, and no caller saw an error ("database is
locked" or any other). And two processes adding one login at once: one wins, the other is
told the ID exists."""

from __future__ import annotations

from collections import Counter
from typing import Any

import pytest
from sqlalchemy import func, select
from sqlmodel import Session

from ledger.store import audit
from ledger.store.tables import (
    Cleaning,
    IntegrityTest,
    Module,
    Signature,
    UserAccount,
    WaterFluxTest,
)
from tests.reliability import procs
from tests.reliability.conftest import WRITER_MODULES
from tests.world import World

WRITES = 70  # each; the eight start together at a barrier, so their writes overlap throughout
SIGNING = {0: 1, 1: 2}  # writer index -> the run whose four signatures it adds among its writes
TABLES = {"water": WaterFluxTest, "integrity": IntegrityTest, "cleaning": Cleaning}


def _plan(index: int) -> list[str]:
    """The writes of writer ``index``: whole cycles of module writes, and for the two signing
    writers the four signatures of their run spread among them."""
    signs = [f"sign:{m}:{u}" for m, u in procs.MEANINGS] if index in SIGNING else []
    kinds = list(procs.CYCLE * WRITES)[: WRITES - len(signs)]
    for n, kind in enumerate(signs):
        kinds.insert((n + 1) * WRITES // (len(signs) + 1), kind)
    assert len(kinds) == WRITES
    return kinds


def _kind(k: str) -> str:
    return "water" if k.startswith("water:") else "signature" if k.startswith("sign:") else k


def _rows(w: World) -> dict[tuple[str, str], int]:
    """Rows of each kind per module serial, and signatures per run ("run 1")."""
    engine = w.engine()
    out: dict[tuple[str, str], int] = {}
    with Session(engine) as s:
        for kind, table in TABLES.items():
            q = (select(Module.serial, func.count()).join(table, table.module_id == Module.id)  # type: ignore[arg-type]
                 .group_by(Module.serial))  # fmt: skip
            out.update({(str(serial), kind): int(n) for serial, n in s.execute(q)})
        q2 = select(Signature.run_id, func.count()).group_by(Signature.run_id)  # type: ignore[arg-type]
        out.update({(f"run {r}", "signature"): int(n) for r, n in s.execute(q2)})
    engine.dispose()
    return out


@pytest.mark.slow
def test_eight_writers_lose_nothing_and_see_no_error(fleet_world: World) -> None:
    w = fleet_world
    ctx = procs.context()
    before = _rows(w)
    start = ctx.Barrier(len(WRITER_MODULES))
    results = ctx.Queue()
    plans = {serial: _plan(i) for i, serial in enumerate(WRITER_MODULES)}
    workers = [
        ctx.Process(target=procs.writer,
                    args=(w.url, serial, plans[serial], SIGNING.get(i), start, results))
        for i, serial in enumerate(WRITER_MODULES)
    ]  # fmt: skip
    for p in workers:
        p.start()
    reports = [results.get(timeout=300) for _ in workers]
    for p in workers:
        p.join(timeout=60)
        assert p.exitcode == 0
    errors = [e for _, _, errs in reports for e in errs]
    assert errors == [], "\n".join(errors[:5])
    made: Counter[tuple[str, str]] = Counter()
    for i, serial in enumerate(WRITER_MODULES):
        for k in plans[serial]:
            made[(f"run {SIGNING[i]}" if k.startswith("sign:") else serial, _kind(k))] += 1
    assert sum(made.values()) == WRITES * len(WRITER_MODULES)
    after = _rows(w)
    grown = {key: after.get(key, 0) - before.get(key, 0) for key in set(after) | set(before)}
    assert {k: v for k, v in grown.items() if v} == dict(made)
    engine = w.engine()
    with Session(engine) as s:
        result = audit.verify(s)
    engine.dispose()
    assert result.ok, result.problems
    assert result.events > WRITES * len(WRITER_MODULES)


def test_two_processes_add_one_login_and_exactly_one_wins(world: World) -> None:
    ctx = procs.context()
    barrier = ctx.Barrier(2)
    results = ctx.Queue()
    racers = [ctx.Process(target=procs.add_same_login, args=(world.url, barrier, results))
              for _ in range(2)]  # fmt: skip
    for p in racers:
        p.start()
    outcomes: list[Any] = sorted(results.get(timeout=120) for _ in racers)
    for p in racers:
        p.join(timeout=60)
    refusal = ("InputError: user ID 'op.same' exists (or existed): IDs are never reused; "
               "expected a new user ID")  # fmt: skip
    assert outcomes == [refusal, "created"] or outcomes == ["created", refusal], outcomes
    engine = world.engine()
    with Session(engine) as s:
        count = s.execute(
            select(func.count()).select_from(UserAccount).where(UserAccount.login == "op.same")
        ).scalar_one()
        assert audit.verify(s).ok
    engine.dispose()
    assert count == 1
