"""Four writers add the same user ID (or module serial, in different case) at the same moment:
one succeeds, the other three are told it exists, on SQLite and on PostgreSQL. And a writer
whose lookup missed the row is answered the same by the unique constraint, not with a
traceback."""

from __future__ import annotations

import contextlib
import threading
from collections.abc import Callable
from typing import Any

import pytest
from sqlmodel import Session, func, select

from ledger.errors import InputError
from ledger.logbook import modules, required, users
from ledger.logbook.modules import TypeSpec
from ledger.rules import names
from ledger.store.engine import connect, resolve_url, transaction
from ledger.store.schema import upgrade
from ledger.store.tables import Module, UserAccount

WRITERS = 4


def _logbook(db_url: str) -> tuple[Any, UserAccount]:
    engine = connect(resolve_url(db_url), create=True)
    upgrade(engine)
    with transaction(engine) as s:
        admin = users.create_first_admin(s, "sysadm", "Ida Brandt", "admin-pass-1")
    return engine, admin


def _lock_free_lookup(session: Session, column: Any, value: str) -> str | None:
    """The case-folded lookup without the write lock, as a writer that skipped it would."""
    query = select(column).where(func.lower(column) == value.lower())
    return next((v for v in session.exec(query) if names.fold(v) == names.fold(value)), None)


def _race(
    engine: Any,
    monkeypatch: pytest.MonkeyPatch,
    work: Callable[[Session], object],
    *,
    locked: bool = True,
) -> list[str]:
    """Run ``work`` in WRITERS threads at once; each returns "created" or its error.

    After its lookup each writer waits (up to 1.5 s) until all four have looked. Where nothing
    serializes the lookups (``locked=False`` on PostgreSQL) all four find the identifier free
    and insert it, so the unique constraint decides; where the lookup holds the write lock
    (and always on SQLite, BEGIN IMMEDIATE) the wait times out and the writers queue.
    """
    barrier = threading.Barrier(WRITERS)
    lookup = required.existing if locked else _lock_free_lookup

    def look_then_wait(session: Session, column: Any, value: str) -> str | None:
        found = lookup(session, column, value)
        with contextlib.suppress(threading.BrokenBarrierError):
            barrier.wait(timeout=1.5)
        return found

    monkeypatch.setattr(required, "existing", look_then_wait)
    outcomes: list[str] = []

    def writer() -> None:
        try:
            with transaction(engine) as s:
                work(s)
            outcomes.append("created")
        except InputError as err:
            outcomes.append(f"InputError: {err}")
        except Exception as exc:  # recorded, so the assertion shows what escaped
            outcomes.append(f"{type(exc).__name__}: {exc}")

    threads = [threading.Thread(target=writer) for _ in range(WRITERS)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    assert not any(t.is_alive() for t in threads)
    return outcomes


@pytest.mark.parametrize("locked", [True, False], ids=["locked-lookup", "constraint-decides"])
def test_four_simultaneous_user_adds_of_one_login(
    db_url: str, monkeypatch: pytest.MonkeyPatch, locked: bool
) -> None:
    engine, admin = _logbook(db_url)

    def add(s: Session) -> object:
        return users.add_user(s, admin, "op.same", "Sam Example", "operator", "operator-pass-1")

    outcomes = _race(engine, monkeypatch, add, locked=locked)
    refusal = ("InputError: user ID 'op.same' exists (or existed): IDs are never reused; "
               "expected a new user ID")  # fmt: skip
    assert sorted(outcomes) == [refusal] * (WRITERS - 1) + ["created"], outcomes
    with Session(engine) as s:
        count = s.exec(select(func.count()).where(UserAccount.login == "op.same")).one()
    assert count == 1
    engine.dispose()


def test_four_simultaneous_module_adds_of_one_serial_in_different_case(
    db_url: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The unique constraint is case-sensitive; the locked lookup keeps "qmb-0142" out."""
    engine, admin = _logbook(db_url)
    with transaction(engine) as s:
        eng = users.add_user(s, admin, "eng.ray", "Ray Okafor", "engineer", "engineer-pass-1")
        op = users.add_user(s, admin, "op.kim", "Kim Varga", "operator", "operator-pass-1")
        spec = TypeSpec(code="HF-750", membrane="mPES", pore_rating="750 kDa",
                        lumen_diameter_m=5e-4, fiber_count=120, effective_length_m=0.3,
                        area_m2=0.0565, decay_limit_pa_s=5.7, integrity_test_pressure_pa=103e3,
                        reuse_limit_cycles=3, storage_limit_s=30 * 86400)  # fmt: skip
        modules.add_type(s, eng, spec)
    # Upper and lower case: the same serial to the logbook.
    serials = iter(["QMB-0142", "qmb-0142", "QMB-0142", "Qmb-0142"])
    lock = threading.Lock()

    def add(s: Session) -> object:
        with lock:
            serial = next(serials)
        return modules.add_module(s, op, serial, "HF-750")

    outcomes = _race(engine, monkeypatch, add)
    assert outcomes.count("created") == 1, outcomes
    assert all(o.startswith("InputError: module ") and "is already registered" in o
               for o in outcomes if o != "created"), outcomes  # fmt: skip
    with Session(engine) as s:
        count = s.exec(select(func.count()).select_from(Module)).one()
    assert count == 1
    engine.dispose()


@pytest.mark.parametrize("service", ["user", "module type"])
def test_the_unique_constraint_answers_when_the_lookup_missed(
    db_url: str, monkeypatch: pytest.MonkeyPatch, service: str
) -> None:
    """The second insert of one ID breaks the database's unique constraint; the service turns
    the IntegrityError into the same InputError its lookup gives."""
    engine, admin = _logbook(db_url)
    with transaction(engine) as s:
        eng = users.add_user(s, admin, "eng.ray", "Ray Okafor", "engineer", "engineer-pass-1")
    spec = TypeSpec(code="HF-750", membrane="mPES", pore_rating="750 kDa",
                    lumen_diameter_m=5e-4, fiber_count=120, effective_length_m=0.3,
                    area_m2=0.0565, decay_limit_pa_s=5.7, integrity_test_pressure_pa=103e3,
                    reuse_limit_cycles=3, storage_limit_s=30 * 86400)  # fmt: skip

    def add(s: Session) -> object:
        if service == "user":
            return users.add_user(s, admin, "op.kim", "Kim Varga", "operator", "op-pass-123")
        return modules.add_type(s, eng, spec)

    with transaction(engine) as s:
        add(s)
    monkeypatch.setattr(required, "existing", lambda *_: None)
    with pytest.raises(InputError) as caught, transaction(engine) as s:
        add(s)
    assert caught.value.field in ("login", "code")
    assert "exists" in str(caught.value)
    engine.dispose()
