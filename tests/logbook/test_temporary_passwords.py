"""Temporary passwords, at the service layer: a password set by someone other than its owner
is marked temporary through the Journal (so the audit trail shows it), `workspace.write`
refuses its user until they choose their own, and only the owner's own change clears it."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

from ledger.errors import RefusedError
from ledger.logbook import workspace
from ledger.logbook.auth import find_user
from ledger.logbook.users import add_user, set_password
from ledger.store.engine import transaction
from ledger.store.tables import AuditEvent, UserAccount
from tests.world import PASSWORDS, ROLES, World

pytestmark = pytest.mark.sqlite_only

TEMPORARY = "handed-over-pass-3"
OWN = "chosen-by-kim-pass-5"


def _user(world: World, login: str) -> UserAccount:
    with transaction(world.engine()) as s:
        user = find_user(s, login)
        assert user is not None
        s.expunge(user)
        return user


def _events(world: World, login: str) -> list[AuditEvent]:
    from sqlmodel import select

    uid = str(_user(world, login).id)
    with transaction(world.engine()) as s:
        rows = s.exec(
            select(AuditEvent)
            .where(AuditEvent.entity == "user", AuditEvent.entity_id == uid)
            .order_by(AuditEvent.seq)  # type: ignore[arg-type]
        ).all()
        for r in rows:
            s.expunge(r)
        return list(rows)


def _as_admin(world: World, work: Callable[[Any, UserAccount], Any]) -> Any:
    return workspace.write(world.url, "sysadm", lambda: PASSWORDS["sysadm"], work)


def _reset_kim(world: World) -> None:
    _as_admin(world, lambda s, a: set_password(s, a, "op.kim", TEMPORARY))


def test_the_world_users_chose_their_own_passwords(world: World) -> None:
    # init --admin: the administrator typed their own; the others changed theirs once.
    for login in ("sysadm", *ROLES):
        assert _user(world, login).password_temporary is False, login


def test_a_user_added_by_an_administrator_has_a_temporary_password(world: World) -> None:
    _as_admin(world, lambda s, a: add_user(s, a, "op.ana", "Ana Duarte", "operator", TEMPORARY))
    assert _user(world, "op.ana").password_temporary is True
    (created,) = [e for e in _events(world, "op.ana") if e.action == "create"]
    assert created.actor == "sysadm"
    assert json.loads(str(created.new_value))["password_temporary"] is True
    assert "temporary until op.ana changes it" in str(created.reason)


def test_an_administrators_reset_sets_the_flag_through_the_journal(world: World) -> None:
    _reset_kim(world)
    assert _user(world, "op.kim").password_temporary is True
    flagged = [e for e in _events(world, "op.kim") if e.field == "password_temporary"]
    # The world's op.kim: set on `user add`, cleared by their own change, set by this reset.
    assert [json.loads(str(e.new_value)) for e in flagged] == [False, True]
    event = flagged[-1]
    assert event.actor == "sysadm" and event.action == "change"
    assert (json.loads(str(event.old_value)), json.loads(str(event.new_value))) == (False, True)
    assert "password reset" in str(event.reason)


def test_a_temporary_password_refuses_every_write_and_writes_nothing(world: World) -> None:
    _reset_kim(world)
    before = world.snapshot()
    called: list[str] = []
    with pytest.raises(RefusedError) as refused:
        workspace.write(world.url, "op.kim", lambda: TEMPORARY, lambda s, a: called.append("x"))
    assert refused.value.exit_code == 3 and refused.value.field == "user"
    assert "`fluxledger user passwd op.kim --user op.kim`" in str(refused.value)
    assert called == []  # the work never ran
    assert world.snapshot() == before


def test_the_owner_changes_it_with_the_temporary_one_and_may_write_again(world: World) -> None:
    _reset_kim(world)
    changed = workspace.change_own_password(world.url, "op.kim", lambda: TEMPORARY, lambda: OWN)
    assert changed.login == "op.kim"
    assert _user(world, "op.kim").password_temporary is False
    cleared = [e for e in _events(world, "op.kim") if e.field == "password_temporary"][-1]
    assert cleared.actor == "op.kim" and cleared.reason == "password changed by its owner"
    assert (json.loads(str(cleared.old_value)), json.loads(str(cleared.new_value))) == (True, False)
    assert workspace.write(world.url, "op.kim", lambda: OWN, lambda s, a: a.login) == "op.kim"
    with pytest.raises(RefusedError, match="wrong password"):
        workspace.write(world.url, "op.kim", lambda: TEMPORARY, lambda s, a: None)


def test_reads_stay_allowed_with_a_temporary_password(world: World) -> None:
    _reset_kim(world)
    names = workspace.read(
        world.url, lambda s: [u.login for u in s.exec(_all())], "op.kim", lambda: TEMPORARY
    )
    assert "op.kim" in names


def _all() -> Any:
    from sqlmodel import select

    return select(UserAccount)


def test_an_administrator_with_a_reset_password_is_refused_too(world: World) -> None:
    _as_admin(world, lambda s, a: add_user(s, a, "adm.two", "Tove Lund", "admin", TEMPORARY))
    with pytest.raises(RefusedError, match="temporary"):
        workspace.write(
            world.url,
            "adm.two",
            lambda: TEMPORARY,
            lambda s, a: set_password(s, a, "op.kim", "adm-two-chose-this-1"),
        )
    assert _user(world, "op.kim").password_temporary is False  # nothing reset


def test_break_glass_sets_a_password_that_is_not_temporary(world: World) -> None:
    from ledger.logbook.recovery import code_file, recover_admin, write_code

    # A second administrator resets sysadm's password: temporary...
    _as_admin(world, lambda s, a: add_user(s, a, "adm.two", "Tove Lund", "admin", TEMPORARY))
    workspace.change_own_password(world.url, "adm.two", lambda: TEMPORARY, lambda: OWN)
    workspace.write(
        world.url, "adm.two", lambda: OWN, lambda s, a: set_password(s, a, "sysadm", TEMPORARY)
    )
    assert _user(world, "sysadm").password_temporary is True
    # ...then the person with host access restores sysadm with a password they chose.
    engine = world.engine()
    path: Path = write_code(engine)
    assert path == code_file(engine)
    recover_admin(engine, "sysadm", path.read_text().strip(), "host-chosen-pass-9")
    assert _user(world, "sysadm").password_temporary is False
    last = _events(world, "sysadm")[-1]
    assert last.action == "break_glass" and last.field == "password_temporary"
    assert json.loads(str(last.new_value)) is False
    assert workspace.write(world.url, "sysadm", lambda: "host-chosen-pass-9", lambda s, a: 1) == 1
