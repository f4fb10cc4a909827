"""Users: argon2 hashes, roles, lockout after repeated failures (audited), IDs never reused,
the first administrator made by init, who signs no production record."""

from __future__ import annotations

import json

import pytest

from ledger.logbook import auth
from ledger.store.schema import REVISION
from tests.world import PASSWORDS, World


@pytest.mark.real_argon2
def test_passwords_are_salted_argon2id_with_production_cost() -> None:
    first, second = auth.hash_password("operator-pass-1"), auth.hash_password("operator-pass-1")
    assert first.startswith("$argon2id$") and second.startswith("$argon2id$")
    assert first != second  # a fresh salt each time
    # argon2-cffi's default profile is RFC 9106's low-memory one: 64 MiB, 3 passes, 4 lanes.
    assert "$m=65536,t=3,p=4$" in first
    assert auth._matches(first, "operator-pass-1")
    assert not auth._matches(first, "operator-pass-2")


@pytest.mark.sqlite_only
def test_init_makes_the_first_user_an_administrator(world: World) -> None:
    users = world.cli("user", "list", "--json").json()["users"]
    assert users[0]["login"] == "sysadm" and users[0]["role"] == "admin"
    assert [u["login"] for u in users] == ["sysadm", "eng.ray", "qa.lin", "op.kim"]


def test_init_on_a_new_database_needs_an_administrator(tmp_path: object) -> None:
    w = World(f"sqlite:///{tmp_path}/new.db")
    out = w.cli("init")
    assert out.code == 2 and "--admin" in out.stderr
    again = w.cli("init", "--admin", "sysadm", "--password-stdin", input="admin-pass-1\n")
    assert again.code == 0 and "sysadm" in again.stdout
    # A second init is an upgrade check and creates nobody.
    third = w.cli("init", "--json")
    assert third.code == 0
    assert third.json()["database"]["revision_before"] == REVISION
    assert "administrator" not in third.json()["database"]


@pytest.mark.sqlite_only
def test_short_password_is_refused(world: World) -> None:
    out = world.as_user(
        "sysadm",
        "user",
        "add",
        "op.ana",
        "--name",
        "Ana Duarte",
        "--role",
        "operator",
        extra=["short"],
    )
    assert out.code == 2 and "at least 10 characters" in out.stderr


@pytest.mark.sqlite_only
def test_administrator_cannot_record_or_sign(world: World) -> None:
    world.ready()
    world.ok(world.integrity(end="13 psi"))  # fails: on hold
    out = world.as_user(
        "sysadm", "module", "release", "QMB-0142", "--decision", "retest", "--reason", "admin tries"
    )
    assert out.code == 3 and "may not sign a disposition" in out.stderr
    out = world.as_user("sysadm", "module", "retire", "QMB-0142", "--reason", "admin tries")
    assert out.code == 3


@pytest.mark.sqlite_only
def test_only_administrators_manage_users(world: World) -> None:
    out = world.as_user(
        "eng.ray",
        "user",
        "add",
        "op.ana",
        "--name",
        "Ana Duarte",
        "--role",
        "operator",
        extra=["operator-pass-2"],
    )
    assert out.code == 3 and "may not add users" in out.stderr
    out = world.as_user("eng.ray", "user", "passwd", "op.kim", extra=["new-password-9"])
    assert out.code == 3


@pytest.mark.sqlite_only
def test_ids_are_never_reused(world: World) -> None:
    world.ok(world.as_user("sysadm", "user", "disable", "op.kim", "--reason", "left the site"))
    again = world.as_user(
        "sysadm",
        "user",
        "add",
        "op.kim",
        "--name",
        "Kim Someone-Else",
        "--role",
        "operator",
        extra=["operator-pass-9"],
    )
    assert again.code == 2 and "IDs are never reused" in again.stderr
    listed = {u["login"]: u["state"] for u in world.cli("user", "list", "--json").json()["users"]}
    assert listed["op.kim"] == "disabled"
    refused = world.as_user("op.kim", "module", "add", "QMB-0150", "--type", "HF-750")
    assert refused.code == 3 and "disabled" in refused.stderr


def test_lockout_after_repeated_failures_is_audited_and_reset_by_admin(world: World) -> None:
    world.ok(
        world.as_user(
            "sysadm", "user", "lockout", "--max-failures", "3", "--reason", "SOP-IT-004 rev 2"
        )
    )
    wrong = [
        "module",
        "add",
        "QMB-0150",
        "--type",
        "HF-750",
        "--user",
        "op.kim",
        "--password-stdin",
    ]
    messages = [world.cli(*wrong, input="guess-guess\n").stderr for _ in range(3)]
    assert "2 attempts left" in messages[0] and "1 attempts left" in messages[1]
    assert "now locked" in messages[2]
    # The right password no longer helps.
    locked = world.as_user("op.kim", "module", "add", "QMB-0150", "--type", "HF-750")
    assert locked.code == 3 and "locked" in locked.stderr
    events = world.cli("audit", "show", "--entity", "user", "--json").json()["events"]
    failures = [e for e in events if e["action"] == "sign_in_failed"]
    assert [json.loads(e["new_value"]) for e in failures if e["field"] == "failed_logins"] == [
        1, 2, 3]  # fmt: skip
    assert any(e["field"] == "locked" and json.loads(e["new_value"]) is True for e in failures)
    policy = [
        e
        for e in world.cli("audit", "show", "--entity", "setting", "--json").json()["events"]
        if e.get("key") == "lockout_failures" or "SOP-IT-004" in (e["reason"] or "")
    ]
    # (a PostgreSQL world also holds its reads-need-login setting, made before this one)
    assert policy and policy[-1]["reason"] == "SOP-IT-004 rev 2"
    world.ok(world.as_user("sysadm", "user", "passwd", "op.kim", extra=["operator-pass-7"]))
    # The reset password is temporary (tests/logbook/test_temporary_passwords.py): op.kim
    # chooses their own before writing.
    world.ok(world.cli("user", "passwd", "op.kim", "--user", "op.kim", "--password-stdin",
                       input="operator-pass-7\noperator-pass-7b\n"))  # fmt: skip
    PASSWORDS_AFTER = {**PASSWORDS, "op.kim": "operator-pass-7b"}
    out = world.cli(
        "module",
        "add",
        "QMB-0150",
        "--type",
        "HF-750",
        "--user",
        "op.kim",
        "--password-stdin",
        input=PASSWORDS_AFTER["op.kim"] + "\n",
    )
    assert out.code == 0


@pytest.mark.sqlite_only
def test_a_right_password_resets_the_failure_count(world: World) -> None:
    wrong = [
        "module",
        "add",
        "QMB-0150",
        "--type",
        "HF-750",
        "--user",
        "op.kim",
        "--password-stdin",
    ]
    world.cli(*wrong, input="guess-guess\n")
    world.ok(world.as_user("op.kim", "module", "add", "QMB-0151", "--type", "HF-750"))
    out = world.cli(*wrong, input="guess-guess\n")
    assert "4 attempts left" in out.stderr  # default threshold 5: the count started again


@pytest.mark.sqlite_only
def test_users_change_their_own_password(world: World) -> None:
    world.ok(world.as_user("op.kim", "user", "passwd", "op.kim", extra=["operator-pass-8"]))
    old = world.as_user("op.kim", "module", "add", "QMB-0150", "--type", "HF-750")
    assert old.code == 3 and "wrong password" in old.stderr
