"""A module's wear as series read from its logged history: NWP recovery after each cleaning
and the pressure-decay rate of each integrity test, each against the cycle it followed.

A point's cycle is the number of valid uses that started before it, so the baseline (before
any use) is cycle 0 and the post-clean test after the third use is cycle 3. Voided records are
left out. Recovery is a fraction of baseline NWP; decay rates are Pa/s.
"""

from __future__ import annotations

from bisect import bisect_left
from collections.abc import Iterable
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlmodel import Session, col, select

from ledger.store.tables import IntegrityTest, ModuleUse, WaterFluxTest


@dataclass(frozen=True)
class Point:
    """One point of a wear series: the cycle it followed, when, its value (SI / fraction) and
    the record it comes from."""

    cycle: int
    at: datetime
    value: float
    record_id: int


def _use_starts(session: Session, module_id: int) -> list[datetime]:
    return sorted(
        session.exec(
            select(ModuleUse.activity_at).where(
                ModuleUse.module_id == module_id,
                col(ModuleUse.voided_at).is_(None),
            )
        ).all()
    )


def recovery_series(session: Session, module_id: int) -> list[Point]:
    """Post-clean NWP recovery (fraction of baseline) per cycle, oldest first; the baseline
    test itself is the point (0, 1.0) when it exists."""
    starts = _use_starts(session, module_id)
    rows = session.exec(
        select(WaterFluxTest)
        .where(
            WaterFluxTest.module_id == module_id,
            col(WaterFluxTest.voided_at).is_(None),
            col(WaterFluxTest.stage).in_(("baseline", "post_clean")),
        )
        .order_by(col(WaterFluxTest.activity_at), col(WaterFluxTest.id))
    ).all()
    return recovery_points(rows, starts)


def recovery_points(rows: Iterable[Any], starts: list[datetime]) -> list[Point]:
    """The recovery series from a module's valid baseline and post-clean tests (oldest first;
    each with stage, activity_at, recovery and id) and its sorted use start times: the
    baseline is 1.0, a post-clean test its recovery (one without is left out)."""
    out: list[Point] = []
    for r in rows:
        assert r.id is not None
        cycle = bisect_left(starts, r.activity_at)
        if r.stage == "baseline":
            out.append(Point(cycle, r.activity_at, 1.0, r.id))
        elif r.recovery is not None:
            out.append(Point(cycle, r.activity_at, r.recovery, r.id))
    return out


def decay_series(session: Session, module_id: int) -> list[Point]:
    """Pressure-decay rates (Pa/s) of the module's decay tests per cycle, oldest first."""
    starts = _use_starts(session, module_id)
    rows = session.exec(
        select(IntegrityTest)
        .where(
            IntegrityTest.module_id == module_id,
            col(IntegrityTest.voided_at).is_(None),
            IntegrityTest.kind == "pressure_decay",
        )
        .order_by(col(IntegrityTest.activity_at), col(IntegrityTest.id))
    ).all()
    return [
        Point(bisect_left(starts, r.activity_at), r.activity_at, r.decay_rate_pa_s, r.id)
        for r in rows
        if r.decay_rate_pa_s is not None and r.id is not None
    ]
