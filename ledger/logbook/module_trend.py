"""A module's wear trend, read from its logbook: post-clean NWP recovery and pressure-decay rate
per cycle, each point judged against the type's limits in force, I-MR control limits from a
baseline period with their run-rule signals, the reuse-life projection (ICH Q1E approach) and
the uses, holds and dispositions in between.

Recovery values are fractions of baseline NWP, decay rates Pa/s, cycles counts of valid uses
(see :mod:`ledger.logbook.wear`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime

from sqlmodel import Session, select

from ledger.errors import DomainError, InputError
from ledger.logbook import latest
from ledger.logbook.modules import get_module, row_id
from ledger.logbook.typelimits import type_in_force
from ledger.logbook.wear import Point, decay_series, recovery_series
from ledger.science import trending
from ledger.store.tables import Hold, ModuleType, ModuleUse

MIN_POINTS = 3  # fewest points for control limits and for a projection
NOT_ENOUGH = f"not enough points (at least {MIN_POINTS} are needed)"
ASSUMPTIONS = (
    "linear least-squares fit of recovery on cycle number; independent residuals of constant "
    "spread; end of life where the one-sided 95 % lower confidence bound of the mean recovery "
    "meets the limit (the ICH Q1E approach); limit = the type's recovery minimum in force"
)
RULE_SETS: tuple[trending.RuleSet, ...] = ("western_electric", "nelson")


@dataclass(frozen=True)
class RecoveryPoint:
    """A post-clean recovery (fraction of baseline NWP) and its verdict: "within", "alert"
    (below the alert limit) or "action" (below the recovery minimum)."""

    cycle: int
    at: datetime
    recovery: float
    record_id: int
    verdict: str


@dataclass(frozen=True)
class Signal:
    """One run-rule or moving-range signal, at the cycle of the point that completed it."""

    rule_set: str
    rule: int
    description: str
    cycle: int
    record_id: int


@dataclass(frozen=True)
class Chart:
    """I-MR limits of one series (its unit) from its first ``baseline`` points and the signals
    on the whole series; ``limits`` None with ``note`` saying why when none could be set."""

    baseline: int
    limits: trending.ImrLimits | None
    signals: tuple[Signal, ...]
    note: str | None


@dataclass(frozen=True)
class Projection:
    """Reuse-life projection of recovery on cycle number. Cycles are cycle numbers (floats);
    ``cycles_left`` is the bound's cycle less the cycles done; None where there is no value,
    with ``note`` saying why."""

    status: str
    points: int
    limit: float  # fraction of baseline NWP
    slope: float | None  # fraction per cycle
    intercept: float | None  # fraction at cycle 0
    r_squared: float | None
    point_cycle: float | None
    bound_cycle: float | None
    cycles_left: float | None
    note: str
    assumptions: str


@dataclass(frozen=True)
class Event:
    """A use, a hold or a hold's disposition, in words."""

    at: datetime
    kind: str  # "use", "hold" or "disposition"
    record_id: int
    text: str


@dataclass(frozen=True)
class ModuleTrend:
    """Everything ``fluxledger history`` shows about one module."""

    serial: str
    type_code: str
    status: str
    cycles_used: int
    reuse_limit: int
    recovery_min: float  # fraction: the action limit
    recovery_alert: float  # fraction: the alert limit
    recovery: tuple[RecoveryPoint, ...]
    decay: tuple[Point, ...]  # values in Pa/s
    recovery_chart: Chart
    decay_chart: Chart
    projection: Projection
    events: tuple[Event, ...]


def verdict(recovery: float, action: float, alert: float) -> str:
    """ "action" below the action limit, "alert" below the alert limit, else "within"
    (all fractions)."""
    if recovery < action:
        return "action"
    if recovery < alert:
        return "alert"
    return "within"


def chart(points: Sequence[Point], baseline: int | None) -> Chart:
    """I-MR limits from the first ``baseline`` points (all when None) and the Western Electric,
    Nelson and moving-range signals on every point against them."""
    n = len(points) if baseline is None else min(baseline, len(points))
    if n < MIN_POINTS:
        return Chart(n, None, (), NOT_ENOUGH)
    values = [p.value for p in points]
    try:
        limits = trending.imr_limits(values[:n])
    except DomainError as err:
        return Chart(n, None, (), err.message)
    found = [v for rules in RULE_SETS for v in trending.run_rules(values, limits, rules)]
    found += trending.moving_range_check(values, limits)
    signals = tuple(
        Signal(v.rule_set, v.rule, v.description, points[v.index].cycle, points[v.index].record_id)
        for v in sorted(found, key=lambda v: (v.index, v.rule_set, v.rule))
    )
    return Chart(n, limits, signals, None)


def project(points: Sequence[Point], limit: float, cycles_done: int) -> Projection:
    """Linear reuse-life projection of recovery (fractions) against ``limit`` (a fraction)."""
    if len(points) < MIN_POINTS:
        return Projection("not_enough_points", len(points), limit, None, None, None, None, None,
                          None, NOT_ENOUGH, ASSUMPTIONS)  # fmt: skip
    try:
        p = trending.project_life([pt.cycle for pt in points], [pt.value for pt in points], limit)
    except DomainError as err:
        return Projection("no_fit", len(points), limit, None, None, None, None, None, None,
                          err.message, ASSUMPTIONS)  # fmt: skip
    left = None if p.bound_crossing is None else p.bound_crossing - cycles_done
    return Projection(p.status, p.n, limit, p.slope, p.intercept, p.r_squared, p.fitted_crossing,
                      p.bound_crossing, left, p.note, ASSUMPTIONS)  # fmt: skip


def _events(session: Session, module_id: int) -> list[Event]:
    out: list[Event] = []
    for u in session.exec(select(ModuleUse).where(ModuleUse.module_id == module_id)):
        ended = "open"
        if u.ended_at is not None:
            ended = f"ended {u.ended_at.astimezone(UTC):%Y-%m-%d %H:%M} UTC"
        void = f"; voided: {u.void_reason}" if u.voided_at is not None else ""
        out.append(Event(u.activity_at, "use", row_id(u.id), f"{u.product} lot {u.lot}, "
                         f"{ended}{void}"))  # fmt: skip
    for h in session.exec(select(Hold).where(Hold.module_id == module_id)):
        out.append(Event(h.created_at, "hold", row_id(h.id), f"{h.cause} hold: {h.reason}"))
        if h.decision is not None and h.decided_at is not None:
            why = f": {h.decision_reason}" if h.decision_reason else ""
            out.append(Event(h.decided_at, "disposition", row_id(h.id),
                             f"{h.decision}, signed by {h.decided_by}{why}"))  # fmt: skip
    out.sort(key=lambda e: (e.at, e.kind != "use", e.record_id))
    return out


def module_trend(session: Session, serial: str, baseline_cycles: int | None = None) -> ModuleTrend:
    """The wear trend of the module ``serial``; ``baseline_cycles``: how many first points of
    each series fix the I-MR limits (all when None; at least 1, else InputError)."""
    if baseline_cycles is not None and baseline_cycles < 1:
        raise InputError(
            f"--baseline-cycles {baseline_cycles} is not a number of points",
            field="baseline_cycles",
            value=baseline_cycles,
            expected=f"a whole number of points, at least 1 ({MIN_POINTS} to set limits)",
        )
    module = get_module(session, serial)
    module_id = row_id(module.id)
    code = session.get_one(ModuleType, module.type_id).code
    mtype, _ = type_in_force(session, code)
    done = latest.cycles(session, module_id)
    rec = recovery_series(session, module_id)
    dec = decay_series(session, module_id)
    judged = tuple(
        RecoveryPoint(p.cycle, p.at, p.value, p.record_id,
                      verdict(p.value, mtype.recovery_min, mtype.recovery_alert))
        for p in rec
    )  # fmt: skip
    return ModuleTrend(
        serial=module.serial,
        type_code=code,
        status=module.status,
        cycles_used=done,
        reuse_limit=mtype.reuse_limit_cycles,
        recovery_min=mtype.recovery_min,
        recovery_alert=mtype.recovery_alert,
        recovery=judged,
        decay=tuple(dec),
        recovery_chart=chart(rec, baseline_cycles),
        decay_chart=chart(dec, baseline_cycles),
        projection=project(rec, mtype.recovery_min, done),
        events=tuple(_events(session, module_id)),
    )
