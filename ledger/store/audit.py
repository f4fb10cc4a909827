"""The audit trail: record hashes, the append-only event chain and its verification (§7).

A record's hash is SHA-256 over the canonical JSON of its columns (all but ``record_hash``).
Each audit event stores the record's hash after the action, the previous event's hash and a
SHA-256 over its own content, so that an edit, removal or insertion made outside fluxledger
breaks either a record hash, the chain, or the link between a record and its last event.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from datetime import UTC, date, datetime
from typing import Any, TypeVar

from sqlalchemy import Float
from sqlmodel import Session, select

from ledger.canonical import canonical
from ledger.store.tables import RECORDS, AuditEvent, AuditHead, Recorded, entity_of, primary_key
from ledger.store.types import utc_now

GENESIS = "0" * 64
R = TypeVar("R", bound=Recorded)


def _encode(value: Any) -> Any:
    if isinstance(value, bytes | memoryview):
        # An attached file enters the hash by its SHA-256, not byte by byte in the JSON.
        return {"sha256": hashlib.sha256(bytes(value)).hexdigest()}
    if isinstance(value, datetime):
        return value.astimezone(UTC).isoformat(timespec="microseconds")
    if isinstance(value, date):
        return value.isoformat()
    return value


def _values(table: Any, excluded: frozenset[str], get: Any) -> dict[str, Any]:
    """A row's columns as JSON-ready values (floats as floats on every backend).

    ``get(name)`` reads a column from a record instance or from a database row alike.
    """
    out: dict[str, Any] = {}
    for column in table.columns:
        if column.name in excluded:
            continue
        value = get(column.name)
        if value is not None and isinstance(column.type, Float):
            value = float(value)
        out[column.name] = _encode(value)
    return out


def content(record: Recorded) -> dict[str, Any]:
    """The record's columns as JSON-ready values."""
    return _values(record.__table__, record.hash_excluded, lambda n: getattr(record, n))  # type: ignore[attr-defined]


def _digest(entity: str, values: dict[str, Any]) -> str:
    payload = canonical({"entity": entity, "content": values})
    return hashlib.sha256(payload.encode()).hexdigest()


def record_hash(record: Recorded) -> str:
    """SHA-256 of the record's entity name and content."""
    return _digest(entity_of(record), content(record))


_EVENT_TABLE: Any = AuditEvent.__table__  # type: ignore[attr-defined]


def _event_digest(get: Any) -> str:
    values = _values(_EVENT_TABLE, frozenset({"hash"}), get)
    return hashlib.sha256(canonical(values).encode()).hexdigest()


def event_hash(event: AuditEvent) -> str:
    """SHA-256 over the event's content, which includes the previous event's hash."""
    return _event_digest(lambda n: getattr(event, n))


def _module_of(record: Recorded) -> int | None:
    # Events name the module they concern, so `audit show --module` can filter on it.
    if entity_of(record) == "module":
        return record.id  # type: ignore[attr-defined]
    return getattr(record, "module_id", None)


def _shown(record: Recorded, name: str, value: Any) -> str | None:
    if name in record.redacted:
        return canonical("(not shown)")
    return canonical(_encode(value))


class Journal:
    """Writes records and their audit events inside one session (one transaction).

    ``actor`` is the login of the user acting; ``at`` the system time of the action.
    """

    def __init__(self, session: Session, actor: str, at: datetime | None = None) -> None:
        self.session = session
        self.actor = actor
        self.at = at or utc_now()

    def _head(self) -> AuditHead:
        # FOR UPDATE serializes writers on PostgreSQL; SQLite transactions begin IMMEDIATE.
        statement = select(AuditHead).where(AuditHead.id == 1).with_for_update()
        head = self.session.exec(statement).first()
        if head is None:
            raise RuntimeError("audit_head row is missing; the schema was not created by init")
        return head

    def event(
        self,
        action: str,
        entity: str,
        entity_id: str,
        *,
        module_id: int | None = None,
        field: str | None = None,
        old: str | None = None,
        new: str | None = None,
        reason: str | None = None,
        record_hash: str | None = None,
    ) -> AuditEvent:
        """Append one event to the chain."""
        head = self._head()
        ev = AuditEvent(
            seq=head.seq + 1,
            at=self.at,
            actor=self.actor,
            action=action,
            entity=entity,
            entity_id=entity_id,
            module_id=module_id,
            field=field,
            old_value=old,
            new_value=new,
            reason=reason,
            record_hash=record_hash,
            prev_hash=head.hash,
            hash="",
        )
        ev.hash = event_hash(ev)
        head.seq, head.hash = ev.seq, ev.hash
        self.session.add(ev)
        self.session.add(head)
        self.session.flush()
        return ev

    def create(self, record: R, *, module_id: int | None = None, reason: str | None = None) -> R:
        """Insert a record, hash it and log its creation with its full content."""
        record.created_at = self.at
        record.created_by = self.actor
        self.session.add(record)
        self.session.flush()  # assigns the id, which is part of the content
        record.record_hash = record_hash(record)
        self.session.add(record)
        self.session.flush()
        values = {k: v for k, v in content(record).items() if k not in record.redacted}
        self.event(
            "create",
            entity_of(record),
            primary_key(record),
            module_id=module_id if module_id is not None else _module_of(record),
            new=canonical(values),
            reason=reason,
            record_hash=record.record_hash,
        )
        return record

    def change(
        self,
        record: Recorded,
        changes: dict[str, Any],
        *,
        reason: str | None = None,
        module_id: int | None = None,
        action: str = "change",
    ) -> None:
        """Set fields on a record and log one event per field that really changed."""
        real = {k: v for k, v in changes.items() if getattr(record, k) != v}
        if not real:
            return
        old = {k: getattr(record, k) for k in real}
        for k, v in real.items():
            setattr(record, k, v)
        record.record_hash = record_hash(record)
        self.session.add(record)
        self.session.flush()
        if module_id is None:
            module_id = _module_of(record)
        for k in real:
            self.event(
                action,
                entity_of(record),
                primary_key(record),
                module_id=module_id,
                field=k,
                old=_shown(record, k, old[k]),
                new=_shown(record, k, real[k]),
                reason=reason,
                record_hash=record.record_hash,
            )

    def void(self, record: Recorded, reason: str) -> None:
        """Mark a record void with a reason; it stays in the database and in every history."""
        self.change(
            record,
            {"voided_at": self.at, "voided_by": self.actor, "void_reason": reason},
            reason=reason,
            action="void",
        )


@dataclass(frozen=True)
class Problem:
    """One thing verify found wrong: which row, and what."""

    entity: str
    key: str
    what: str

    def __str__(self) -> str:
        return f"{self.entity} {self.key}: {self.what}"


@dataclass(frozen=True)
class Verification:
    events: int
    records: int
    problems: tuple[Problem, ...]

    @property
    def ok(self) -> bool:
        return not self.problems


STREAM = 5_000  # rows fetched at a time: verify reads tables of any size in bounded memory


def verify(session: Session) -> Verification:
    """Recompute every record hash and the event chain; name each altered, missing or new row.

    Rows are streamed through SQLAlchemy Core, so memory grows with the number of records
    (one hash each, to match records with their last event), not with their size.
    """
    from ledger.store.registry import load_all

    load_all()  # the skid tables join RECORDS when loaded
    problems: list[Problem] = []
    conn = session.connection()
    stream = {"yield_per": STREAM}
    expected_seq, prev_hash, events = 1, GENESIS, 0
    latest: dict[tuple[str, str], str] = {}
    ordered = _EVENT_TABLE.select().order_by(_EVENT_TABLE.c.seq).execution_options(**stream)
    for row in conn.execute(ordered):
        ev = row._mapping
        seq = ev["seq"]
        events += 1
        if seq != expected_seq:
            gap = f"{expected_seq}" if seq == expected_seq + 1 else f"{expected_seq}–{seq - 1}"
            what = f"missing: the chain skips from event {expected_seq - 1} to event {seq}"
            problems.append(Problem("audit_event", gap, what))
        elif ev["prev_hash"] != prev_hash:
            what = f"chain broken: its previous-event hash does not match event {seq - 1}"
            problems.append(Problem("audit_event", str(seq), what))
        if _event_digest(ev.__getitem__) != ev["hash"]:
            what = "altered: its content no longer matches its hash"
            problems.append(Problem("audit_event", str(seq), what))
        if ev["record_hash"] is not None:
            latest[(ev["entity"], ev["entity_id"])] = ev["record_hash"]
        expected_seq, prev_hash = seq + 1, ev["hash"]
    head = session.get(AuditHead, 1)
    last_seq = expected_seq - 1
    if head is None:
        problems.append(Problem("audit_head", "1", "missing"))
    elif head.seq != last_seq or head.hash != prev_hash:
        what = (f"missing: the chain head names event {head.seq} but the last stored event "
                f"is {last_seq}")  # fmt: skip
        problems.append(Problem("audit_event", str(head.seq), what))
    records = 0
    for entity, cls in RECORDS.items():
        table: Any = cls.__table__  # type: ignore[attr-defined]
        pk = next(iter(table.primary_key.columns)).name
        for row in conn.execute(table.select().execution_options(**stream)):
            values = row._mapping
            records += 1
            key = str(values[pk])
            stored = values["record_hash"]
            logged = latest.pop((entity, key), None)
            if _digest(entity, _values(table, cls.hash_excluded, values.__getitem__)) != stored:
                what = "altered: its content no longer matches its stored hash"
            elif logged is None:
                what = "inserted outside fluxledger: no audit event records it"
            elif logged != stored:
                what = ("changed outside fluxledger: its hash differs from the last one the "
                        "audit trail recorded")  # fmt: skip
            else:
                continue
            problems.append(Problem(entity, key, what))
    for entity, key in latest:
        what = "missing: the audit trail records it but the row is gone"
        problems.append(Problem(entity, key, what))
    return Verification(events, records, tuple(problems))
