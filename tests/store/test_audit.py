"""The audit trail: events for every write, a hash chain, and `audit verify` naming each row
that was altered, removed or inserted behind fluxledger's back (direct SQL)."""

from __future__ import annotations

import hashlib
import json

import pytest
from sqlalchemy import text

from ledger.store.audit import GENESIS, canonical, event_hash, record_hash, verify
from ledger.store.engine import transaction
from ledger.store.tables import AuditEvent, WaterFluxTest
from tests.world import World


def _drop_append_only_triggers(world: World) -> None:
    """What an attacker with database-owner rights would do first."""
    engine = world.engine()
    with engine.begin() as conn:
        if engine.dialect.name == "postgresql":
            conn.execute(text("DROP TRIGGER audit_event_no_change ON audit_event"))
        else:
            conn.execute(text("DROP TRIGGER audit_event_no_update"))
            conn.execute(text("DROP TRIGGER audit_event_no_delete"))


def _verify(world: World) -> list[str]:
    with transaction(world.engine()) as s:
        return [str(p) for p in verify(s).problems]


@pytest.fixture
def tested(world: World) -> World:
    world.ready()
    world.ok(world.cycle())
    return world


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
        assert e.hash == event_hash(e)
        # The hash is SHA-256 over the canonical JSON of every other column.
        body = {k: v for k, v in json.loads(canonical(_as_dict(e))).items() if k != "hash"}
        assert e.hash == hashlib.sha256(canonical(body).encode()).hexdigest()
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
    assert "audit_event 7: missing: the chain skips from event 6 to event 8" in problems
    out = tested.cli("audit", "verify", "--json")
    assert out.code == 1
    assert {
        "entity": "audit_event",
        "key": "7",
        "what": "missing: the chain skips from event 6 to event 8",
    } in out.json()["problems"]


def test_sql_delete_of_the_last_audit_rows_is_named(tested: World) -> None:
    _drop_append_only_triggers(tested)
    engine = tested.engine()
    with engine.begin() as conn:
        last = conn.execute(text("SELECT max(seq) FROM audit_event")).scalar_one()
        conn.execute(text("DELETE FROM audit_event WHERE seq >= :s"), {"s": last - 1})
    problems = _verify(tested)
    assert any(
        p.startswith(f"audit_event {last}: missing: the chain head names event {last}")
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
    assert f"storage {new_id}: altered: its content no longer matches its stored hash" in problems


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
        "cleaning 1: missing: the audit trail records it but the row is gone"
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
    assert {e["entity"] for e in by_eng} == {"module_type"}
    future = tested.cli("audit", "show", "--since", "2999-01-01T00:00Z", "--json").json()
    assert future["events"] == []
    bad = tested.cli("audit", "show", "--since", "yesterday")
    assert bad.code == 2 and bad.stderr.startswith("error: --since 'yesterday': ")
    assert "ISO 8601" in bad.stderr


def test_passwords_never_appear_in_the_audit_trail(tested: World) -> None:
    events = tested.cli("audit", "show", "--entity", "user", "--json").json()["events"]
    text_all = json.dumps(events)
    assert "argon2" not in text_all
    assert "engineer-pass-1" not in text_all
    created = [json.loads(e["new_value"]) for e in events if e["action"] == "create"]
    assert all("password_hash" not in c for c in created)
