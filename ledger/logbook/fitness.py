"""Gather a module's facts from the logbook and ask the rules for the fit-for-reuse verdict."""

from __future__ import annotations

from datetime import datetime

from sqlmodel import Session

from ledger.logbook import latest
from ledger.logbook.modules import get_module, open_hold
from ledger.rules.fitness import (
    CleaningResult,
    Facts,
    IntegrityResult,
    Limits,
    Verdict,
    WaterResult,
    verdict,
)
from ledger.store.tables import Cleaning, CleaningProcedure, Module, ModuleType, WaterFluxTest
from ledger.store.types import utc_now


def _water(t: WaterFluxTest | None) -> WaterResult | None:
    if t is None:
        return None
    return WaterResult(t.id or 0, t.activity_at, t.stage, t.nwp_m_s_pa, t.recovery)


def _cleaning(session: Session, c: Cleaning | None) -> CleaningResult | None:
    if c is None:
        return None
    proc = session.get(CleaningProcedure, c.procedure_id) if c.procedure_id else None
    found = tuple(c.deviations) if c.deviations is not None else None
    return CleaningResult(c.id or 0, c.activity_at, proc.code if proc else None, found)


def type_limits(mtype: ModuleType) -> Limits:
    """The limits of a module type (with its limits in force) as the fitness rules read them."""
    return Limits(
        mtype.recovery_min,
        mtype.recovery_alert,
        mtype.damage_ratio,
        mtype.preuse_band,
        mtype.reuse_limit_cycles,
        mtype.storage_limit_s,
    )


def facts(
    session: Session, module: Module, product: str | None = None, now: datetime | None = None
) -> Facts:
    from ledger.logbook import typelimits

    registered = session.get(ModuleType, module.type_id)
    assert registered is not None and module.id is not None
    mtype, _ = typelimits.in_force(session, registered, now or utc_now())
    mid = module.id
    use = latest.use(session, mid)
    store = latest.storage(session, mid)
    clean = latest.cleaning(session, mid)
    in_storage = store is not None and all(
        other is None or other.activity_at <= store.activity_at for other in (use, clean)
    )
    it = latest.integrity(session, mid)
    hold = open_hold(session, module) if module.status == "on_hold" else None
    return Facts(
        serial=module.serial,
        status=module.status,
        cycles=latest.cycles(session, mid),
        limits=type_limits(mtype),
        now=now or utc_now(),
        baseline=_water(latest.water(session, mid, "baseline")),
        last_use_at=use.activity_at if use is not None else None,
        post_clean=_water(latest.water(session, mid, "post_clean")),
        pre_use=_water(latest.water(session, mid, "pre_use")),
        latest_water=_water(latest.water(session, mid)),
        cleaning=_cleaning(session, clean),
        integrity=IntegrityResult(it.id or 0, it.activity_at, it.passed, it.kind) if it else None,
        storage_start=store.activity_at if store is not None and in_storage else None,
        storage_solution=store.solution if store is not None and in_storage else None,
        hold_reason=hold.reason if hold is not None else None,
        dedicated_product=module.dedicated_product,
        product=product,
    )


def fitness(
    session: Session, serial: str, product: str | None = None, now: datetime | None = None
) -> Verdict:
    """The verdict for the module with this serial (read-only)."""
    return verdict(facts(session, get_module(session, serial), product, now))
