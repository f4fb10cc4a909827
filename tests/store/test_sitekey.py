"""The site key: created by init outside the database, checked on every write and by verify,
rotated as an audited event, and applied to a database made before keying."""

from __future__ import annotations

import json
import os
import stat
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import text

from ledger.errors import InputError
from ledger.store import audit, sitekey
from ledger.store.engine import transaction
from ledger.store.tables import AuditHead
from tests.conftest import TEST_SITE_KEY
from tests.world import PASSWORDS, World, build

OTHER_KEY = "a7" * 32


@pytest.fixture
def own_key(monkeypatch: pytest.MonkeyPatch) -> None:
    """Use the default key file beside the database, as a new site would."""
    monkeypatch.delenv(sitekey.ENV_KEY, raising=False)
    monkeypatch.delenv(sitekey.ENV_KEY_FILE, raising=False)


@pytest.fixture
def keyed(own_key: None, tmp_path: Path) -> Iterator[World]:
    yield build(f"sqlite:///{tmp_path}/site.db")


def _problems(w: World, key: object = audit.SITE) -> list[str]:
    with transaction(w.engine()) as s:
        return [str(p) for p in audit.verify(s, key=key).problems]  # type: ignore[arg-type]


def test_init_creates_a_private_key_file_that_never_enters_the_database(
    keyed: World, tmp_path: Path
) -> None:
    key_file = tmp_path / "site.db.key"
    mode = stat.S_IMODE(key_file.stat().st_mode)
    assert mode == 0o600
    digits = key_file.read_text().strip()
    assert len(bytes.fromhex(digits)) == 32
    assert digits.encode() not in (tmp_path / "site.db").read_bytes()
    with transaction(keyed.engine()) as s:
        head = s.get(AuditHead, 1)
        assert head is not None and head.key_id == sitekey.load(keyed.url).key_id  # type: ignore[union-attr]
    assert _problems(keyed) == []


def test_init_says_where_the_key_is_but_not_the_key(own_key: None, tmp_path: Path) -> None:
    w = World(f"sqlite:///{tmp_path}/new.db")
    out = w.cli("init", "--admin", "sysadm", "--name", "Ida Brandt", "--password-stdin",
                input=PASSWORDS["sysadm"] + "\n")  # fmt: skip
    assert out.code == 0, out.stderr
    digits = (tmp_path / "new.db.key").read_text().strip()
    assert "new.db.key" in out.stdout and "created" in out.stdout
    assert digits not in out.stdout and digits not in out.stderr


def test_a_key_file_is_never_overwritten(own_key: None, tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path}/x.db"
    first = sitekey.create(url)
    with pytest.raises(InputError, match="never overwritten"):
        sitekey.create(url)
    assert sitekey.load(url) == first


def test_a_malformed_key_is_named_without_its_value(
    world: World, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv(sitekey.ENV_KEY, "not-a-key-at-all")
    out = world.as_user("op.kim", "module", "add", "QMB-0777", "--type", "HF-750")
    assert out.code == 2 and "$FLUXLEDGER_KEY does not hold a site key" in out.stderr
    assert "not-a-key-at-all" not in out.stderr and "Traceback" not in out.stderr


def test_writing_with_another_key_is_refused_and_verify_says_key_mismatch(
    world: World, monkeypatch: pytest.MonkeyPatch
) -> None:
    before = world.snapshot()
    monkeypatch.setenv(sitekey.ENV_KEY, OTHER_KEY)
    out = world.as_user("op.kim", "module", "add", "QMB-0777", "--type", "HF-750")
    assert out.code == 3 and "is not the key this database's audit chain is under" in out.stderr
    assert world.snapshot() == before
    verified = world.cli("audit", "verify", "--json")
    assert verified.code == 1
    (problem,) = verified.json()["problems"]
    assert problem["what"].startswith("key mismatch:") and OTHER_KEY not in verified.stdout


def test_a_missing_key_file_is_said_and_nothing_written(keyed: World, tmp_path: Path) -> None:
    (tmp_path / "site.db.key").rename(tmp_path / "elsewhere.key")
    before = keyed.snapshot()
    out = keyed.as_user("op.kim", "module", "add", "QMB-0777", "--type", "HF-750")
    assert out.code == 2 and "site key of this database is not available" in out.stderr
    assert keyed.snapshot() == before
    assert any("key unavailable" in p for p in _problems(keyed))


def test_rotation_re_keys_the_chain_as_an_audited_event(keyed: World, tmp_path: Path) -> None:
    keyed.ok(keyed.as_user("op.kim", "module", "add", "QMB-0777", "--type", "HF-750"))
    old = sitekey.load(keyed.url)
    assert old is not None
    with transaction(keyed.engine()) as s:
        head = s.get(AuditHead, 1)
        assert head is not None
        old_head = (head.seq, head.hash)
    refused = keyed.as_user("eng.ray", "audit", "rekey", "--reason", "yearly rotation")
    assert refused.code == 3 and "may not rotate the site key" in refused.stderr
    assert sitekey.load(keyed.url) == old and not (tmp_path / "site.db.key.new").exists()
    out = keyed.as_user("sysadm", "audit", "rekey", "--reason", "yearly rotation", "--json")
    assert out.code == 0, out.stderr
    new = sitekey.load(keyed.url)
    assert new is not None and new.key_id != old.key_id
    kept = tmp_path / f"site.db.key.retired-{old.key_id}"
    assert kept.read_text().strip() == old.secret.hex()
    assert _problems(keyed) == []
    assert [p.split(":")[1].strip() for p in _problems(keyed, key=old)] == ["key mismatch"]
    events = keyed.cli("audit", "show", "--entity", "audit_chain", "--json").json()["events"]
    (event,) = events
    assert event["action"] == "rekey" and event["reason"] == "yearly rotation"
    assert json.loads(event["old_value"]) == {"seq": old_head[0], "hash": old_head[1],
                                              "key_id": old.key_id}  # fmt: skip
    keyed.ok(keyed.as_user("op.kim", "module", "add", "QMB-0778", "--type", "HF-750"))
    assert _problems(keyed) == []


def _forget_entered_texts(conn: Any) -> None:
    """Rows as revision 0007 wrote them: no ``entered`` texts (0010 added them), so their
    hashes and creation events are those of rows without one (hash_defaults)."""
    from ledger.store import tables

    with audit._triggers_lifted(conn):
        for cls in (tables.ModuleType, tables.WaterFluxTest, tables.IntegrityTest,
                    tables.CleaningProcedure, tables.Cleaning):  # fmt: skip
            table: Any = cls.__table__  # type: ignore[attr-defined]
            for row in conn.execute(table.select().where(table.c.entered.is_not(None))):
                values = {**row._mapping, "entered": None}
                content = audit._values(table, cls.hash_excluded, values.__getitem__,
                                        cls.hash_defaults)  # fmt: skip
                new = audit._digest(table.name, content)
                conn.execute(table.update().where(table.c.id == row.id)
                             .values(entered=None, record_hash=new))  # fmt: skip
                events = audit._EVENT_TABLE
                conn.execute(events.update().where(events.c.record_hash == row.record_hash)
                             .values(record_hash=new))  # fmt: skip


def _forget_template_versions(conn: Any) -> None:
    """No template versions (0011 added them): the world's registration of the shipped
    templates is the last thing it wrote, so its rows and their final events go."""
    events = audit._EVENT_TABLE
    first = conn.execute(
        text("SELECT min(seq) FROM audit_event WHERE entity = 'template_version'")
    ).scalar_one()
    later = conn.execute(
        text("SELECT count(*) FROM audit_event WHERE seq >= :s AND entity <> 'template_version'"),
        {"s": first},
    ).scalar_one()
    assert later == 0, "template versions are no longer the world's last events"
    with audit._triggers_lifted(conn):
        conn.execute(events.delete().where(events.c.seq >= first))
        conn.execute(text("DELETE FROM template_version"))
        conn.execute(text("UPDATE audit_head SET seq = :s"), {"s": first - 1})


def test_a_database_from_before_keying_is_keyed_by_init(world: World) -> None:
    """Turn a world back into what revision 0007 wrote (plain SHA-256 chain, no key columns),
    then `init`: the chain is verified, re-linked under the key and the old head recorded."""
    from alembic import command

    from ledger.store import schema

    engine = world.engine()
    with engine.begin() as conn:
        _forget_entered_texts(conn)
        _forget_template_versions(conn)
        table = audit._EVENT_TABLE
        rows = [dict(r._mapping) for r in conn.execute(table.select().order_by(table.c.seq))]
        prev = audit.GENESIS
        with audit._triggers_lifted(conn):
            for ev in rows:
                ev["prev_hash"] = prev
                ev["hash"] = prev = audit._event_digest(ev.__getitem__, None)
                conn.execute(
                    text("UPDATE audit_event SET prev_hash = :p, hash = :h WHERE seq = :s"),
                    {"p": ev["prev_hash"], "h": ev["hash"], "s": ev["seq"]},
                )
        conn.execute(
            text("UPDATE audit_head SET hash = :h, key_id = NULL, mac = NULL"), {"h": prev}
        )
        command.downgrade(schema.alembic_config(engine, conn), "0007")
    assert schema.stored_revision(engine) == "0007"
    old_head = (len(rows), prev)
    out = world.cli("init")
    assert out.code == 0, out.stderr
    assert "audit chain keyed" in out.stdout
    assert _problems(world) == []
    (event,) = world.cli("audit", "show", "--entity", "audit_chain", "--json").json()["events"]
    assert json.loads(event["old_value"]) == {
        "seq": old_head[0],
        "hash": old_head[1],
        "key_id": None,
    }
    assert event["actor"] == "fluxledger"


def test_a_chain_that_does_not_verify_is_not_keyed(world: World) -> None:
    """Keying must not launder an earlier tamper."""
    from alembic import command

    from ledger.store import schema

    engine = world.engine()
    with engine.begin() as conn:
        conn.execute(text("UPDATE audit_head SET key_id = NULL, mac = NULL"))
        conn.execute(text("UPDATE module_type SET supplier = 'forged'"))
        command.downgrade(schema.alembic_config(engine, conn), "0007")
    out = world.cli("init")
    assert out.code == 3 and "does not verify, so it is not re-keyed" in out.stderr


def test_the_key_comes_from_the_environment_first(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    url = f"sqlite:///{tmp_path}/y.db"
    monkeypatch.setenv(sitekey.ENV_KEY, TEST_SITE_KEY)
    monkeypatch.setenv(sitekey.ENV_KEY_FILE, str(tmp_path / "unused.key"))
    key = sitekey.load(url)
    assert key is not None and key.secret == bytes.fromhex(TEST_SITE_KEY)
    assert key.source == "$FLUXLEDGER_KEY" and TEST_SITE_KEY not in repr(key)
    monkeypatch.delenv(sitekey.ENV_KEY)
    assert sitekey.key_file_path(url) == tmp_path / "unused.key"
    assert not os.path.exists(tmp_path / "unused.key") and sitekey.load(url) is None
