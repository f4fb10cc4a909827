"""The audit trail: record hashes, the append-only event chain and its verification (§7).

A record's hash is SHA-256 over the canonical JSON of its columns (all but ``record_hash``):
anyone can recompute it from an export. Each audit event stores the record's hash after the
action, the previous event's digest and a digest over its own content: HMAC-SHA-256 under the
site key (ledger.store.sitekey), which is kept outside the database. The chain head stores the
last event's number and digest with a MAC over both and the key's ID.

What this catches: an edit, removal or insertion made outside fluxledger breaks a record hash,
the chain, the head's MAC, or the link between a record and its last event; someone who can
write the database but does not hold the key cannot re-chain the events to hide it. What it
does not catch on its own: someone who holds both the database and the key can rewrite the
chain and its head; signed checkpoints kept elsewhere (ledger.store.checkpoint) catch that for
every event up to the newest checkpoint.
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import UTC, date, datetime
from operator import itemgetter
from typing import Any, TypeVar

from sqlalchemy import Float, text
from sqlmodel import Session, select

from ledger.canonical import Template, canonical
from ledger.errors import InputError, RefusedError
from ledger.store.sealing import VARYING, EventForm
from ledger.store.sitekey import SiteKey
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


def _values(
    table: Any, excluded: frozenset[str], get: Any, defaults: dict[str, Any] | None = None
) -> dict[str, Any]:
    """A row's columns as JSON-ready values (floats as floats on every backend).

    ``get(name)`` reads a column from a record instance or from a database row alike; a
    column in ``defaults`` holding its default is left out (see Recorded.hash_defaults).
    """
    out: dict[str, Any] = {}
    for column in table.columns:
        if column.name in excluded:
            continue
        value = get(column.name)
        if defaults and column.name in defaults and value == defaults[column.name]:
            continue
        if value is not None and isinstance(column.type, Float):
            value = float(value)
        out[column.name] = _encode(value)
    return out


def content(record: Recorded) -> dict[str, Any]:
    """The record's columns as JSON-ready values."""
    table = record.__table__  # type: ignore[attr-defined]
    return _values(table, record.hash_excluded, lambda n: getattr(record, n), record.hash_defaults)


def _digest(entity: str, values: dict[str, Any]) -> str:
    payload = canonical({"entity": entity, "content": values})
    return hashlib.sha256(payload.encode()).hexdigest()


def record_hash(record: Recorded) -> str:
    """SHA-256 of the record's entity name and content."""
    return _digest(entity_of(record), content(record))


_EVENT_TABLE: Any = AuditEvent.__table__  # type: ignore[attr-defined]


def _event_digest(get: Any, key: SiteKey | None) -> str:
    payload = canonical(_values(_EVENT_TABLE, frozenset({"hash"}), get)).encode()
    return key.mac(payload) if key is not None else hashlib.sha256(payload).hexdigest()


def event_hash(event: AuditEvent, key: SiteKey | None = None) -> str:
    """The event's digest over its content (which includes the previous event's digest):
    HMAC-SHA-256 under ``key``; plain SHA-256 for a chain not yet keyed (key None)."""
    return _event_digest(lambda n: getattr(event, n), key)


def head_mac(key: SiteKey, seq: int, digest: str) -> str:
    """The MAC of the chain head (last event number and digest) under ``key``."""
    return key.mac(f"fluxledger audit head {seq} {digest}".encode())


def chain_key(session: Session, head: AuditHead) -> SiteKey | None:
    """The site key the chain is under, checked against the head's key ID; None for a chain
    not yet keyed. Refuses to write with a missing or different key."""
    if head.key_id is None:
        return None
    from ledger.store import sitekey

    key = sitekey.require(sitekey.url_of(session))
    if key.key_id != head.key_id:
        raise RefusedError(
            f"the site key from {key.source} (key ID {key.key_id}) is not the key this "
            f"database's audit chain is under (key ID {head.key_id}); nothing was written",
            field="key",
            value=key.source,
            expected=f"the site key with ID {head.key_id}",
        )
    return key


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
        self._key: SiteKey | bool | None = False  # False: not looked up yet

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
        if self._key is False:
            self._key = chain_key(self.session, head)
        key = self._key if isinstance(self._key, SiteKey) else None
        ev.hash = event_hash(ev, key)
        head.seq, head.hash = ev.seq, ev.hash
        head.mac = head_mac(key, ev.seq, ev.hash) if key is not None else None
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

# The append-only triggers each backend must have on audit_event (migration 0001).
TRIGGERS = {
    "sqlite": frozenset({"audit_event_no_update", "audit_event_no_delete"}),
    "postgresql": frozenset({"audit_event_no_change", "audit_event_no_truncate"}),
}
SITE = "site"  # verify(key=SITE): the key configured for the session's database


def active_triggers(conn: Any) -> set[str]:
    """Names of the enabled triggers on audit_event."""
    if conn.dialect.name == "postgresql":
        rows = conn.execute(text(
            "SELECT tgname FROM pg_trigger WHERE tgrelid = 'audit_event'::regclass "
            "AND NOT tgisinternal AND tgenabled <> 'D'"
        ))  # fmt: skip
    else:
        rows = conn.execute(text(
            "SELECT name FROM sqlite_master WHERE type = 'trigger' AND tbl_name = 'audit_event'"
        ))  # fmt: skip
    return {str(r[0]) for r in rows}


def _key_problems(
    session: Session, head: AuditHead, key: Any
) -> tuple[SiteKey | None, list[Problem], bool]:
    """(key to check MACs with, problems, whether MACs can be checked at all)."""
    if head.key_id is None:
        what = ("not keyed: the chain is under plain SHA-256, which anyone who can write the "
                "database can recompute; run `fluxledger init` to key it")  # fmt: skip
        return None, [Problem("audit_head", "1", what)], True
    if key == SITE:
        from ledger.store import sitekey

        try:
            key = sitekey.require(sitekey.url_of(session))
        except InputError as exc:
            what = f"key unavailable: {exc}; the chain's MACs were not checked"
            return None, [Problem("audit_head", "1", what)], False
    if key is None:
        what = "key not given: the chain's MACs were not checked"
        return None, [Problem("audit_head", "1", what)], False
    if key.key_id != head.key_id:
        what = (f"key mismatch: the chain is under key ID {head.key_id}, the key from "
                f"{key.source} has ID {key.key_id}; the chain's MACs were not checked")  # fmt: skip
        return None, [Problem("audit_head", "1", what)], False
    return key, [], True


def verify(session: Session, key: SiteKey | str | None = SITE) -> Verification:
    """Recompute every record hash and the keyed event chain; name each altered, deleted,
    inserted or re-chained row, a head that does not match, and missing triggers.

    ``key`` is the site key to check MACs with (default: the database's configured key).
    Rows are streamed through SQLAlchemy Core, so memory grows with the number of records
    (one hash each, to match records with their last event), not with their size.
    """
    from ledger.store.registry import load_all

    load_all()  # the skid tables join RECORDS when loaded
    problems: list[Problem] = []
    conn = session.connection()
    missing = sorted(TRIGGERS.get(conn.dialect.name, frozenset()) - active_triggers(conn))
    if missing:
        what = ("triggers removed: " + ", ".join(missing) + " no longer guard audit_event "
                "against UPDATE and DELETE")  # fmt: skip
        problems.append(Problem("audit_event", "triggers", what))
    head = session.get(AuditHead, 1)
    if head is None:
        problems.append(Problem("audit_head", "1", "deleted: the chain head row is gone"))
        mac_key, check_macs = None, False
    else:
        mac_key, found, check_macs = _key_problems(session, head, key)
        problems += found
    stream = {"yield_per": STREAM}
    expected_seq, prev_hash, events = 1, GENESIS, 0
    bad_run: list[int] = []  # consecutive events whose digests fail but whose links hold
    latest: dict[tuple[str, str], str] = {}

    def close_run() -> None:
        if len(bad_run) > 1:
            what = (f"re-chained: events {bad_run[0]}–{bad_run[-1]} were rewritten and linked "
                    "again, but their digests do not match the site key")  # fmt: skip
            problems.append(Problem("audit_event", f"{bad_run[0]}–{bad_run[-1]}", what))
        elif bad_run:
            what = "altered: its content no longer matches its hash"
            problems.append(Problem("audit_event", str(bad_run[0]), what))
        bad_run.clear()

    ordered = _EVENT_TABLE.select().order_by(_EVENT_TABLE.c.seq).execution_options(**stream)
    for row in conn.execute(ordered):
        ev = row._mapping
        seq = ev["seq"]
        events += 1
        linked = True
        if seq != expected_seq:
            close_run()
            gap = f"{expected_seq}" if seq == expected_seq + 1 else f"{expected_seq}–{seq - 1}"
            what = f"deleted: the chain skips from event {expected_seq - 1} to event {seq}"
            problems.append(Problem("audit_event", gap, what))
            linked = False
        elif ev["prev_hash"] != prev_hash:
            close_run()
            what = f"chain broken: its previous-event hash does not match event {seq - 1}"
            problems.append(Problem("audit_event", str(seq), what))
            linked = False
        if check_macs and _event_digest(ev.__getitem__, mac_key) != ev["hash"]:
            if not linked:
                close_run()
            bad_run.append(seq)
        else:
            close_run()
        if ev["record_hash"] is not None:
            latest[(ev["entity"], ev["entity_id"])] = ev["record_hash"]
        expected_seq, prev_hash = seq + 1, ev["hash"]
    close_run()
    last_seq = expected_seq - 1
    if head is not None:
        if head.seq == last_seq and head.hash != prev_hash:
            what = f"altered: the chain head's digest does not match event {last_seq}'s"
            problems.append(Problem("audit_head", "1", what))
        elif head.seq != last_seq:
            what = (f"deleted: the chain head names event {head.seq} but the last stored event "
                    f"is {last_seq}")  # fmt: skip
            problems.append(Problem("audit_event", str(head.seq), what))
        elif mac_key is not None and head.mac != head_mac(mac_key, head.seq, head.hash):
            what = ("altered: the chain head's MAC does not match the site key (the head was "
                    "moved or the chain re-linked without the key)")  # fmt: skip
            problems.append(Problem("audit_head", "1", what))
    records = 0
    for entity, cls in RECORDS.items():
        table: Any = cls.__table__  # type: ignore[attr-defined]
        pk = next(iter(table.primary_key.columns)).name
        for row in conn.execute(table.select().execution_options(**stream)):
            values = row._mapping
            records += 1
            key_ = str(values[pk])
            stored = values["record_hash"]
            logged = latest.pop((entity, key_), None)
            own = _digest(entity, _values(table, cls.hash_excluded, values.__getitem__,
                                          cls.hash_defaults))  # fmt: skip
            if logged is None:
                what = "inserted outside fluxledger: no audit event records it"
            elif own != stored:
                what = "altered: its content no longer matches its stored hash"
            elif logged != stored:
                what = ("changed outside fluxledger: its hash differs from the last one the "
                        "audit trail recorded")  # fmt: skip
            else:
                continue
            problems.append(Problem(entity, key_, what))
    for entity, key_ in latest:
        what = "deleted: the audit trail records it but the row is gone"
        problems.append(Problem(entity, key_, what))
    problems += _part_problems(conn)
    return Verification(events, records, tuple(problems))


def _part_problems(conn: Any) -> list[Problem]:
    """Later files of split skid logs against the list their log's record hash covers."""
    from ledger.store.tables import SkidLogFile, SkidLogPart

    logs: Any = SkidLogFile.__table__  # type: ignore[attr-defined]
    parts: Any = SkidLogPart.__table__  # type: ignore[attr-defined]
    listed: dict[tuple[int, int], str] = {}
    for log_id, entries in conn.execute(
        logs.select().with_only_columns(logs.c.id, logs.c.parts).where(logs.c.parts.is_not(None))
    ):
        for p in entries if isinstance(entries, list) else []:
            try:
                listed[(log_id, int(p["position"]))] = str(p["sha256"])
            except (KeyError, TypeError, ValueError):
                continue  # an altered list: the log's record hash names that already
    out = []
    for row in conn.execute(parts.select().execution_options(yield_per=64)):
        where = f"{row.log_id}/{row.position}"
        expected = listed.pop((row.log_id, row.position), None)
        if expected is None:
            what = "inserted outside fluxledger: no skid log lists this file"
        elif hashlib.sha256(bytes(row.content)).hexdigest() != expected:
            what = (f"altered: the bytes of {row.file_name} no longer match the sha256 its skid "
                    "log recorded (the file was replaced)")  # fmt: skip
        else:
            continue
        out.append(Problem("skid_log_part", where, what))
    for log_id, position in listed:
        what = "deleted: its skid log lists this file but the row is gone"
        out.append(Problem("skid_log_part", f"{log_id}/{position}", what))
    return out


@contextmanager
def _triggers_lifted(conn: Any) -> Iterator[None]:
    """Lift the append-only triggers inside the caller's transaction, for a re-key only."""
    if conn.dialect.name == "postgresql":
        for name in sorted(TRIGGERS["postgresql"]):
            conn.execute(text(f"ALTER TABLE audit_event DISABLE TRIGGER {name}"))
        yield
        for name in sorted(TRIGGERS["postgresql"]):
            conn.execute(text(f"ALTER TABLE audit_event ENABLE TRIGGER {name}"))
        return
    saved = list(conn.execute(text(
        "SELECT name, sql FROM sqlite_master WHERE type = 'trigger' AND tbl_name = 'audit_event'"
    )))  # fmt: skip
    for name, _ in saved:
        conn.execute(text(f'DROP TRIGGER "{name}"'))
    yield
    for _, sql in saved:
        conn.execute(text(sql))


def rekey(
    session: Session, new: SiteKey, actor: str, reason: str, old: SiteKey | None
) -> AuditEvent:
    """Put the whole chain under ``new``: verify it under ``old`` (None: a chain not yet
    keyed), recompute every event's digest and the head's MAC, then append a ``rekey`` event
    that records the old head (number, digest, key ID). Refuses a chain that does not verify.
    Every record hash stays as it is: they are plain SHA-256 and the chain binds them."""
    head = session.exec(select(AuditHead).where(AuditHead.id == 1).with_for_update()).first()
    if head is None:
        raise RuntimeError("audit_head row is missing; the schema was not created by init")
    found = verify(session, key=old)
    real = [p for p in found.problems if not p.what.startswith("not keyed")]
    if real:
        shown = "; ".join(str(p) for p in real[:5])
        more = f" (and {len(real) - 5} more)" if len(real) > 5 else ""
        raise RefusedError(
            f"the audit chain does not verify, so it is not re-keyed: {shown}{more}",
            field="audit",
            value=len(real),
            expected="an intact chain (fluxledger audit verify)",
        )
    before = {"seq": head.seq, "hash": head.hash, "key_id": head.key_id}
    conn = session.connection()
    prev, updates = GENESIS, []
    ordered = _EVENT_TABLE.select().order_by(_EVENT_TABLE.c.seq).execution_options(yield_per=STREAM)
    for row in conn.execute(ordered):
        values = dict(row._mapping)
        values["prev_hash"] = prev
        digest = _event_digest(values.__getitem__, new)
        updates.append({"s": values["seq"], "p": prev, "h": digest})
        prev = digest
    with _triggers_lifted(conn):
        for start in range(0, len(updates), STREAM):
            conn.execute(
                text("UPDATE audit_event SET prev_hash = :p, hash = :h WHERE seq = :s"),
                updates[start : start + STREAM],
            )
    head.hash, head.key_id = prev, new.key_id
    head.mac = head_mac(new, head.seq, head.hash)
    session.add(head)
    session.flush()
    journal = Journal(session, actor)
    journal._key = new
    return journal.event(
        "rekey", "audit_chain", "1", old=canonical(before),
        new=canonical({"key_id": new.key_id}), reason=reason,
    )  # fmt: skip


def key_new_chain(session: Session, key: SiteKey) -> None:
    """Put an empty chain (a new database) under ``key``."""
    head = session.exec(select(AuditHead).where(AuditHead.id == 1).with_for_update()).first()
    if head is None or head.seq != 0:
        raise RuntimeError("key_new_chain is for a new database's empty chain")
    head.key_id, head.mac = key.key_id, head_mac(key, 0, head.hash)
    session.add(head)
    session.flush()


# Bulk writing (import-logbook): the rows and events Journal.create writes, without an ORM
# object, a Core statement or a json.dumps of the whole content per row.


class StoredRows:
    """Rows of ``table`` inserted by the driver's executemany, each value in the storage form
    a Core insert gives it: the column type's own bind processor for the connection's dialect
    (once for the columns in ``fixed``, per row for the others), under the SQL that Core
    compiles for the table, with its bind casts. Every column must be given: no defaults."""

    def __init__(self, conn: Any, table: Any, names: Sequence[str], fixed: dict[str, Any]) -> None:
        from sqlalchemy import insert

        dialect = conn.dialect
        self.conn = conn
        given = [*names, *fixed]
        columns = {c.name: c for c in table.columns}
        if sorted(given) != sorted(columns):
            raise ValueError(f"{table.name}: give every column once, got {sorted(given)}")

        def processor(name: str) -> Any:
            return columns[name].type.dialect_impl(dialect).bind_processor(dialect)

        self._convert = [(i, p) for i, n in enumerate(names) if (p := processor(n)) is not None]
        self._fixed = [p(v) if (p := processor(n)) is not None else v for n, v in fixed.items()]
        compiled = insert(table).compile(dialect=dialect, column_keys=given)
        self.sql = compiled.string
        position = {n: i for i, n in enumerate(given)}
        self._keys = (
            list(compiled.positiontup or []) if compiled.positional else list(compiled.binds)
        )
        if sorted(self._keys) != sorted(given):
            raise ValueError(f"{table.name}: the compiled insert binds {self._keys}")
        self._pick = itemgetter(*(position[k] for k in self._keys))
        self._named = not compiled.positional

    def stored(self, values: list[Any]) -> Any:
        """One row's parameters from its ``values`` (Python values, in ``names`` order; the
        list is changed)."""
        for i, convert in self._convert:
            values[i] = convert(values[i])
        values += self._fixed
        row = self._pick(values)
        return dict(zip(self._keys, row, strict=True)) if self._named else row

    def insert(self, rows: list[Any]) -> None:
        """Insert ``rows`` (from ``stored``) with one executemany."""
        if rows:
            self.conn.exec_driver_sql(self.sql, rows)


class CreateEvents:
    """``create`` events for many records of one entity, appended to the chain as
    ``Journal.create`` appends them: the same columns, canonical JSON and digest as
    ``event_hash`` (HMAC-SHA-256 under the site key), each linked to the one before, made from
    a template (``form``, a ``sealing.EventForm``) rather than an AuditEvent per event. The
    digests come from ``sealing.seal`` (which may run in another process); ``stored`` makes
    one event's row from its digest, ``close`` moves the chain head.
    tests/store/test_audit_bulk.py compares them with Journal.create's.
    """

    def __init__(
        self, session: Session, head: AuditHead, *, entity: str, actor: str, at: datetime
    ) -> None:
        self.session = session
        self.head = head
        self.key = chain_key(session, head)
        self.seq, self.prev = head.seq, head.hash
        fixed = {"at": at, "actor": actor, "action": "create", "entity": entity, "field": None,
                 "old_value": None, "reason": None}  # fmt: skip
        hashed = {c.name for c in _EVENT_TABLE.columns} - {"hash"}
        if hashed != {*fixed, *VARYING}:
            raise RuntimeError("audit_event has columns CreateEvents does not fill")
        payload = Template({k: _encode(v) for k, v in fixed.items()}, VARYING)
        self.form = EventForm(payload, self.key.secret if self.key is not None else None)
        self.rows = StoredRows(session.connection(), _EVENT_TABLE, [*VARYING, "hash"], fixed)

    def stored(
        self, entity_id: str, module_id: int | None, new_value: str, record_hash: str, digest: str
    ) -> Any:
        """The next event's parameters (for ``self.rows.insert``): the creation of record
        ``entity_id`` with content ``new_value`` (canonical JSON), hash ``record_hash`` and the
        event digest ``seal`` gave it, linked to the event before."""
        seq, prev = self.seq + 1, self.prev
        self.seq, self.prev = seq, digest
        return self.rows.stored([seq, entity_id, module_id, new_value, record_hash, prev, digest])

    def close(self) -> None:
        """Move the chain head to the last event added (and its MAC under the key)."""
        from sqlalchemy import update

        head: Any = AuditHead.__table__  # type: ignore[attr-defined]
        mac = head_mac(self.key, self.seq, self.prev) if self.key is not None else None
        self.session.connection().execute(
            update(head).where(head.c.id == 1).values(seq=self.seq, hash=self.prev, mac=mac)
        )
        self.session.expire(self.head)
