"""Record hashes and chained create-event digests for many records of one kind at once.

Pure computation over values already read and checked: the canonical JSON of each record's
hashed columns and its SHA-256 (as ``store.audit.record_hash`` makes them), then each create
event's digest (HMAC-SHA-256 under the site key, or SHA-256 for a chain not yet keyed), each
over the one before. Nothing here touches a database or a file, and every object it takes is
plain data that pickles, so a bulk import can run ``seal`` in a worker process on one chunk
while its own process writes the chunk before (``logbook.import_logbook``; ``serve`` is
that worker's loop). This module imports only the standard library and ``ledger.canonical``,
which keeps the worker's start short. tests/store/test_audit_bulk.py holds the output to
``Journal.create``'s, byte for byte.
"""

from __future__ import annotations

import hashlib
import hmac
import pickle
import sys
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any, BinaryIO

from ledger.canonical import Template, canonical


def iso_utc(t: datetime) -> str:
    """A time as a record hash encodes it: UTC, ISO 8601 with microseconds."""
    if t.tzinfo is not UTC:  # an aware UTC time, as entries give them, is already UTC
        t = t.astimezone(UTC)
    return t.isoformat(timespec="microseconds")


@dataclass(frozen=True)
class RecordForm:
    """How one kind of record's content JSON is made from its row values (in ``names``
    order): ``fixed`` holds the members that are the same for every row, already encoded; a
    name in ``floats`` is written as a float, one in ``times`` as ``iso_utc``; a name in
    ``defaults`` is left out while it holds that default (the columns a record's hash skips
    at their default value)."""

    entity: str
    names: tuple[str, ...]
    fixed: dict[str, Any]
    floats: tuple[str, ...]
    times: tuple[str, ...]
    defaults: tuple[tuple[str, Any], ...]

    def body(self, row: Sequence[Any]) -> str:
        """The canonical JSON of one row's hashed columns."""
        values = self.fixed.copy()
        values.update(zip(self.names, row, strict=True))
        for name in self.floats:
            v = values[name]
            if v is not None and type(v) is not float:
                values[name] = float(v)
        for name in self.times:
            if values[name] is not None:
                values[name] = iso_utc(values[name])
        for name, default in self.defaults:
            if values[name] == default:
                del values[name]
        return canonical(values)

    def record_hash(self, body: str) -> str:
        """SHA-256 of canonical({"entity": ..., "content": ...}), keys sorted, built around
        ``body`` without a second dump of it."""
        tail = f',"entity":{canonical(self.entity)}}}'
        return hashlib.sha256(f'{{"content":{body}{tail}'.encode()).hexdigest()


# The columns of a create event that differ from one event to the next, in the order
# ``EventForm.digest`` takes them.
VARYING = ("seq", "entity_id", "module_id", "new_value", "record_hash", "prev_hash")


class EventForm:
    """The canonical JSON of a create event's hashed columns as a ``Template`` (the columns
    every event of the import shares encoded once: ``payload.names`` must be ``VARYING``) and
    the key its digest is made under (None: plain SHA-256, a chain not yet keyed). The key is
    never shown in a repr; it pickles (for a worker process) as its bytes."""

    def __init__(self, payload: Template, secret: bytes | None) -> None:
        if sorted(payload.names) != sorted(VARYING):
            raise ValueError(f"an event template varies in {payload.names}, not {VARYING}")
        self.payload = payload
        self._order = tuple(VARYING.index(n) for n in payload.names)
        self._secret = secret
        # HMAC(k, m) is the state keyed with k updated with m: a copy of one keyed state per
        # digest gives hmac.new(k, m, sha256)'s digest without setting the key up each time.
        self._keyed = None if secret is None else hmac.new(secret, digestmod=hashlib.sha256)

    def __repr__(self) -> str:
        return f"EventForm(names={self.payload.names}, keyed={self._secret is not None})"

    def __getstate__(self) -> tuple[Template, bytes | None]:
        return self.payload, self._secret

    def __setstate__(self, state: tuple[Template, bytes | None]) -> None:
        self.__init__(*state)  # type: ignore[misc]

    def digest(self, varying: Sequence[Any]) -> str:
        """The event's digest from its ``VARYING`` values (in that order)."""
        text = self.payload.dumps([varying[i] for i in self._order]).encode()
        if self._keyed is None:
            return hashlib.sha256(text).hexdigest()
        h = self._keyed.copy()
        h.update(text)
        return h.hexdigest()


@dataclass(frozen=True)
class Sealed:
    """One chunk's output: per record (content JSON, record hash, event digest), and the chain
    after its last event (its number and digest)."""

    records: list[tuple[str, str, str]]
    seq: int
    prev: str


def seal(
    form: RecordForm,
    events: EventForm,
    rows: Sequence[tuple[str, int | None, Sequence[Any]]],
    seq: int,
    prev: str,
) -> Sealed:
    """Content JSON, record hash and chained event digest of each ``(entity_id, module_id,
    row values)`` in ``rows``, the chain continuing from event ``seq`` with digest ``prev``."""
    out = []
    for entity_id, module_id, row in rows:
        body = form.body(row)
        record = form.record_hash(body)
        seq += 1
        prev = events.digest((seq, entity_id, module_id, body, record, prev))
        out.append((body, record, prev))
    return Sealed(out, seq, prev)


def serve(inp: BinaryIO, out: BinaryIO) -> None:
    """A sealing worker's loop (``worker_command``): read a (RecordForm, EventForm) pickle,
    then (rows, seq, prev) tasks one by one; answer each with its ``seal`` as a (records, seq,
    prev) pickle of plain values. Ends at the end of its input. Its parent is the only party
    on either pipe: the pickles are its own."""
    # pickle.load each time, not one Unpickler: each pickle numbers its own memo from 0.
    try:
        form, events = pickle.load(inp)
    except EOFError:
        return
    while True:
        try:
            rows, seq, prev = pickle.load(inp)
        except EOFError:
            return
        sealed = seal(form, events, rows, seq, prev)
        pickle.dump((sealed.records, sealed.seq, sealed.prev), out, pickle.HIGHEST_PROTOCOL)
        out.flush()


def worker_command() -> list[str]:
    """The command that runs ``serve`` on its standard input and output: this interpreter in
    isolated mode (no environment variables, no user site, not the working directory on its
    path), with the folder that holds the ``ledger`` package first on its path. No parent
    script is imported again, as a multiprocessing spawn would do."""
    root = str(Path(__file__).resolve().parents[2])
    code = (
        f"import sys; sys.path.insert(0, {root!r}); import ledger.store.sealing as s; "
        "s.serve(sys.stdin.buffer, sys.stdout.buffer)"
    )
    return [sys.executable, "-I", "-c", code]
