"""Read-only views: a module's history, and audit events filtered for review."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlmodel import Session, select

from ledger.errors import InputError
from ledger.logbook.modules import get_module
from ledger.store.tables import (
    RECORDS,
    AuditEvent,
    Cleaning,
    Hold,
    IntegrityTest,
    Module,
    ModuleUse,
    Storage,
    WaterFluxTest,
)


def entities() -> tuple[str, ...]:
    """Every audited entity name (the skid tables included), and the audit chain itself
    (its re-key events)."""
    from ledger.store.registry import load_all

    load_all()
    return (*RECORDS, "audit_chain")


@dataclass(frozen=True)
class Entry:
    """One line of a module's history."""

    at: datetime
    kind: str
    record_id: int
    record: Any


def module_history(session: Session, serial: str) -> tuple[Module, list[Entry]]:
    module = get_module(session, serial)
    entries: list[Entry] = []
    for kind, cls in (
        ("water-test", WaterFluxTest),
        ("integrity-test", IntegrityTest),
        ("cleaning", Cleaning),
        ("storage", Storage),
        ("use", ModuleUse),
    ):
        for rec in session.exec(select(cls).where(cls.module_id == module.id)):
            entries.append(Entry(rec.activity_at, kind, rec.id, rec))  # type: ignore[attr-defined]
    for h in session.exec(select(Hold).where(Hold.module_id == module.id)):
        entries.append(Entry(h.created_at, "hold", h.id or 0, h))
    # Same time: in the order they were written; a hold follows the test that caused it.
    entries.sort(key=lambda e: (e.at, e.record.created_at, e.kind == "hold", e.record_id))
    return module, entries


def audit_events(
    session: Session,
    *,
    entity: str | None = None,
    serial: str | None = None,
    user: str | None = None,
    since: datetime | None = None,
    until: datetime | None = None,
    limit: int | None = None,
) -> list[AuditEvent]:
    statement = select(AuditEvent)
    if entity and entity not in entities():
        raise InputError(
            f"entity {entity!r} is unknown",
            field="entity",
            value=entity,
            expected="one of " + ", ".join(entities()),
        )
    if entity:
        statement = statement.where(AuditEvent.entity == entity)
    if serial:
        statement = statement.where(AuditEvent.module_id == get_module(session, serial).id)
    if user:
        statement = statement.where(AuditEvent.actor == user)
    if since:
        statement = statement.where(AuditEvent.at >= since)
    if until:
        statement = statement.where(AuditEvent.at <= until)
    statement = statement.order_by(AuditEvent.seq)  # type: ignore[arg-type]
    events = list(session.exec(statement))
    return events[-limit:] if limit else events


def verify_audit(session: Session) -> Any:
    """Recompute every record hash and the audit chain (see ledger.store.audit.verify)."""
    from ledger.store.audit import verify

    return verify(session)
