"""Bulk writing of records and their audit events (import-logbook): byte for byte what the
one-record path writes.

``canonical``, ``member`` and ``Template`` against the stdlib call canonical JSON is defined
by (``json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
allow_nan=False)``) over random values (hypothesis); the bulk path's rows, events and chain
head against ``Journal.create``'s for the same rows, on SQLite and PostgreSQL, and ``audit
verify`` after it. Serials and values are invented.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import math
from datetime import UTC, datetime, timedelta
from typing import Any, ClassVar

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sqlmodel import Session, select

import ledger.logbook.import_logbook as importer
from ledger.canonical import NotCanonicalError, Template, canonical, member
from ledger.logbook.auth import find_user
from ledger.logbook.import_logbook import SheetRows, import_rows
from ledger.store.audit import GENESIS, Journal, verify
from ledger.store.sealing import VARYING, EventForm
from ledger.store.sitekey import SiteKey
from ledger.store.tables import AuditHead, IntegrityTest, WaterFluxTest
from tests.world import World

PSI = 6894.757293168361  # Pa, NIST SP 811 (1 lbf/in² = 6.894757293168 kPa)
ML_MIN = 1e-6 / 60  # m³/s
CLOCK = datetime(2026, 4, 1, 7, 45, 30, 250001, tzinfo=UTC)


def stdlib(obj: Any) -> str:
    """Canonical JSON as its definition spells it: the stdlib's json.dumps with these options."""
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)  # fmt: skip


keys = st.text(max_size=12)  # any text: quotes, backslashes, %, control characters, non-ASCII
scalars = (
    st.none() | st.booleans() | st.integers(min_value=-(2**70), max_value=2**70)
    | st.floats(allow_nan=False, allow_infinity=False) | st.text(max_size=30)
)  # fmt: skip
values = st.recursive(
    scalars,
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(keys, inner, max_size=4),
    max_leaves=12,
)


@settings(max_examples=400, deadline=None)
@given(value=values)
def test_canonical_and_member_equal_the_stdlib_definition(value: Any) -> None:
    assert canonical(value) == stdlib(value)
    assert member(value) == stdlib(value)


@settings(max_examples=150, deadline=None)
@given(fixed=st.dictionaries(keys, values, max_size=6), varying=st.dictionaries(keys, values,
       max_size=6))  # fmt: skip
def test_a_template_gives_the_canonical_json_of_the_whole_dict(
    fixed: dict[str, Any], varying: dict[str, Any]
) -> None:
    fixed = {k: v for k, v in fixed.items() if k not in varying}
    template = Template(fixed, varying)
    assert list(template.names) == sorted(varying)
    shown = template.dumps([varying[k] for k in template.names])
    assert shown == stdlib({**fixed, **varying})
    assert json.loads(shown) == json.loads(stdlib({**fixed, **varying}))


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_a_template_refuses_nan_and_infinity_naming_the_key(bad: float) -> None:
    template = Template({"stage": "baseline"}, ["nwp_m_s_pa", "points"])
    with pytest.raises(NotCanonicalError) as whole:
        canonical({"stage": "baseline", "nwp_m_s_pa": bad, "points": []})
    with pytest.raises(NotCanonicalError) as fast:
        template.dumps([bad, []])
    assert str(fast.value) == str(whole.value) and fast.value.path == "$.nwp_m_s_pa"
    with pytest.raises(NotCanonicalError) as nested:
        template.dumps([1.0, [{"feed_pa": bad}]])
    assert nested.value.path == "$.points[0].feed_pa"


def test_an_event_digest_is_hmac_sha256_under_the_key() -> None:
    secret = bytes(range(32))
    key = SiteKey(secret, "test")
    payload = Template({"action": "create", "actor": "op.kim"}, VARYING)
    keyed, plain = EventForm(payload, secret), EventForm(payload, None)
    for varying in ((1, "7", None, "", "a" * 64, "0" * 64), (2, "8", 3, "µ" * 500, "b", "c")):
        text = payload.dumps(
            [dict(zip(VARYING, varying, strict=True))[n] for n in payload.names]
        ).encode()
        # RFC 2104 HMAC through the stdlib, and the site key's own mac, for each event
        assert keyed.digest(varying) == hmac.new(secret, text, "sha256").hexdigest()
        assert keyed.digest(varying) == key.mac(text)
        assert plain.digest(varying) == hashlib.sha256(text).hexdigest()
    assert secret.hex() not in repr(keyed)  # the key is never shown


def _sheet(kind: str) -> SheetRows:
    """Rows as the mapping entry hands them over (SI): two modules' histories with notes that
    need escaping, a water grade, rows with and without their entered text."""
    sheet = SheetRows(kind, "bulk-test")
    start = datetime(2026, 3, 2, 8, 0, tzinfo=UTC)
    notes = [None, 'binder "B" p. 4 — 100% µ\\', "two\tcells", None, "{ok}", None]
    if kind == "water_flux":
        stages = ["baseline", "post-use", "post-clean", "pre-use", "baseline", "post-use"]
        flows = [170.0, 95.0, 163.0, 160.5, 200.0, 110.25]
        sheet.quantities = {"feed": [], "retentate": [], "flow": [], "temperature": []}
        sheet.texts = {"serial": [], "stage": [], "note": [], "water_grade": []}
        for j, (stage, q) in enumerate(zip(stages, flows, strict=True)):
            sheet.texts["stage"].append(stage)
            sheet.texts["water_grade"].append("WFI" if j % 2 else None)
            sheet.quantities["feed"].append(3.2 * PSI)
            sheet.quantities["retentate"].append(2.8 * PSI)
            sheet.quantities["flow"].append(q * ML_MIN)
            sheet.quantities["temperature"].append(291.65 + j)
            sheet.entered.append({"flow": f"{q} mL/min"} if j % 3 else {})
    else:
        sheet.quantities = {"start": [], "end": [], "hold_time": []}
        sheet.texts = {"serial": [], "note": []}
        for j in range(6):
            sheet.quantities["start"].append(15 * PSI)
            sheet.quantities["end"].append((14.99 - 0.3 * j) * PSI)
            sheet.quantities["hold_time"].append(300.0)
            sheet.entered.append({"end": f"{14.99 - 0.3 * j:.2f} psi"} if j % 2 else {})
    for j in range(6):
        sheet.rows.append(j + 2)
        sheet.at.append(start + timedelta(days=j))
        sheet.texts["serial"].append("QMB-0142" if j < 4 else "QMB-0143")
        sheet.texts["note"].append(notes[j])
    return sheet


def _one_by_one(ids: list[int]) -> Any:
    """import_logbook._write as the one-record path: an ORM record per row through
    Journal.create, under the ids the bulk path gave them."""

    def write(session: Session, actor: Any, head: Any, sheet: SheetRows, accepted: Any,
              at: datetime, result: Any, progress: Any) -> None:  # fmt: skip
        cls: Any = WaterFluxTest if sheet.kind == "water_flux" else IntegrityTest
        journal = Journal(session, actor.login, at)
        for k, ((i, m, version, values), new_id) in enumerate(zip(accepted, ids, strict=True)):
            assert k == ids.index(new_id)
            if values.get("baseline_test_id") is not None and values["baseline_test_id"] < 0:
                values["baseline_test_id"] = ids[-values["baseline_test_id"] - 1]
            record = cls(**values, id=new_id, module_id=m.module.id, activity_at=sheet.at[i],
                         late=True, limits_version_id=version,
                         method_version=f"fluxledger {importer.__version__}",
                         entered=sheet.entered[i] or None)  # fmt: skip
            journal.create(record, module_id=m.module.id)
        result.written = len(accepted)

    return write


def _stored(session: Session, table: str, first_id: int, seq: int) -> dict[str, list[Any]]:
    """The rows as the database holds them: every column as the driver reads it (SQLite), or
    each row's text form (PostgreSQL)."""
    conn = session.connection()
    pg = conn.dialect.name == "postgresql"

    def rows(name: str, where: str, key: str, since: int) -> list[Any]:
        what = "CAST(t AS text)" if pg else "*"
        mark = "%(x)s" if pg else ":x"
        sql = f"SELECT {what} FROM {name} t WHERE {where} >= {mark} ORDER BY {key}"
        return [tuple(r) for r in conn.exec_driver_sql(sql.replace(":x", "?"), {"x": since}
                                                       if pg else (since,))]  # fmt: skip

    return {
        table: rows(table, "id", "id", first_id),
        "audit_event": rows("audit_event", "seq", "seq", seq + 1),
        "audit_head": rows("audit_head", "id", "id", 1),
    }


@pytest.mark.parametrize("kind", ["water_flux", "pressure_decay"])
@pytest.mark.parametrize("sealing", ["in process", "worker process"])
def test_bulk_rows_and_events_equal_journal_create_and_verify(
    world: World, kind: str, sealing: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    world.add_module("QMB-0142")
    world.add_module("QMB-0143")
    monkeypatch.setattr(importer, "_now", lambda: CLOCK)
    if sealing == "worker process":  # the hashes of 4-row chunks made in a spawned process
        monkeypatch.setattr(importer, "PARALLEL_ROWS", 1)
        monkeypatch.setattr(importer, "CHUNK", 4)
        spawned: list[Any] = []
        real = importer._Worker
        monkeypatch.setattr(importer, "_Worker",
                            lambda *a: spawned.append(1) or real(*a))  # fmt: skip
    table = "water_flux_test" if kind == "water_flux" else "integrity_test"
    found: list[dict[str, list[Any]]] = []
    ids: list[int] = []
    for write in ("bulk", "one by one"):
        if write == "one by one":
            monkeypatch.setattr(importer, "_write", _one_by_one(ids))
        with Session(world.engine()) as s:
            head = s.exec(select(AuditHead)).one()
            seq, chained = head.seq, head.hash
            actor = find_user(s, "op.kim")
            assert actor is not None
            result = import_rows(s, actor, _sheet(kind))
            assert result.written == 6 and not result.rejected
            if write == "bulk":
                assert result.first_id is not None and result.last_id is not None
                ids = list(range(result.first_id, result.last_id + 1))
            found.append(_stored(s, table, ids[0], seq))
            check = verify(s)
            assert check.ok, check.problems
            s.rollback()
    bulk, one = found
    assert len(bulk[table]) == 6 and len(bulk["audit_event"]) == 6
    assert bulk == one
    assert chained != GENESIS  # the world's chain has events before the import's
    if sealing == "worker process":
        assert spawned == [1]


class _NoProcesses:
    """A worker that cannot start (as where a sandbox forbids new processes)."""

    tried: ClassVar[list[int]] = []

    def __init__(self, *args: Any) -> None:
        self.tried.append(1)
        raise OSError("no processes here")


class _DiesAfterOne(importer._Worker):
    """A real worker that answers the first batch, then dies."""

    tried: ClassVar[list[int]] = []

    def __init__(self, *args: Any) -> None:
        self.tried.append(1)
        self.answered = 0
        super().__init__(*args)

    def result(self) -> Any:
        if self.answered:
            self.process.kill()
            self.process.wait()
        self.answered += 1
        return super().result()


@pytest.mark.parametrize("pool", [_NoProcesses, _DiesAfterOne])
def test_a_worker_that_cannot_start_or_dies_leaves_the_same_rows_to_the_import(
    sqlite_world: World, pool: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    world = sqlite_world  # the hand-over, not the database, is the subject
    world.add_module("QMB-0142")
    world.add_module("QMB-0143")
    monkeypatch.setattr(importer, "_now", lambda: CLOCK)
    monkeypatch.setattr(importer, "CHUNK", 2)
    found = []
    for threshold, worker in ((10**9, importer._Worker), (1, pool)):
        monkeypatch.setattr(importer, "PARALLEL_ROWS", threshold)
        monkeypatch.setattr(importer, "_Worker", worker)
        with Session(world.engine()) as s:
            seq = s.exec(select(AuditHead)).one().seq
            actor = find_user(s, "op.kim")
            assert actor is not None
            result = import_rows(s, actor, _sheet("water_flux"))
            assert result.written == 6 and result.first_id is not None
            found.append(_stored(s, "water_flux_test", result.first_id, seq))
            check = verify(s)
            assert check.ok, check.problems
            s.rollback()
    in_process, fallen_back = found
    assert pool.tried == [1]  # the import did hand its hashes over (or try to)
    assert len(in_process["audit_event"]) == 6
    assert fallen_back == in_process


def test_an_import_that_fails_while_writing_leaves_no_worker_running(
    sqlite_world: World, monkeypatch: pytest.MonkeyPatch
) -> None:
    world = sqlite_world
    world.add_module("QMB-0142")
    world.add_module("QMB-0143")
    monkeypatch.setattr(importer, "PARALLEL_ROWS", 1)
    monkeypatch.setattr(importer, "CHUNK", 1)
    workers: list[Any] = []
    real = importer._Worker

    def made(*args: Any) -> Any:
        workers.append(real(*args))
        return workers[-1]

    written = importer._insert

    def insert_then_fail(*args: Any) -> None:
        written(*args)
        raise RuntimeError("the disk filled up")  # as a database error would stop it

    monkeypatch.setattr(importer, "_Worker", made)
    monkeypatch.setattr(importer, "_insert", insert_then_fail)
    with Session(world.engine()) as s:
        actor = find_user(s, "op.kim")
        assert actor is not None
        with pytest.raises(RuntimeError, match="disk filled up"):
            import_rows(s, actor, _sheet("water_flux"))
        s.rollback()
    assert len(workers) == 1
    assert workers[0].process.poll() is not None  # the worker has ended, not left behind
    with Session(world.engine()) as s:
        assert s.exec(select(WaterFluxTest)).all() == []
