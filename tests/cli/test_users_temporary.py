"""Accounts an administrator cannot abuse, through the CLI: a password an administrator resets
is temporary, so its owner signs no record and records no test until they have chosen their
own with `user passwd ID --user ID`; the flag's setting and clearing are in `audit show`."""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path

import pytest

from tests.records import flow
from tests.world import TYPE_OPTIONS, World, Worlds

pytestmark = pytest.mark.sqlite_only

RESET = "reset-by-admin-pass-4"
CHOSEN = "lin-chose-this-pass-6"
COMMAND = "fluxledger user passwd {0} --user {0}"


@pytest.fixture
def review(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """Run 1 in review (tests/records/flow.py), with a second QA user."""
    with worlds.copy("sqlite", tmp_path, flow.reviewed) as w:
        yield w


def _as(world: World, login: str, password: str, *args: str, extra: str = "") -> object:
    """``args`` as ``login`` signing in with ``password`` (``extra``: further stdin lines)."""
    stdin = f"{password}\n{extra}"
    return world.cli(*args, "--user", login, "--password-stdin", input=stdin)


def _reset(world: World, login: str) -> None:
    out = world.ok(world.as_user("sysadm", "user", "passwd", login, extra=[RESET]))
    assert "temporary" in out.stdout and COMMAND.format(login) in out.stdout


def _flag_events(world: World, login: str) -> list[dict[str, object]]:
    uid = {u["login"]: u["id"] for u in world.cli("user", "list", "--json").json()["users"]}[login]
    shown = world.ok(world.cli("audit", "show", "--entity", "user", "--json")).json()
    return [
        e
        for e in shown["events"]
        if e["field"] == "password_temporary" and str(e["entity_id"]) == str(uid)
    ]


def test_a_reset_qa_user_cannot_sign_until_they_change_the_password(review: World) -> None:
    review.ok(flow.sign(review, 1, "performed", "op.kim"))  # type: ignore[arg-type]
    review.ok(flow.sign(review, 1, "verified", "eng.ray"))  # type: ignore[arg-type]
    _reset(review, "qa.lin")
    before = review.snapshot()
    refused = _as(review, "qa.lin", RESET, "record", "sign", "1", "--meaning", "reviewed")
    assert refused.code == 3, refused  # type: ignore[attr-defined]
    assert "temporary" in refused.stderr  # type: ignore[attr-defined]
    assert COMMAND.format("qa.lin") in refused.stderr  # type: ignore[attr-defined]
    assert "Traceback" not in refused.stderr  # type: ignore[attr-defined]
    assert review.snapshot() == before  # no signature, no revision, no event
    # Changing one's own password is allowed with the temporary one...
    changed = _as(review, "qa.lin", RESET, "user", "passwd", "qa.lin", extra=f"{CHOSEN}\n")
    review.ok(changed)  # type: ignore[arg-type]
    # ...after which the signature goes through, and the temporary password no longer works.
    signed = review.ok(
        _as(review, "qa.lin", CHOSEN, "record", "sign", "1", "--meaning", "reviewed", "--json")  # type: ignore[arg-type]
    ).json()
    assert signed["meaning"] == "reviewed" and signed["user"] == "qa.lin"
    old = _as(review, "qa.lin", RESET, "record", "sign", "1", "--meaning", "approved")
    assert old.code == 3 and "wrong password" in old.stderr  # type: ignore[attr-defined]
    set_, cleared = _flag_events(review, "qa.lin")[-2:]
    assert set_["actor"] == "sysadm" and json.loads(str(set_["new_value"])) is True
    assert "password reset" in str(set_["reason"])
    assert cleared["actor"] == "qa.lin" and json.loads(str(cleared["new_value"])) is False
    assert cleared["reason"] == "password changed by its owner"
    review.ok(review.cli("audit", "verify"))


def test_a_reset_operator_records_no_water_test_until_they_change_it(sqlite_world: World) -> None:
    w = sqlite_world
    w.add_module()
    _reset(w, "op.kim")
    water = [
        "test", "water", "QMB-0142", "--stage", "baseline", "--feed", "3.2 psi",
        "--retentate", "2.8 psi", "--flow", "170 mL/min", "--temperature", "20 degC",
    ]  # fmt: skip
    before = w.snapshot()
    refused = _as(w, "op.kim", RESET, *water)
    assert refused.code == 3 and COMMAND.format("op.kim") in refused.stderr  # type: ignore[attr-defined]
    assert w.snapshot() == before
    assert w.status() == "commissioning"  # reads stay open; nothing was recorded
    w.ok(_as(w, "op.kim", RESET, "user", "passwd", "op.kim", extra="kim-chose-this-pass-2\n"))  # type: ignore[arg-type]
    done = w.ok(_as(w, "op.kim", "kim-chose-this-pass-2", *water, "--json"))  # type: ignore[arg-type]
    assert done.json()["record"]["nwp"]["value"] > 0
    assert w.snapshot()["water_flux_test"] == before["water_flux_test"] + 1
    shown = w.ok(w.cli("audit", "show", "--entity", "user"))
    assert "password temporary: no → yes" in shown.stdout
    assert "password temporary: yes → no" in shown.stdout


def test_a_temporary_password_allows_no_other_account_command(sqlite_world: World) -> None:
    w = sqlite_world
    _reset(w, "qa.lin")
    before = w.snapshot()
    # A temporary password is for changing itself only: resetting another's is refused.
    other = _as(w, "qa.lin", RESET, "user", "passwd", "op.kim", extra=f"{CHOSEN}\n")
    assert other.code == 3 and "temporary" in other.stderr  # type: ignore[attr-defined]
    assert w.snapshot() == before


def test_a_new_user_starts_with_a_temporary_password(sqlite_world: World) -> None:
    w = sqlite_world
    added = w.ok(
        w.as_user("sysadm", "user", "add", "op.ana", "--name", "Ana Duarte", "--role",
                  "operator", extra=[RESET])
    )  # fmt: skip
    assert COMMAND.format("op.ana") in added.stdout
    refused = _as(w, "op.ana", RESET, "module", "add", "QMB-0160", "--type", "HF-750")
    assert refused.code == 3 and "temporary" in refused.stderr  # type: ignore[attr-defined]
    w.ok(_as(w, "op.ana", RESET, "user", "passwd", "op.ana", extra="ana-chose-this-pass-1\n"))  # type: ignore[arg-type]
    w.ok(_as(w, "op.ana", "ana-chose-this-pass-1", "module", "add", "QMB-0160", "--type", "HF-750"))  # type: ignore[arg-type]


def test_the_administrator_can_neither_sign_as_qa_nor_grant_themselves_qa(
    sqlite_world: World,
) -> None:
    # An administrator who knows the password they set still signs in as a temporary user...
    w = sqlite_world
    _reset(w, "qa.lin")
    as_lin = _as(w, "qa.lin", RESET, "module-type", "add", "HF-751", *TYPE_OPTIONS)
    assert as_lin.code == 3 and "temporary" in as_lin.stderr  # type: ignore[attr-defined]
    # ...and cannot make themselves QA (tests/logbook/test_accounts.py covers the rest).
    grant = w.as_user("sysadm", "user", "role", "sysadm", "--role", "qa", "--reason", "x")
    assert grant.code == 3 and "own role" in grant.stderr
    roles = {u["login"]: u["role"] for u in w.cli("user", "list", "--json").json()["users"]}
    assert roles["sysadm"] == "admin"
