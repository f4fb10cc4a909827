"""The fleet overview: every module's standing in one list, most urgent first (read-only).

For each module: status, the fit-for-reuse verdict, cycles used of the reuse limit, the last
post-clean recovery and the trend of the latest ones, the cycles left by the reuse-life
projection, when its storage runs out and its open holds.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta

from sqlmodel import Session, col, select

from ledger.logbook.fitness import facts
from ledger.logbook.module_trend import project
from ledger.logbook.modules import get_type, list_modules, row_id
from ledger.logbook.wear import recovery_series
from ledger.rules.fitness import verdict
from ledger.rules.fleet import trend_slope, trend_word, urgency
from ledger.store.tables import Hold, Module, ModuleUse
from ledger.store.types import utc_now


@dataclass(frozen=True)
class Standing:
    """One module's row of the overview.

    Recoveries are fractions of baseline NWP, ``slope`` a fraction per cycle, ``cycles_left``
    cycles (None: no projection), ``storage_expires`` a UTC time (None: not in storage).
    """

    serial: str
    type_code: str
    status: str
    verdict: str
    fit: bool
    cycles: int
    reuse_limit: int
    last_recovery: float | None
    trend: str | None
    slope: float | None
    cycles_left: float | None
    life_status: str | None
    storage_expires: datetime | None
    holds: tuple[str, ...]


def _uses_product(session: Session, module: Module, product: str) -> bool:
    if module.dedicated_product == product:
        return True
    found = session.exec(
        select(ModuleUse.id).where(
            ModuleUse.module_id == module.id,
            ModuleUse.product == product,
            col(ModuleUse.voided_at).is_(None),
        )
    ).first()
    return found is not None


def _open_holds(session: Session, module_id: int) -> tuple[str, ...]:
    rows = session.exec(
        select(Hold.reason)
        .where(Hold.module_id == module_id, col(Hold.decision).is_(None))
        .order_by(col(Hold.id))
    ).all()
    return tuple(rows)


def standing(session: Session, module: Module, type_code: str, now: datetime) -> Standing:
    """One module's standing at ``now``."""
    mid = row_id(module.id)
    f = facts(session, module, None, now)
    v = verdict(f)
    points = recovery_series(session, mid)
    cycles = [float(p.cycle) for p in points]
    values = [p.value for p in points]
    slope = trend_slope(cycles, values)
    life = project(points, f.limits.recovery_min, f.cycles)
    left = None if life.cycles_left is None else max(0.0, life.cycles_left)
    expires = (
        f.storage_start + timedelta(seconds=f.limits.storage_limit_s)
        if f.storage_start is not None
        else None
    )
    return Standing(
        serial=module.serial,
        type_code=type_code,
        status=module.status,
        verdict=v.word,
        fit=v.fit,
        cycles=f.cycles,
        reuse_limit=f.limits.reuse_limit_cycles,
        last_recovery=f.post_clean.ratio if f.post_clean is not None else None,
        trend=trend_word(slope) if slope is not None else None,
        slope=slope,
        cycles_left=left,
        life_status=life.status,
        storage_expires=expires,
        holds=_open_holds(session, mid),
    )


def fleet(
    session: Session,
    type_code: str | None = None,
    product: str | None = None,
    now: datetime | None = None,
) -> list[Standing]:
    """Every module (of type ``type_code``; dedicated to or used for ``product``), most urgent
    first: on hold, then NOT FIT, then fewest projected cycles left, then serial."""
    if type_code is not None:
        get_type(session, type_code)  # an unknown type is an input error, not an empty list
    at = now or utc_now()
    rows = [
        standing(session, m, t.code, at)
        for m, t in list_modules(session)
        if (type_code is None or t.code == type_code)
        and (product is None or _uses_product(session, m, product))
    ]
    return sorted(rows, key=lambda r: urgency(r.status, r.fit, r.cycles_left, r.serial))
