"""The JSON export loaded into an empty database gives back every row, field by field, and a
chain that verifies (with the import recorded); an altered export loads but fails verify.

The comparison does not use the export code: each table is read from both databases with a
plain SQLAlchemy select ordered by primary key, and the audit check is ledger.store.audit's
own verify (the one `fluxledger audit verify` runs).
"""

from __future__ import annotations

import json
import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import Engine, create_engine, select
from sqlmodel import Session

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import find_user
from ledger.logbook.exports import export_logbook, load_export
from ledger.logbook.history import verify_audit
from ledger.store.engine import connect, resolve_url, transaction
from ledger.store.export import tables
from tests.records import flow
from tests.world import PASSWORDS, World, Worlds

ADMIN = "sysadm"
CHAIN = {"audit_event", "audit_head"}


def _populated(w: World) -> None:
    """After the approved run: post-use test, cleaning and post-clean test (the cleanings)."""
    w.ok(w.water("QMB-0142", "post-use", "90 mL/min"))
    w.ok(w.clean("QMB-0142"))
    w.ok(w.water("QMB-0142", "post-clean", "165 mL/min"))


@pytest.fixture
def source(backend: str, worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """A copy of the approved-run world (built once per worker), then cleaned."""
    with worlds.copy(backend, tmp_path, flow.approved) as w:
        _populated(w)
        yield w


def _rows(engine: Engine) -> dict[str, list[tuple[Any, ...]]]:
    out: dict[str, list[tuple[Any, ...]]] = {}
    with engine.connect() as conn:
        for table in tables():
            query = select(*table.columns).order_by(*table.primary_key.columns)
            out[table.name] = [tuple(r) for r in conn.execute(query)]
    return out


def _export(w: World, path: Path) -> None:
    engine = w.engine()
    with transaction(engine) as session:
        actor = find_user(session, ADMIN)
        assert actor is not None
        export_logbook(session, actor, "json", path)
    engine.dispose()


def _verify(url: str) -> Any:
    engine = connect(resolve_url(url))
    with Session(engine) as s:
        result = verify_audit(s)
    engine.dispose()
    return result


def _load(url: str, path: Path, who: str = ADMIN) -> Any:
    return load_export(url, path, who, lambda: PASSWORDS[who])


def _assert_same(src: dict[str, list[tuple[Any, ...]]], copy: dict[str, list[tuple[Any, ...]]],
                 event_seq: int) -> None:  # fmt: skip
    assert src.keys() == copy.keys()
    for name, rows in src.items():
        if name in CHAIN:
            continue
        assert len(copy[name]) == len(rows), name
        for a, b in zip(rows, copy[name], strict=True):
            assert a == b, (name, a, b)  # field by field: tuples in column order
            for x, y in zip(a, b, strict=True):
                assert type(x) is type(y), (name, x, y)
    events = src["audit_event"]
    assert copy["audit_event"][: len(events)] == events
    (extra,) = copy["audit_event"][len(events) :]
    assert extra[0] == event_seq == len(events) + 1
    assert (src["audit_head"][0][1], copy["audit_head"][0][1]) == (len(events), event_seq)


def _round_trip(w: World, target_url: str, tmp_path: Path) -> None:
    source_engine = w.engine()
    src = _rows(source_engine)
    source_engine.dispose()
    for name in ("module", "water_flux_test", "integrity_test", "cleaning", "run", "signature",
                 "user_account", "audit_event"):  # fmt: skip
        assert src[name], f"the source world has no {name} rows to compare"
    path = tmp_path / "logbook.json"
    _export(w, path)
    assert (os.stat(path).st_mode & 0o777) == 0o600
    done = _load(target_url, path)
    target = connect(resolve_url(target_url))
    copy = _rows(target)
    target.dispose()
    _assert_same(src, copy, done.event_seq)
    result = _verify(target_url)
    assert result.ok, result.problems
    assert result.events == done.event_seq
    event = copy["audit_event"][-1]
    columns = [c.name for c in next(t for t in tables() if t.name == "audit_event").columns]
    shown = dict(zip(columns, event, strict=True))
    assert (shown["action"], shown["actor"], shown["entity"]) == ("import", ADMIN, "logbook")
    assert json.loads(shown["new_value"])["sha256"] == done.sha256


@pytest.mark.sqlite_only
def test_json_round_trip_reproduces_every_row_and_verifies(source: World, tmp_path: Path) -> None:
    _round_trip(source, f"sqlite:///{tmp_path}/copy.db", tmp_path)


@pytest.mark.slow
@pytest.mark.postgres
def test_json_round_trip_on_postgresql(worlds: Worlds, tmp_path: Path) -> None:
    """Exported from PostgreSQL and loaded into a new PostgreSQL database (ids, sequences,
    timestamps with time zone, floats as double precision)."""
    if not os.environ.get("FLUXLEDGER_TEST_POSTGRES_URL"):
        pytest.skip("FLUXLEDGER_TEST_POSTGRES_URL is not set: the PostgreSQL tests run in CI")
    with worlds.copy("postgresql", tmp_path, flow.approved) as w:
        _populated(w)
        pg = worlds._postgres()
        name = pg.new_name()
        pg.create(name)
        try:
            url = pg.url(name)
            _round_trip(w, url, tmp_path)
            # The sequences moved past the loaded ids: the copy takes new records.
            copy = World(url)
            copy.ok(copy.water("QMB-0142", "pre-use", "168 mL/min"))
            assert _verify(url).ok
        finally:
            from sqlalchemy.pool import NullPool

            create_engine(resolve_url(url), poolclass=NullPool).dispose()
            pg.settle(name)
            pg.drop(name)


@pytest.mark.sqlite_only
def test_an_altered_value_loads_but_fails_verify(source: World, tmp_path: Path) -> None:
    path = tmp_path / "logbook.json"
    _export(source, path)
    document = json.loads(path.read_text("utf-8"))
    table = next(t for t in document["tables"] if t["name"] == "water_flux_test")
    column = [c["name"] for c in table["columns"]].index("nwp_m_s_pa")
    table["rows"][0][column] *= 1.01
    altered = tmp_path / "altered.json"
    altered.write_text(json.dumps(document), "utf-8")
    url = f"sqlite:///{tmp_path}/altered.db"
    _load(url, altered)
    result = _verify(url)
    assert not result.ok
    assert [p.entity for p in result.problems] == ["water_flux_test"]
    # The same file unaltered verifies (the check fails because of the change alone).
    assert _verify_loaded(path, tmp_path / "plain.db").ok


def _verify_loaded(path: Path, db: Path) -> Any:
    _load(f"sqlite:///{db}", path)
    return _verify(f"sqlite:///{db}")


@pytest.mark.sqlite_only
def test_load_refuses_a_database_with_rows(source: World, tmp_path: Path) -> None:
    path = tmp_path / "logbook.json"
    _export(source, path)
    before = source.snapshot()
    with pytest.raises(InputError) as err:
        _load(source.url, path)
    assert err.value.field == "db" and "not empty" in str(err.value)
    assert source.snapshot() == before


@pytest.mark.sqlite_only
def test_load_refuses_a_wrong_password_and_writes_nothing(source: World, tmp_path: Path) -> None:
    path = tmp_path / "logbook.json"
    _export(source, path)
    url = f"sqlite:///{tmp_path}/copy.db"
    with pytest.raises(RefusedError) as err:
        load_export(url, path, ADMIN, lambda: "not-the-password")
    assert err.value.field == "user"
    with pytest.raises(RefusedError):  # an operator may not load the full copy
        _load(url, path, "op.kim")
    assert not (tmp_path / "copy.db").exists()  # the file the refused load made is gone
    empty = tmp_path / "empty.db"
    World(f"sqlite:///{empty}").cli("init")  # a schema, no users: refused for want of --admin
    assert empty.exists()
    with pytest.raises(RefusedError):
        load_export(f"sqlite:///{empty}", path, ADMIN, lambda: "not-the-password")
    assert empty.exists()  # a file that was there stays, and is still empty
    assert _load(f"sqlite:///{empty}", path).event_seq > 1


@pytest.mark.sqlite_only
def test_load_refuses_another_site_key(
    source: World, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "logbook.json"
    _export(source, path)
    monkeypatch.setenv("FLUXLEDGER_KEY", "a7" * 32)
    with pytest.raises(InputError) as err:
        _load(f"sqlite:///{tmp_path}/copy.db", path)
    assert err.value.field == "key" and "key ID" in str(err.value)
    assert not (tmp_path / "copy.db").exists()


@pytest.mark.sqlite_only
def test_json_export_needs_an_administrator(source: World, tmp_path: Path) -> None:
    engine = source.engine()
    path = tmp_path / "logbook.json"
    with transaction(engine) as session:
        actor = find_user(session, "qa.lin")
        assert actor is not None
        with pytest.raises(RefusedError):
            export_logbook(session, actor, "json", path)
        export_logbook(session, actor, "csv", tmp_path / "tables")  # a reader's export
    engine.dispose()
    assert not path.exists()
    assert (tmp_path / "tables" / "module.csv").is_file()
