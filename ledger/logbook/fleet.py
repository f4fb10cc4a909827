"""The fleet overview: every module's standing in one list, most urgent first (read-only).

For each module: status, the fit-for-reuse verdict, cycles used of the reuse limit, the last
post-clean recovery and the trend of the latest ones, the cycles left by the reuse-life
projection, when its storage runs out and its open holds.

``standing`` reads one module's records as ``fluxledger fitness`` and ``history`` do (a dozen
indexed queries). ``fleet`` reads the same records for every module at once (one query per kind
of record, the latest of each module picked by a window function), then builds each module's
facts and recovery series exactly as ``fitness.facts`` and ``wear.recovery_series`` do and the
row as ``standing`` does: the same rows, without a dozen queries per module (bench/web.py
checks them equal on 1,000 modules).
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from functools import cache
from typing import Any

from sqlalchemy import func
from sqlalchemy import select as core_select
from sqlmodel import Session, col, select

from ledger.logbook import typelimits
from ledger.logbook.fitness import facts, type_limits
from ledger.logbook.module_trend import project
from ledger.logbook.modules import get_type, list_types, row_id
from ledger.logbook.wear import Point, recovery_points, recovery_series
from ledger.rules.fitness import (
    CleaningResult,
    Facts,
    IntegrityResult,
    Limits,
    WaterResult,
    verdict,
)
from ledger.rules.fleet import trend_slope, trend_word, urgency
from ledger.store.tables import (
    STAGES,
    Cleaning,
    CleaningProcedure,
    Hold,
    IntegrityTest,
    Module,
    ModuleUse,
    Storage,
    WaterFluxTest,
)
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
    return _standing(module, type_code, f, recovery_series(session, mid), _open_holds(session, mid))


def _standing(
    module: Any, type_code: str, f: Facts, points: list[Point], holds: tuple[str, ...]
) -> Standing:
    v = verdict(f)
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
        holds=holds,
    )


@dataclass
class _Book:
    """The records the overview reads, for every module at once, keyed by module ID: valid
    (not voided) records only, each "latest" newest by (activity time, ID) as in
    ``logbook.latest``."""

    use_starts: dict[int, list[datetime]] = field(default_factory=dict)  # sorted
    storage: dict[int, Any] = field(default_factory=dict)
    cleaning: dict[int, Any] = field(default_factory=dict)
    integrity: dict[int, Any] = field(default_factory=dict)
    water: dict[tuple[int, str], Any] = field(default_factory=dict)  # latest per stage
    recovery_rows: dict[int, list[Any]] = field(default_factory=dict)  # oldest first
    holds: dict[int, list[str]] = field(default_factory=dict)  # open ones, by ID
    procedures: dict[int, str] = field(default_factory=dict)  # cleaning procedure ID -> code


def _latest(cls: Any, columns: list[Any], per_stage: bool = False) -> Any:
    """The newest valid record of each module (of each module and stage): ``columns`` of it."""
    keys = [cls.module_id, cls.stage] if per_stage else [cls.module_id]
    rank = (
        func.row_number()
        .over(partition_by=keys, order_by=[cls.activity_at.desc(), cls.id.desc()])
        .label("rank")
    )
    ranked = core_select(*keys, *columns, rank).where(cls.voided_at.is_(None)).subquery()
    names = [k.key for k in keys] + [c.key for c in columns]
    return core_select(*(ranked.c[n] for n in names)).where(ranked.c.rank == 1)


@cache
def _statements() -> dict[str, Any]:
    """The book's queries, built once (they take no parameters)."""
    use: Any = ModuleUse
    st: Any = Storage
    cl: Any = Cleaning
    it: Any = IntegrityTest
    w: Any = WaterFluxTest
    hold: Any = Hold
    proc: Any = CleaningProcedure
    return {
        "uses": core_select(use.module_id, use.activity_at).where(use.voided_at.is_(None)),
        "storage": _latest(st, [st.activity_at, st.solution]),
        "cleaning": _latest(cl, [cl.id, cl.activity_at, cl.procedure_id, cl.deviations]),
        "integrity": _latest(it, [it.id, it.activity_at, it.passed, it.kind]),
        "water": _latest(w, [w.id, w.activity_at, w.stage, w.nwp_m_s_pa, w.recovery], True),
        "series": core_select(w.module_id, w.id, w.stage, w.activity_at, w.recovery)
        .where(w.voided_at.is_(None), w.stage.in_(("baseline", "post_clean")))
        .order_by(w.activity_at, w.id),
        "holds": core_select(hold.module_id, hold.reason)
        .where(hold.decision.is_(None))
        .order_by(hold.id),
        "procedures": core_select(proc.id, proc.code),
    }


def _book(session: Session) -> _Book:
    conn = session.connection()
    q = _statements()
    b = _Book()
    starts: dict[int, list[datetime]] = defaultdict(list)
    for r in conn.execute(q["uses"]):
        starts[r.module_id].append(r.activity_at)
    b.use_starts = {mid: sorted(times) for mid, times in starts.items()}
    b.storage = {r.module_id: r for r in conn.execute(q["storage"])}
    b.cleaning = {r.module_id: r for r in conn.execute(q["cleaning"])}
    b.integrity = {r.module_id: r for r in conn.execute(q["integrity"])}
    b.water = {(r.module_id, r.stage): r for r in conn.execute(q["water"])}
    rows: dict[int, list[Any]] = defaultdict(list)
    for r in conn.execute(q["series"]):
        rows[r.module_id].append(r)
    b.recovery_rows = dict(rows)
    holds: dict[int, list[str]] = defaultdict(list)
    for r in conn.execute(q["holds"]):
        holds[r.module_id].append(r.reason)
    b.holds = dict(holds)
    b.procedures = {r.id: r.code for r in conn.execute(q["procedures"])}
    return b


def _water_result(t: Any) -> WaterResult | None:
    if t is None:
        return None
    return WaterResult(t.id or 0, t.activity_at, t.stage, t.nwp_m_s_pa, t.recovery)


def _facts(module: Any, limits: Limits, b: _Book, now: datetime) -> Facts:
    """``fitness.facts(session, module, None, now)`` from the book; ``module`` a Module or a
    row of its columns, ``limits`` those of its type in force at ``now``."""
    mid = row_id(module.id)
    starts = b.use_starts.get(mid, [])
    last_use = starts[-1] if starts else None
    store, clean, it = b.storage.get(mid), b.cleaning.get(mid), b.integrity.get(mid)
    in_storage = store is not None and all(
        other is None or other <= store.activity_at
        for other in (last_use, clean.activity_at if clean is not None else None)
    )
    stages = {s: b.water.get((mid, s)) for s in STAGES}
    found = [t for t in stages.values() if t is not None]
    newest = max(found, key=lambda t: (t.activity_at, t.id)) if found else None
    holds = b.holds.get(mid, [])
    cleaning = None
    if clean is not None:
        code = b.procedures.get(clean.procedure_id) if clean.procedure_id else None
        found_dev = tuple(clean.deviations) if clean.deviations is not None else None
        cleaning = CleaningResult(clean.id or 0, clean.activity_at, code, found_dev)
    return Facts(
        serial=module.serial,
        status=module.status,
        cycles=len(starts),
        limits=limits,
        now=now,
        baseline=_water_result(stages["baseline"]),
        last_use_at=last_use,
        post_clean=_water_result(stages["post_clean"]),
        pre_use=_water_result(stages["pre_use"]),
        latest_water=_water_result(newest),
        cleaning=cleaning,
        integrity=IntegrityResult(it.id or 0, it.activity_at, it.passed, it.kind) if it else None,
        storage_start=store.activity_at if store is not None and in_storage else None,
        storage_solution=store.solution if store is not None and in_storage else None,
        hold_reason=holds[-1] if module.status == "on_hold" and holds else None,
        dedicated_product=module.dedicated_product,
        product=None,
    )


def _points(b: _Book, mid: int) -> list[Point]:
    """``wear.recovery_series(session, mid)`` from the book."""
    return recovery_points(b.recovery_rows.get(mid, []), b.use_starts.get(mid, []))


def _products(session: Session, product: str) -> set[int]:
    """Modules with a valid use for ``product``."""
    use: Any = ModuleUse
    found = core_select(use.module_id).where(use.product == product, use.voided_at.is_(None))
    return {r.module_id for r in session.connection().execute(found)}


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
    used = _products(session, product) if product is not None else set()
    types = {t.id: t for t in list_types(session)}
    # The columns a row needs, not whole Module objects (as ``list_modules``, by serial).
    mod: Any = Module
    listed = core_select(mod.id, mod.serial, mod.status, mod.dedicated_product, mod.type_id)
    chosen = [
        m
        for m in session.connection().execute(listed.order_by(mod.serial))
        if (type_code is None or types[m.type_id].code == type_code)
        and (product is None or m.dedicated_product == product or m.id in used)
    ]
    book = _book(session) if chosen else _Book()
    limits: dict[int, Limits] = {}
    rows = []
    for m in chosen:
        t = types[m.type_id]
        if m.type_id not in limits:
            limits[m.type_id] = type_limits(typelimits.in_force(session, t, at)[0])
        f = _facts(m, limits[m.type_id], book, at)
        points, holds = _points(book, m.id), tuple(book.holds.get(m.id, []))
        rows.append(_standing(m, t.code, f, points, holds))
    return sorted(rows, key=lambda r: urgency(r.status, r.fit, r.cycles_left, r.serial))
