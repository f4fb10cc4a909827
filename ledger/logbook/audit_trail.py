"""The audit trail for review: events filtered by who, what action, which table, module or run
and when, newest first and a page at a time, each with its change in words; and the state of
the chain (the check of ``fluxledger audit verify``).

Both front ends read the trail here: ``fluxledger audit show`` and the web workspace's audit
page. Times are aware datetimes in UTC (``at``) and in the site's zone (``at_local``).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import func, or_
from sqlmodel import Session, select

from ledger.errors import InputError
from ledger.logbook.history import entities
from ledger.logbook.modules import get_module
from ledger.store.tables import RECORDS, AuditEvent, Module, Run


@dataclass(frozen=True)
class TrailFilter:
    """Which events to show; None: any. ``user`` is the actor's login, ``entity`` the table
    (module, water_flux_test...), ``serial`` a module's serial, ``run`` a run's number;
    ``since`` and ``until`` (aware, inclusive) bound the event's time."""

    user: str | None = None
    action: str | None = None
    entity: str | None = None
    serial: str | None = None
    run: int | None = None
    since: datetime | None = None
    until: datetime | None = None


@dataclass(frozen=True)
class TrailEvent:
    """One audit event as stored, and in words: ``change`` is the old → new value or the
    created record's fields (empty when the event carries no value)."""

    seq: int
    at: datetime
    at_local: datetime
    actor: str
    action: str
    entity: str
    entity_id: str
    module_id: int | None
    module_serial: str | None
    field: str | None
    old_value: str | None
    new_value: str | None
    reason: str | None
    record_hash: str | None
    prev_hash: str
    hash: str
    change: str


@dataclass(frozen=True)
class TrailPage:
    """Events newest first: ``total`` match the filter, these are from ``offset`` on."""

    events: tuple[TrailEvent, ...]
    total: int
    offset: int
    limit: int | None

    @property
    def has_newer(self) -> bool:
        return self.offset > 0

    @property
    def has_older(self) -> bool:
        return self.offset + len(self.events) < self.total


@dataclass(frozen=True)
class TrailChoices:
    """What the filters can be set to: the users and actions found in the trail, every
    audited table."""

    users: tuple[str, ...]
    actions: tuple[str, ...]
    entities: tuple[str, ...]


@dataclass(frozen=True)
class ChainProblem:
    table: str
    row: str
    what: str


@dataclass(frozen=True)
class ChainState:
    """What ``fluxledger audit verify`` (without checkpoints) finds: events and records
    checked and each problem named."""

    intact: bool
    events: int
    records: int
    problems: tuple[ChainProblem, ...]


def run_entities() -> tuple[str, ...]:
    """The audited tables whose rows belong to a run (besides ``run`` itself)."""
    from ledger.store.registry import load_all

    load_all()
    return tuple(name for name, cls in RECORDS.items() if "run_id" in cls.model_fields)


def _conditions(session: Session, f: TrailFilter) -> list[Any]:
    # Checked in the order `audit show` always checked them, so its messages stay the same.
    if f.entity and f.entity not in entities():
        raise InputError(
            f"entity {f.entity!r} is unknown",
            field="entity",
            value=f.entity,
            expected="one of " + ", ".join(entities()),
        )
    where: list[Any] = []
    if f.entity:
        where.append(AuditEvent.entity == f.entity)
    if f.serial:
        where.append(AuditEvent.module_id == get_module(session, f.serial).id)
    if f.user:
        where.append(AuditEvent.actor == f.user)
    if f.action:
        known = actions(session)
        if f.action not in known:
            raise InputError(
                f"no event in the audit trail has the action {f.action!r}",
                field="action",
                value=f.action,
                expected="one of " + ", ".join(known),
            )
        where.append(AuditEvent.action == f.action)
    if f.run is not None:
        where.append(_about_run(session, f.run))
    if f.since:
        where.append(AuditEvent.at >= f.since)
    if f.until:
        where.append(AuditEvent.at <= f.until)
    return where


def _about_run(session: Session, run: int) -> Any:
    """Events of the run's own row and of every row that belongs to it."""
    if session.get(Run, run) is None:
        raise InputError(
            f"no run number {run}",
            field="run",
            value=run,
            expected="the number of a planned run (fluxledger run list)",
        )
    about: list[Any] = [(AuditEvent.entity == "run") & (AuditEvent.entity_id == str(run))]
    for name in run_entities():
        cls: Any = RECORDS[name]
        ids = [str(i) for i in session.exec(select(cls.id).where(cls.run_id == run))]
        if ids:
            about.append((AuditEvent.entity == name) & AuditEvent.entity_id.in_(ids))  # type: ignore[attr-defined]
    return or_(*about)


def trail(
    session: Session, f: TrailFilter, *, limit: int | None = None, offset: int = 0
) -> TrailPage:
    """The events that match ``f``, newest first: ``limit`` of them (None: all) after the
    first ``offset``."""
    from ledger.logbook.site import site_zone

    if limit is not None and limit < 1:
        raise InputError(
            f"{limit} events is not a number to show",
            field="last",
            value=limit,
            expected="a whole number of 1 or more",
        )
    where = _conditions(session, f)
    total = session.exec(select(func.count()).select_from(AuditEvent).where(*where)).one()
    statement = (
        select(AuditEvent)
        .where(*where)
        .order_by(AuditEvent.seq.desc())  # type: ignore[attr-defined]
        .offset(max(offset, 0))
        .limit(limit)
    )
    rows = list(session.exec(statement))
    zone = site_zone(session)
    serials = _serials(session, {r.module_id for r in rows if r.module_id is not None})
    events = tuple(_event(r, zone, serials) for r in rows)
    return TrailPage(events, int(total), max(offset, 0), limit)


def _serials(session: Session, ids: Iterable[int]) -> dict[int, str]:
    wanted = sorted(ids)
    if not wanted:
        return {}
    found = session.exec(select(Module.id, Module.serial).where(Module.id.in_(wanted)))  # type: ignore[union-attr]
    return {int(i or 0): s for i, s in found}


def _event(r: AuditEvent, zone: Any, serials: dict[int, str]) -> TrailEvent:
    from ledger.audittext import describe

    change = ""
    if r.field is not None or r.new_value is not None:
        change = describe(r.seq, r.action, r.field, r.old_value, r.new_value, r.reason)
    return TrailEvent(
        seq=r.seq,
        at=r.at,
        at_local=r.at.astimezone(zone),
        actor=r.actor,
        action=r.action,
        entity=r.entity,
        entity_id=r.entity_id,
        module_id=r.module_id,
        module_serial=serials.get(r.module_id) if r.module_id is not None else None,
        field=r.field,
        old_value=r.old_value,
        new_value=r.new_value,
        reason=r.reason,
        record_hash=r.record_hash,
        prev_hash=r.prev_hash,
        hash=r.hash,
        change=change,
    )


def actions(session: Session) -> tuple[str, ...]:
    """The actions found in the trail (create, change, void, role_change...), sorted."""
    found = session.exec(select(AuditEvent.action).distinct())
    return tuple(sorted(str(a) for a in found))


def choices(session: Session) -> TrailChoices:
    """The values the trail's filters can take on this site."""
    users = session.exec(select(AuditEvent.actor).distinct())
    return TrailChoices(tuple(sorted(str(u) for u in users)), actions(session), entities())


def chain_state(session: Session) -> ChainState:
    """Recompute every record hash and the keyed event chain and check the append-only
    triggers: the check of ``fluxledger audit verify`` (ledger.store.audit.verify)."""
    from ledger.store.audit import verify

    result = verify(session)
    problems = tuple(ChainProblem(p.entity, p.key, p.what) for p in result.problems)
    return ChainState(not problems, result.events, result.records, problems)
