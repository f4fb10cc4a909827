"""Tampering behind fluxledger's back, and `audit verify` naming what happened.

Two kinds of attack on an approved run's database:
- **informed rewrites**: someone who knows the code changes rows, recomputes their record
  hashes with the project's own functions, re-links every later event, moves the chain head
  and puts the append-only triggers back. Without the site key each is found and named; with
  the key the chain alone cannot tell (that is what checkpoints are for), and a checkpoint
  made before the rewrite names it.
- **random direct SQL**: at least 100 seeded changes of any column of any regulated table,
  deletes, inserts, reordered and edited audit events, the chain head itself; every one found
  and named with what happened (inserted, deleted, altered, changed, re-chained...).

Every change is made inside a transaction that is rolled back afterwards, so one world serves
all trials.
"""

from __future__ import annotations

import random
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import Connection, text
from sqlmodel import Session

from ledger.records.checkpoint import check, make
from ledger.records.identity import Identity, make_identity
from ledger.store import audit
from ledger.store.sitekey import SiteKey
from ledger.store.tables import RECORDS, AuditEvent
from tests.conftest import TEST_SITE_KEY
from tests.records import flow
from tests.store.test_audit import _other
from tests.world import World, Worlds

REAL_KEY = SiteKey(bytes.fromhex(TEST_SITE_KEY), "tests")
GUESSED_KEY = SiteKey(b"\x01" * 32, "an attacker's guess")
WORDS = ("inserted", "deleted", "altered", "changed outside", "chain broken", "re-chained",
         "triggers removed", "key mismatch")  # fmt: skip
TRIALS = 120
KINDS = ("changed", "deleted", "inserted", "swapped", "audit event", "audit_head")
PASSPHRASE = b"invented-checkpoint-passphrase"


@pytest.fixture
def approved(backend: str, worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    with worlds.copy(backend, tmp_path, flow.approved) as w:
        yield w


@pytest.fixture(scope="module")
def seal_keys(tmp_path_factory: pytest.TempPathFactory) -> Identity:
    return make_identity(
        tmp_path_factory.mktemp("checkpoint-keys"),
        common_name="Audit Checkpoints, Site Nordhafen",
        organization="Quellmoor Biotherapeutics (invented)",
        passphrase=PASSPHRASE,
    )


# --- the attacker's tools: the project's own functions, without (or with) the key -----------


def _table(entity: str) -> Any:
    return RECORDS[entity].__table__  # type: ignore[attr-defined]


def _rehash(conn: Connection, entity: str, key: object) -> str:
    """Recompute a row's record hash the way fluxledger does and store it."""
    cls = RECORDS[entity]
    table = _table(entity)
    pk = next(iter(table.primary_key.columns))
    row = conn.execute(table.select().where(pk == key)).one()._mapping
    digest = audit._digest(
        entity, audit._values(table, cls.hash_excluded, row.__getitem__, cls.hash_defaults)
    )
    conn.execute(table.update().where(pk == key).values(record_hash=digest))
    return digest


def _relink(
    conn: Connection,
    key: SiteKey | None,
    *,
    rehashed: dict[tuple[str, str], str] | None = None,
    drop: Callable[[dict[str, Any]], bool] = lambda ev: False,
) -> None:
    """Rewrite the whole chain as an informed attacker would: drop some events, give each
    changed record's last event its new hash, renumber, re-link every digest (under ``key``,
    or plain SHA-256 for None), move the head, and put the triggers back."""
    table: Any = AuditEvent.__table__  # type: ignore[attr-defined]
    events = [dict(r._mapping) for r in conn.execute(table.select().order_by(table.c.seq))]
    events = [ev for ev in events if not drop(ev)]
    for (entity, entity_id), digest in (rehashed or {}).items():
        last = [ev for ev in events if (ev["entity"], ev["entity_id"]) == (entity, entity_id)]
        last[-1]["record_hash"] = digest
    with audit._triggers_lifted(conn):
        conn.execute(text("DELETE FROM audit_event"))
        prev = audit.GENESIS
        for seq, ev in enumerate(events, start=1):
            ev["seq"], ev["prev_hash"] = seq, prev
            ev["hash"] = audit._event_digest(ev.__getitem__, key)
            prev = ev["hash"]
        conn.execute(AuditEvent.__table__.insert(), events)  # type: ignore[attr-defined]
    mac = audit.head_mac(key, len(events), prev) if key is not None else None
    values = {"s": len(events), "h": prev}
    if mac is not None:
        conn.execute(
            text("UPDATE audit_head SET seq = :s, hash = :h, mac = :m"), {**values, "m": mac}
        )
    else:
        conn.execute(text("UPDATE audit_head SET seq = :s, hash = :h"), values)


def _change(entity: str, where: str, sets: str) -> Callable[[Connection, SiteKey | None], None]:
    def attack(conn: Connection, key: SiteKey | None) -> None:
        row_id = conn.execute(text(f"SELECT id FROM {_table(entity).name} WHERE {where}")).scalar()
        assert row_id is not None, f"no {entity} row where {where}"
        conn.execute(text(f"UPDATE {_table(entity).name} SET {sets} WHERE id = :i"), {"i": row_id})
        _relink(conn, key, rehashed={(entity, str(row_id)): _rehash(conn, entity, row_id)})

    return attack


def _delete_last_event(conn: Connection, key: SiteKey | None) -> None:
    last = conn.execute(text("SELECT max(seq) FROM audit_event")).scalar_one()
    _relink(conn, key, drop=lambda ev: ev["seq"] == last)


def _delete_approval(conn: Connection, key: SiteKey | None) -> None:
    sig = conn.execute(text("SELECT id FROM signature WHERE meaning = 'approved'")).scalar_one()
    conn.execute(text("DELETE FROM signature WHERE id = :i"), {"i": sig})
    _relink(conn, key, drop=lambda ev: (ev["entity"], ev["entity_id"]) == ("signature", str(sig)))


INFORMED: dict[str, Callable[[Connection, SiteKey | None], None]] = {
    "a water-flux test's verdict and recovery changed": _change(
        "water_flux_test", "stage = 'pre_use' ORDER BY id DESC LIMIT 1",
        "verdict = 'pass', recovery = 0.99",
    ),
    "a module released from hold": _change("module", "serial = 'QMB-0142'", "status = 'available'"),
    "an operator promoted to QA": _change("user", "login = 'op.kim'", "role = 'qa'"),
    "a run's lot changed": _change("run", "id = 1", "lot = 'QB117-26-999'"),
    "the last event deleted": _delete_last_event,
    "the approval signature deleted": _delete_approval,
}  # fmt: skip


def _problems(conn: Connection, key: object = audit.SITE) -> list[audit.Problem]:
    with Session(bind=conn) as session:
        return list(audit.verify(session, key=key).problems)  # type: ignore[arg-type]


def _named(problems: list[audit.Problem]) -> bool:
    return bool(problems) and all(any(w in p.what for w in WORDS) or "MAC" in p.what
                                  for p in problems)  # fmt: skip


@pytest.mark.parametrize("name", list(INFORMED))
def test_an_informed_rewrite_without_the_key_is_found_and_named(approved: World, name: str) -> None:
    with approved.engine().connect() as conn:
        assert _problems(conn) == []
        conn.rollback()
        outer = conn.begin()
        for guess in (None, GUESSED_KEY):  # plain SHA-256, then a guessed key
            nested = conn.begin_nested()
            INFORMED[name](conn, guess)
            assert audit.active_triggers(conn) == set(audit.TRIGGERS[conn.dialect.name])
            problems = _problems(conn)
            nested.rollback()
            assert _named(problems), (name, problems)
            # The rewrite is named as a re-chaining or a head that no longer matches its MAC.
            assert any("re-chained" in p.what or "MAC" in p.what for p in problems), problems
        outer.rollback()


@pytest.mark.parametrize("name", list(INFORMED))
def test_an_informed_rewrite_with_the_key_is_caught_by_an_earlier_checkpoint(
    approved: World, name: str, seal_keys: Identity, tmp_path: Path
) -> None:
    folder = tmp_path / "checkpoints"
    with approved.engine().connect() as conn:
        with Session(bind=conn) as session:
            make(session, "test", folder, key_file=seal_keys.p12, cert_file=None,
                 passphrase=PASSPHRASE)  # fmt: skip
        conn.commit()
        outer = conn.begin()
        INFORMED[name](conn, REAL_KEY)
        # With the key the chain is consistent again: verify alone cannot tell (but for a
        # deleted last event, whose record no longer matches the event before it) ...
        if name != "the last event deleted":
            assert _problems(conn) == []
        # ... but the checkpoint made before it can.
        with Session(bind=conn) as session:
            report = check(session, folder)
        outer.rollback()
    assert report.checked == 1 and report.problems, name
    what = report.problems[0].what
    assert what.startswith(("re-chained:", "deleted:")) and "checkpoint-" in what, what


def test_an_intact_chain_passes_its_checkpoints(
    approved: World, seal_keys: Identity, tmp_path: Path
) -> None:
    folder = tmp_path / "checkpoints"
    out = approved.cli("audit", "checkpoint", "--out", str(folder), "--key", str(seal_keys.p12),
                       "--key-password-stdin", input=PASSPHRASE.decode() + "\n")  # fmt: skip
    assert out.code == 0, out.stderr
    approved.ok(
        approved.as_user("sysadm", "user", "lockout", "--max-failures", "4", "--reason", "t")
    )
    verified = approved.cli("audit", "verify", "--checkpoints", str(folder), "--json")
    assert verified.code == 0, verified.stdout
    body = verified.json()["checked"]
    assert body["checkpoints"] == 1 and body["events_without_checkpoint"] >= 1


def test_an_edited_checkpoint_file_is_named(
    approved: World, seal_keys: Identity, tmp_path: Path
) -> None:
    folder = tmp_path / "checkpoints"
    with approved.engine().connect() as conn, Session(bind=conn) as session:
        path = make(session, "test", folder, key_file=seal_keys.p12, cert_file=None,
                    passphrase=PASSPHRASE)  # fmt: skip
    path.write_text(path.read_text().replace('"seq": ', '"seq": 1'))
    out = approved.cli("audit", "verify", "--checkpoints", str(folder))
    assert out.code == 1 and "signature invalid" in out.stdout


def test_removed_triggers_are_named(approved: World) -> None:
    with approved.engine().connect() as conn:
        outer = conn.begin()
        name = sorted(audit.TRIGGERS[conn.dialect.name])[0]
        if conn.dialect.name == "postgresql":
            conn.execute(text(f"DROP TRIGGER {name} ON audit_event"))
        else:
            conn.execute(text(f"DROP TRIGGER {name}"))
        problems = _problems(conn)
        outer.rollback()
    assert [p.what.split(":")[0] for p in problems] == ["triggers removed"]
    assert name in problems[0].what


def test_a_different_key_is_a_key_mismatch_not_a_tamper(approved: World) -> None:
    with approved.engine().connect() as conn:
        problems = _problems(conn, key=GUESSED_KEY)
    assert len(problems) == 1 and problems[0].what.startswith("key mismatch:")
    assert REAL_KEY.key_id in problems[0].what and TEST_SITE_KEY not in problems[0].what


# --- random direct SQL ------------------------------------------------------------------------


def _random_change(conn: Connection, rng: random.Random) -> str | None:
    """One random change; returns what was done, or None when the database refused it."""
    from sqlalchemy.exc import DataError, IntegrityError

    kind = rng.choice(
        ["column", "column", "column", "delete", "insert", "event", "reorder", "head"]
    )
    try:
        with conn.begin_nested():
            if kind in ("column", "delete", "insert"):
                entity = rng.choice(
                    [e for e in RECORDS if conn.execute(_table(e).select().limit(1)).first()]
                )
                table = _table(entity)
                rows = conn.execute(table.select()).all()
                row = rng.choice(rows)._mapping
                pk = next(iter(table.primary_key.columns))
                if kind == "column":
                    column = rng.choice([c for c in table.columns if not c.primary_key])
                    forged = {column.name: _other(row[column.name], column)}
                    conn.execute(table.update().where(pk == row[pk.name]).values(forged))
                    return f"{entity}.{column.name} of row {row[pk.name]} changed"
                if kind == "delete":
                    conn.execute(table.delete().where(pk == row[pk.name]))
                    return f"{entity} row {row[pk.name]} deleted"
                copy = dict(row)
                if pk.type.python_type is int:
                    copy[pk.name] = max(r._mapping[pk.name] for r in rows) + 1000
                else:
                    copy[pk.name] = f"{copy[pk.name]}-copy"
                conn.execute(table.insert(), copy)
                return f"a copy of {entity} row {row[pk.name]} inserted"
            last = conn.execute(text("SELECT max(seq) FROM audit_event")).scalar_one()
            with audit._triggers_lifted(conn):
                if kind == "event":
                    seq = rng.randint(1, last)
                    column = rng.choice(
                        ["actor", "action", "entity_id", "new_value", "reason", "at", "record_hash"]
                    )
                    ev = conn.execute(
                        text(f"SELECT {column} FROM audit_event WHERE seq = :s"), {"s": seq}
                    ).scalar()
                    conn.execute(text(f"UPDATE audit_event SET {column} = :v WHERE seq = :s"),
                                 {"v": _other(ev, AuditEvent.__table__.c[column]), "s": seq})  # type: ignore[attr-defined]  # fmt: skip
                    return f"audit event {seq} {column} changed"
                if kind == "reorder":
                    a = rng.randint(1, last - 1)
                    conn.execute(text("UPDATE audit_event SET seq = -1 WHERE seq = :a"), {"a": a})
                    conn.execute(
                        text("UPDATE audit_event SET seq = :a WHERE seq = :b"), {"a": a, "b": a + 1}
                    )
                    conn.execute(
                        text("UPDATE audit_event SET seq = :b WHERE seq = -1"), {"b": a + 1}
                    )
                    return f"audit events {a} and {a + 1} swapped"
            column = rng.choice(["seq", "hash", "mac", "key_id"])
            value = conn.execute(text(f"SELECT {column} FROM audit_head")).scalar()
            new = value - 1 if column == "seq" else _other(value, AuditEvent.__table__.c["hash"])  # type: ignore[attr-defined]
            conn.execute(text(f"UPDATE audit_head SET {column} = :v"), {"v": new})
            return f"audit_head.{column} changed"
    except (IntegrityError, DataError):
        return None


def test_random_direct_sql_changes_are_each_found_and_named(approved: World) -> None:
    rng = random.Random(20261203)
    done: list[str] = []
    refused = 0
    with approved.engine().connect() as conn:
        while len(done) < TRIALS:
            outer = conn.begin()
            what = _random_change(conn, rng)
            if what is None:
                refused += 1
                outer.rollback()
                continue
            problems = _problems(conn)
            outer.rollback()
            assert problems, f"unnoticed: {what}"
            assert _named(problems), (what, [str(p) for p in problems])
            done.append(what)
        assert _problems(conn) == []  # every change was rolled back
    assert len(done) >= 100 and refused < TRIALS, (len(done), refused)
    kinds = {k: sum(k in d for d in done) for k in KINDS}
    print(f"{len(done)} changes, {refused} refused by the database: {kinds}")
    assert all(kinds.values()), kinds  # every kind of change was tried and found
