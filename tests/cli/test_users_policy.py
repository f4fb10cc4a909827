"""`fluxledger user ...` under the account policy: weak passwords refused with exit 2 and
nothing written, the role command, and init pointing to recovery."""

from __future__ import annotations

import pytest

from tests.world import World


def _add(world: World, password: str) -> object:
    return world.as_user(
        "sysadm", "user", "add", "op.ana", "--name", "Ana Duarte", "--role", "operator",
        extra=[password],
    )  # fmt: skip


@pytest.mark.parametrize(
    ("password", "message"),
    [
        ("PassWord123", "common passwords"),
        ("  QWERTYUIOP  ", "common passwords"),
        ("          ", "only whitespace"),
        ("  short-pw ", "at least 10 characters"),
    ],
)
@pytest.mark.sqlite_only
def test_weak_password_on_add_is_refused_and_nothing_written(
    world: World, password: str, message: str
) -> None:
    before = world.snapshot()
    out = _add(world, password)
    assert out.code == 2 and message in out.stderr  # type: ignore[attr-defined]
    assert "Traceback" not in out.stderr  # type: ignore[attr-defined]
    assert world.snapshot() == before


@pytest.mark.sqlite_only
def test_own_password_change_follows_the_policy(world: World) -> None:
    weak = world.as_user("op.kim", "user", "passwd", "op.kim", extra=["1234567890"])
    assert weak.code == 2 and "common passwords" in weak.stderr
    world.ok(world.as_user("op.kim", "user", "passwd", "op.kim", extra=["op-kim-new-pass-4"]))


@pytest.mark.sqlite_only
def test_role_change_by_the_administrator(world: World) -> None:
    world.ok(world.as_user("sysadm", "user", "role", "op.kim", "--role", "qa", "--reason", "moved"))
    roles = {u["login"]: u["role"] for u in world.cli("user", "list", "--json").json()["users"]}
    assert roles["op.kim"] == "qa"
    same = world.as_user("sysadm", "user", "role", "op.kim", "--role", "qa", "--reason", "x")
    assert same.code == 3 and "already has the role qa" in same.stderr
    unknown = world.as_user("sysadm", "user", "role", "op.kim", "--role", "boss", "--reason", "x")
    assert unknown.code == 2 and "role 'boss' is unknown" in unknown.stderr


@pytest.mark.sqlite_only
def test_init_on_a_database_with_a_usable_administrator_says_admin_was_not_used(
    world: World,
) -> None:
    again = world.cli("init", "--admin", "other.adm", "--json", input="other-admin-pass\n")
    world.ok(again)
    assert "--admin was not used" in again.stdout
