"""The audit trail: events for every write, a hash chain, and `audit verify` naming each row
that was altered, removed or inserted behind fluxledger's back (direct SQL)."""

from __future__ import annotations

import hashlib
import hmac
import json
from collections.abc import Iterator
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import text

from ledger.store.audit import GENESIS, canonical, event_hash, record_hash, verify
from ledger.store.engine import transaction
from ledger.store.sitekey import SiteKey
from ledger.store.tables import AuditEvent, WaterFluxTest
from tests.conftest import TEST_SITE_KEY
from tests.world import PROCEDURE, World, Worlds

TEST_KEY = SiteKey(bytes.fromhex(TEST_SITE_KEY), "tests")


def _drop_append_only_triggers(world: World) -> None:
    """What an attacker with database-owner rights would do first."""
    engine = world.engine()
    with engine.begin() as conn:
        if engine.dialect.name == "postgresql":
            conn.execute(text("DROP TRIGGER audit_event_no_change ON audit_event"))
        else:
            conn.execute(text("DROP TRIGGER audit_event_no_update"))
            conn.execute(text("DROP TRIGGER audit_event_no_delete"))


TRIGGERS_GONE = "audit_event triggers: triggers removed"


def _verify(world: World, *, triggers: bool = False) -> list[str]:
    """The problems verify names; with ``triggers``, leave out the one about the triggers a
    test dropped on purpose (and check it is there)."""
    with transaction(world.engine()) as s:
        found = [str(p) for p in verify(s).problems]
    if triggers:
        assert any(p.startswith(TRIGGERS_GONE) for p in found), found
        found = [p for p in found if not p.startswith(TRIGGERS_GONE)]
    return found


def _tested(world: World, _folder: Path) -> None:
    world.ready()
    world.ok(world.cycle())


@pytest.fixture
def tested(backend: str, worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """A commissioned module after one full cycle: a copy, built once per worker and backend."""
    with worlds.copy(backend, tmp_path, _tested) as w:
        yield w


def test_clean_database_verifies(tested: World) -> None:
    assert _verify(tested) == []
    out = tested.cli("audit", "verify", "--json")
    assert out.code == 0
    body = out.json()
    assert body["verdict"] == "intact" and body["checked"]["problems"] == 0
    assert body["checked"]["events"] == tested.snapshot()["audit_event"] >= 20


def test_chain_links_every_event_to_the_previous_one(tested: World) -> None:
    with transaction(tested.engine()) as s:
        events = list(s.exec(text("SELECT seq FROM audit_event ORDER BY seq")))  # type: ignore[call-overload]
        rows = [s.get(AuditEvent, seq) for (seq,) in events]
    assert [e.seq for e in rows] == list(range(1, len(rows) + 1))  # type: ignore[union-attr]
    prev = GENESIS
    for e in rows:
        assert e is not None
        assert e.prev_hash == prev
        assert e.hash == event_hash(e, TEST_KEY)
        # The digest is HMAC-SHA-256 (RFC 2104, Python's hmac module) under the site key, over
        # the canonical JSON of every other column.
        body = {k: v for k, v in json.loads(canonical(_as_dict(e))).items() if k != "hash"}
        mac = hmac.new(bytes.fromhex(TEST_SITE_KEY), canonical(body).encode(), hashlib.sha256)
        assert e.hash == mac.hexdigest()
        prev = e.hash


def _as_dict(e: AuditEvent) -> dict[str, object]:
    from ledger.store.audit import _encode

    return {c.name: _encode(getattr(e, c.name)) for c in AuditEvent.__table__.columns}  # type: ignore[attr-defined]


def test_sql_update_of_a_stored_nwp_is_named(tested: World) -> None:
    with tested.engine().begin() as conn:
        conn.execute(text("UPDATE water_flux_test SET nwp_m_s_pa = nwp_m_s_pa * 1.25 WHERE id = 3"))
    assert _verify(tested) == [
        "water_flux_test 3: altered: its content no longer matches its stored hash"
    ]
    out = tested.cli("audit", "verify")
    assert out.code == 1
    assert "water_flux_test" in out.stdout and "altered" in out.stdout
    assert "PROBLEMS FOUND" in out.stdout


def test_sql_update_with_a_recomputed_record_hash_is_still_named(tested: World) -> None:
    """Recomputing the row's own hash is not enough: the audit trail holds the last one."""
    engine = tested.engine()
    with transaction(engine) as s:
        test = s.get(WaterFluxTest, 3)
        assert test is not None
        test.nwp_m_s_pa *= 1.25
        forged = record_hash(test)
        s.expunge(test)
    with engine.begin() as conn:
        conn.execute(
            text(
                "UPDATE water_flux_test SET nwp_m_s_pa = nwp_m_s_pa * 1.25, record_hash = :h "
                "WHERE id = 3"
            ),
            {"h": forged},
        )
    assert _verify(tested) == [
        "water_flux_test 3: changed outside fluxledger: its hash differs from the last one the "
        "audit trail recorded"
    ]


def test_sql_delete_of_an_audit_row_is_named(tested: World) -> None:
    _drop_append_only_triggers(tested)
    with tested.engine().begin() as conn:
        conn.execute(text("DELETE FROM audit_event WHERE seq = 7"))
    problems = _verify(tested)
    assert "audit_event 7: deleted: the chain skips from event 6 to event 8" in problems
    out = tested.cli("audit", "verify", "--json")
    assert out.code == 1
    assert {
        "entity": "audit_event",
        "key": "7",
        "what": "deleted: the chain skips from event 6 to event 8",
    } in out.json()["problems"]


def test_sql_delete_of_the_last_audit_rows_is_named(tested: World) -> None:
    _drop_append_only_triggers(tested)
    engine = tested.engine()
    with engine.begin() as conn:
        last = conn.execute(text("SELECT max(seq) FROM audit_event")).scalar_one()
        conn.execute(text("DELETE FROM audit_event WHERE seq >= :s"), {"s": last - 1})
    problems = _verify(tested)
    assert any(
        p.startswith(f"audit_event {last}: deleted: the chain head names event {last}")
        for p in problems
    ), problems


def test_sql_edit_of_an_audit_row_is_named(tested: World) -> None:
    _drop_append_only_triggers(tested)
    with tested.engine().begin() as conn:
        conn.execute(text("UPDATE audit_event SET actor = 'mallory' WHERE seq = 5"))
    assert "audit_event 5: altered: its content no longer matches its hash" in _verify(tested)


def test_sql_inserted_row_is_named(tested: World) -> None:
    engine = tested.engine()
    with engine.begin() as conn:
        conn.execute(text(
            "INSERT INTO storage (record_hash, created_at, created_by, module_id, activity_at,"
            " late, solution) VALUES ('0', CURRENT_TIMESTAMP, 'op.kim', 1, CURRENT_TIMESTAMP,"
            " false, '20 % ethanol')"
        ))  # fmt: skip
        new_id = conn.execute(text("SELECT max(id) FROM storage")).scalar_one()
    problems = _verify(tested)
    assert f"storage {new_id}: inserted outside fluxledger: no audit event records it" in problems


def test_sql_inserted_row_with_a_valid_hash_is_named(tested: World) -> None:
    """A forger who computes a correct record hash is still caught: no event records it."""
    from ledger.store.tables import Storage
    from ledger.store.types import utc_now

    engine = tested.engine()
    now = utc_now()
    forged = Storage(id=50, module_id=1, activity_at=now, solution="20 % ethanol",
                     created_at=now, created_by="op.kim")  # fmt: skip
    forged.record_hash = record_hash(forged)
    values = {c.name: getattr(forged, c.name) for c in Storage.__table__.columns}  # type: ignore[attr-defined]
    with engine.begin() as conn:
        conn.execute(Storage.__table__.insert(), values)  # type: ignore[attr-defined]
    assert _verify(tested) == ["storage 50: inserted outside fluxledger: no audit event records it"]


def test_sql_hard_delete_of_a_record_is_named(tested: World) -> None:
    with tested.engine().begin() as conn:
        conn.execute(text("DELETE FROM cleaning WHERE id = 1"))
    assert _verify(tested) == [
        "cleaning 1: deleted: the audit trail records it but the row is gone"
    ]


def test_every_change_is_an_event_with_old_and_new_value(tested: World) -> None:
    out = tested.cli("audit", "show", "--module", "QMB-0142", "--entity", "module", "--json")
    events = out.json()["events"]
    statuses = [
        (json.loads(e["old_value"]), json.loads(e["new_value"]))
        for e in events
        if e["field"] == "status"
    ]
    assert statuses == [
        ("commissioning", "available"),
        ("available", "in_use"),
        ("in_use", "awaiting_cleaning"),
        ("awaiting_cleaning", "cleaned"),
        ("cleaned", "available"),
    ]
    assert all(e["actor"] == "op.kim" for e in events if e["field"] == "status")
    assert all(e["at"].endswith("+00:00") for e in events)


def test_audit_show_filters_by_user_and_time(tested: World) -> None:
    by_eng = tested.cli("audit", "show", "--by", "eng.ray", "--json").json()["events"]
    assert by_eng and {e["actor"] for e in by_eng} == {"eng.ray"}
    assert "module_type" in {e["entity"] for e in by_eng}
    future = tested.cli("audit", "show", "--since", "2999-01-01T00:00Z", "--json").json()
    assert future["events"] == []
    bad = tested.cli("audit", "show", "--since", "yesterday")
    assert bad.code == 2 and bad.stderr.startswith("error: --since: 'yesterday' ")
    assert "ISO 8601" in bad.stderr


def test_passwords_never_appear_in_the_audit_trail(tested: World) -> None:
    events = tested.cli("audit", "show", "--entity", "user", "--json").json()["events"]
    text_all = json.dumps(events)
    assert "argon2" not in text_all
    assert "engineer-pass-1" not in text_all
    created = [json.loads(e["new_value"]) for e in events if e["action"] == "create"]
    assert all("password_hash" not in c for c in created)


def _other(value: object, column: object) -> object:
    """A different value of the column's type (for a column that is None: some value)."""

    from sqlalchemy import JSON, Boolean, Date, DateTime, Float, Integer, LargeBinary

    kind = getattr(column.type, "impl", column.type)  # type: ignore[attr-defined]  # unwrap UTCDateTime
    if isinstance(kind, Boolean):
        return not value
    if isinstance(kind, Integer):
        return (value or 0) + 1  # type: ignore[operator]
    if isinstance(kind, Float):
        return (value or 0.0) * 1.5 + 1.0  # type: ignore[operator]
    if isinstance(kind, DateTime):
        base = value if isinstance(value, datetime) else datetime(2026, 1, 1, tzinfo=UTC)
        return base + timedelta(seconds=1)
    if isinstance(kind, Date):
        return (value or date(2026, 1, 1)) + timedelta(days=1)  # type: ignore[operator]
    if isinstance(kind, LargeBinary):
        return bytes(value or b"") + b"~"
    if isinstance(kind, JSON):
        return [*(value or []), {"forged": 1.0}]  # type: ignore[misc]
    text = str(value or "")  # same length: VARCHAR(64) columns stay within their limit
    return text[:-1] + ("~" if text[-1:] != "~" else "^") if text else "~"


def _a_cycle(w: World, tmp_path: Path) -> None:
    """A cleaning cycle on a second module, with a prepared solution: rows in cleaning_step and
    prepared_solution."""
    from tests.cli.test_cleaning_cycles import approved_procedure, values, verified_naoh

    approved_procedure(w, tmp_path)
    verified_naoh(w)
    w.ready("QMB-0200")
    w.ok(w.as_user("op.kim", "use", "start", "QMB-0200", "--product", "QB-117", "--lot", "L-9"))
    w.ok(w.as_user("op.kim", "use", "end", "QMB-0200"))
    w.ok(w.water("QMB-0200", "post-use", "90 mL/min"))
    w.ok(w.as_user("op.kim", "care", "cycle", "QMB-0200", "--procedure", "QC-CYCLE-05",
                   *values()))  # fmt: skip


def _a_skid(w: World) -> None:
    """A skid with an instrument and an approved mapping, so the equipment tables have rows."""
    from tests.cli.test_runs import MAPPING

    w.ok(w.as_user("eng.ray", "skid", "add", "TFF-SKID-2", "--description", "bench skid"))
    w.ok(w.as_user("eng.ray", "skid", "instrument", "TFF-SKID-2", "--tag", "PT-101",
                   "--measures", "feed_pressure", "--calibration-due", "2027-01-31"))  # fmt: skip
    w.ok(w.as_user("qa.lin", "skid", "mapping", "TFF-SKID-2", str(MAPPING)))


def _a_run(w: World, tmp_path: Path) -> None:
    """A run with a skid log, a QC result, a deviation and a signed record revision, so their
    tables have rows."""
    from ledger.cli.demo_log import write_log
    from tests.cli.test_runs import INPUTS, MAPPING

    w.ok(w.integrity("QMB-0142"))
    w.ok(w.water("QMB-0142", "pre-use", "165 mL/min"))
    w.ok(w.as_user("eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0142",
                   "--product", "QB-117", "--lot", "QB117-26-015", *INPUTS))  # fmt: skip
    w.ok(w.as_user("qa.lin", "run", "approve-plan", "1"))
    w.ok(w.as_user("op.kim", "run", "start", "1"))
    w.ok(w.as_user("op.kim", "run", "step", "1", "1", "--meaning", "performed", "--value",
                   "permeate_ph=7.4", "--value", "permeate_conductivity=15.2 mS/cm"))  # fmt: skip
    w.wide_log_tolerance()
    log = write_log(tmp_path / "skid.csv", datetime.now(UTC) - timedelta(hours=2))
    w.ok(w.as_user("op.kim", "run", "import", "1", str(log), "--mapping", str(MAPPING)))
    w.ok(w.as_user("op.kim", "run", "qc", "1", "--result", "ph=7.4"))
    w.ok(w.as_user("op.kim", "run", "deviation", "1", "--check", "tmp", "--description", "spike"))
    w.ok(w.as_user("op.kim", "run", "finish", "1"))
    w.ok(w.as_user("op.kim", "run", "submit", "1"))
    w.ok(w.as_user("op.kim", "record", "sign", "1", "--meaning", "performed"))
    # A controlled copy, so record_copy has a row whose columns are tampered with too.
    w.ok(w.as_user("op.kim", "record", "print", "1", "--out", str(tmp_path), "--no-charts"))


@pytest.mark.slow
def test_a_change_to_any_column_of_any_record_is_found(tested: World, tmp_path: Path) -> None:
    """Every stored column is covered by its record's hash: change any one of them in SQL and
    verify names that row.

    The changes go in rounds, each rolled back before the next: round k changes the k-th
    column of one row of every table, so no row has more than one changed column and verify
    (which names a record for its own hash and its own audit events only) naming a row means
    that column's change was found. One verify per round, not one per column.
    """
    from sqlalchemy import update
    from sqlalchemy.exc import DataError, IntegrityError
    from sqlmodel import Session, select

    from ledger.store.tables import RECORDS

    tested.ok(tested.as_user("op.kim", "care", "store", "QMB-0142", "--solution", "20 % ethanol"))
    tested.ok(tested.as_user("sysadm", "user", "lockout", "--max-failures", "4", "--reason", "t"))
    tested.ok(tested.as_user("eng.ray", *PROCEDURE))
    tested.ok(tested.as_user("op.kim", "module", "hold", "QMB-0142", "--reason", "inspect"))
    tested.ok(tested.as_user("eng.ray", "module", "release", "QMB-0142", "--decision", "return",
                             "--reason", "fine"))  # fmt: skip
    _a_run(tested, tmp_path)
    _a_skid(tested)
    _a_cycle(tested, tmp_path)
    engine = tested.engine()
    checked, refused = 0, []
    with engine.connect() as conn:
        # entity -> (table, primary key column, the row's key, the row, its other columns)
        rows: dict[str, tuple[Any, Any, Any, Any, list[Any]]] = {}
        for entity, cls in RECORDS.items():
            table = cls.__table__  # type: ignore[attr-defined]
            row = conn.execute(select(table)).first()
            if row is not None:
                pk = next(iter(table.primary_key.columns))
                others = [c for c in table.columns if not c.primary_key]
                rows[entity] = (table, pk, row._mapping[pk.name], row, others)
        conn.rollback()  # end the reads' transaction; each round below has its own
        for k in range(max(len(others) for *_, others in rows.values())):
            outer = conn.begin()
            changed: list[tuple[str, str, Any]] = []
            for entity, (table, pk, key, row, others) in rows.items():
                if k >= len(others):
                    continue
                column = others[k]
                change = conn.begin_nested()  # a refused change undoes only itself
                try:
                    conn.execute(
                        update(table).where(pk == key).values(
                            {column.name: _other(row._mapping[column.name], column)})
                    )  # fmt: skip
                except (IntegrityError, DataError):
                    change.rollback()  # e.g. a foreign key to a row that does not exist
                    refused.append(column)
                    continue
                change.commit()
                changed.append((entity, str(key), column))
            with Session(bind=conn) as session:
                problems = verify(session).problems
            outer.rollback()
            for entity, key, column in changed:
                named = [p for p in problems if p.entity == entity and p.key == key]
                assert named, f"changing {entity}.{column.name} went unnoticed"
                checked += 1

    # Every column was changed and found, but for foreign keys that the database itself
    # refused to point at a row that does not exist, and a unique index's column whose next
    # value is taken (cleaning_step.number: step 2 of the same cycle exists).
    def unique(c: Any) -> bool:
        return any(i.unique and c in i.columns.values() for i in c.table.indexes)

    assert all(c.foreign_keys or unique(c) for c in refused), [
        str(c) for c in refused if not (c.foreign_keys or unique(c))
    ]
    total = sum(1 for cls in RECORDS.values()
                for c in cls.__table__.columns if not c.primary_key)  # type: ignore[attr-defined]  # fmt: skip
    assert checked + len(refused) == total
