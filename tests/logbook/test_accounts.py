"""Accounts an administrator cannot abuse: nobody changes their own role, a deciding role
granted is audited with its grantor, reads may need a signed-in user, and a locked-out site
recovers its administrator through a proof of access to the database host."""

from __future__ import annotations

import json
import stat
from pathlib import Path

import pytest

from tests.world import PASSWORDS, World

NEW_ADMIN_PASSWORD = "restored-admin-pass-7"


def _events(world: World, entity: str) -> list[dict[str, object]]:
    shown = world.cli("audit", "show", "--entity", entity, "--json")
    world.ok(shown)
    return list(shown.json()["events"])


def test_nobody_changes_their_own_role(world: World) -> None:
    before = world.snapshot()
    refused = world.as_user(
        "sysadm", "user", "role", "sysadm", "--role", "qa", "--reason", "more rights"
    )
    assert refused.code == 3 and "own role" in refused.stderr
    assert world.snapshot() == before


def test_a_refused_self_grant_leaves_the_role_unchanged(world: World) -> None:
    # ...nor sign as one: the administrator's role stays admin after the refusal.
    world.as_user("sysadm", "user", "role", "sysadm", "--role", "qa", "--reason", "x")
    roles = {u["login"]: u["role"] for u in world.cli("user", "list", "--json").json()["users"]}
    assert roles["sysadm"] == "admin"


def test_granting_a_deciding_role_is_audited_with_the_grantor(world: World) -> None:
    world.ok(
        world.as_user(
            "sysadm", "user", "role", "op.kim", "--role", "engineer", "--reason", "promoted"
        )
    )
    changes = [e for e in _events(world, "user") if e["action"] == "role_change"]
    assert len(changes) == 1
    event = changes[0]
    assert event["actor"] == "sysadm" and json.loads(str(event["new_value"])) == "engineer"
    assert "granted by sysadm" in str(event["reason"]) and "promoted" in str(event["reason"])


def test_adding_a_qa_user_names_who_granted_the_role(world: World) -> None:
    world.ok(
        world.as_user(
            "sysadm", "user", "add", "qa.noor", "--name", "Noor Haddad", "--role", "qa",
            extra=["quality-pass-noor"],
        )
    )  # fmt: skip
    created = [e for e in _events(world, "user") if e["action"] == "create"]
    assert any("role qa granted by sysadm" in str(e["reason"]) for e in created)


def test_only_an_administrator_changes_roles(world: World) -> None:
    refused = world.as_user(
        "eng.ray", "user", "role", "op.kim", "--role", "qa", "--reason", "helping out"
    )
    assert refused.code == 3 and "needs the role admin" in refused.stderr


@pytest.mark.sqlite_only
def test_reads_need_login_when_the_site_says_so(world: World) -> None:
    assert world.cli("user", "list").code == 0  # SQLite default: off
    world.ok(world.as_user("sysadm", "user", "reads-need-login", "on", "--reason", "SOP-IT-9"))
    anonymous = world.cli("user", "list", "--json")
    assert anonymous.code == 3 and "signed-in" in anonymous.stderr
    assert "op.kim" not in anonymous.stdout + anonymous.stderr  # no login revealed
    other_read = world.cli("audit", "show", "--json")  # every read follows the rule
    assert other_read.code == 3
    signed = world.as_user("op.kim", "user", "list", "--json")
    world.ok(signed)
    assert "op.kim" in [u["login"] for u in signed.json()["users"]]
    wrong = world.cli("user", "list", "--user", "op.kim", "--password-stdin", input="nope-nope\n")
    assert wrong.code == 3
    settings = [e for e in _events_signed(world) if e["entity"] == "setting"]
    assert any(e["actor"] == "sysadm" and e["reason"] == "SOP-IT-9" for e in settings)
    world.ok(world.as_user("sysadm", "user", "reads-need-login", "off", "--reason", "back"))
    assert world.cli("user", "list").code == 0


def _events_signed(world: World) -> list[dict[str, object]]:
    # audit show takes no --user (not an account command); turn reads off to look.
    world.ok(world.as_user("sysadm", "user", "reads-need-login", "off", "--reason", "look"))
    return _events(world, "setting")


def test_reads_need_login_takes_only_on_or_off(world: World) -> None:
    bad = world.as_user("sysadm", "user", "reads-need-login", "maybe", "--reason", "x")
    assert bad.code == 2 and "on or off" in bad.stderr


def test_reads_need_login_by_default_on_postgresql_only(db_url: str) -> None:
    fresh = World(db_url)
    pw = PASSWORDS["sysadm"]
    fresh.ok(fresh.cli("init", "--admin", "sysadm", "--password-stdin", input=f"{pw}\n"))
    anonymous = fresh.cli("user", "list")
    assert anonymous.code == (3 if db_url.startswith("postgresql") else 0)
    fresh.ok(fresh.as_user("sysadm", "user", "list"))


def _code_file(world: World) -> Path:
    """Where recover-admin writes its one-time code: beside the SQLite database file."""
    return Path(world.url.split(":///", 1)[1] + ".recover")


def _lock(world: World, login: str) -> None:
    world.ok(world.as_user("sysadm", "user", "lockout", "--max-failures", "1", "--reason", "t"))
    world.cli("user", "list", "--user", login, "--password-stdin", input="wrong-wrong-1\n")


@pytest.mark.sqlite_only
def test_break_glass_restores_a_locked_administrator_and_is_audited(world: World) -> None:
    _lock(world, "sysadm")
    assert world.as_user("sysadm", "user", "list").code == 3  # locked out
    first = world.cli("user", "recover-admin", "sysadm", "--password-stdin", input="")
    world.ok(first)
    code_file = _code_file(world)
    assert stat.S_IMODE(code_file.stat().st_mode) == 0o600
    code = code_file.read_text().strip()
    done = world.cli(
        "user", "recover-admin", "sysadm", "--password-stdin",
        input=f"{code}\n{NEW_ADMIN_PASSWORD}\n",
    )  # fmt: skip
    world.ok(done)
    assert not code_file.exists()  # used once
    signed = world.cli(
        "user", "list", "--user", "sysadm", "--password-stdin", input=f"{NEW_ADMIN_PASSWORD}\n"
    )
    world.ok(signed)
    shown = world.cli("audit", "show", "--entity", "user")
    world.ok(shown)
    assert "break-glass recovery by host access" in shown.stdout
    breaks = [e for e in _events(world, "user") if e["action"] == "break_glass"]
    assert breaks and all(str(e["actor"]).startswith("host:") for e in breaks)


@pytest.mark.sqlite_only
def test_break_glass_refuses_a_wrong_code_and_voids_it(world: World) -> None:
    world.ok(world.cli("user", "recover-admin", "sysadm", "--password-stdin", input=""))
    code_file = _code_file(world)
    before = world.snapshot()
    wrong = world.cli(
        "user", "recover-admin", "sysadm", "--password-stdin",
        input=f"not-the-code\n{NEW_ADMIN_PASSWORD}\n",
    )  # fmt: skip
    assert wrong.code == 3 and "does not match" in wrong.stderr
    assert not code_file.exists() and world.snapshot() == before


@pytest.mark.sqlite_only
def test_break_glass_restores_only_administrators(world: World) -> None:
    world.ok(world.cli("user", "recover-admin", "op.kim", "--password-stdin", input=""))
    code = _code_file(world).read_text().strip()
    refused = world.cli(
        "user", "recover-admin", "op.kim", "--password-stdin",
        input=f"{code}\n{NEW_ADMIN_PASSWORD}\n",
    )  # fmt: skip
    assert refused.code == 2 and "no administrator" in refused.stderr


@pytest.mark.sqlite_only
def test_init_with_admin_on_a_database_without_usable_administrator_points_to_recovery(
    world: World,
) -> None:
    _lock(world, "sysadm")
    again = world.cli("init", "--admin", "newadm", "--password-stdin", input="another-admin-pass\n")
    assert again.code == 2 and "recover-admin" in again.stderr
    users = [u["login"] for u in world.cli("user", "list", "--json").json()["users"]]
    assert "newadm" not in users


def test_a_read_command_without_user_signs_in_through_the_environment(world: World) -> None:
    world.ok(world.as_user("sysadm", "user", "reads-need-login", "on", "--reason", "site rule"))
    refused = world.cli("module-type", "list")
    assert refused.code == 3 and "FLUXLEDGER_USER" in refused.stderr
    from tests.world import invoke

    pw = PASSWORDS["eng.ray"]
    signed = invoke(["module-type", "list", "--db", world.url], input=f"{pw}\n",
                    env={"FLUXLEDGER_USER": "eng.ray"})  # fmt: skip
    assert signed.code == 0, signed.stderr
    assert "HF-750" in signed.stdout
