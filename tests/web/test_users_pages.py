"""User administration on the web through the ASGI client: the administrator adds a user, who
signs in with the temporary password and may not write until choosing their own; changing a
role, resetting (and so unlocking) a password and disabling write the same audit events as
`fluxledger user ...`; bad values are shown beside their field with nothing written; other
roles, and a post after the idle time, write nothing; no page or JSON shows a password or
its hash."""

from __future__ import annotations

import json
import re
from typing import Any

import pytest
from sqlmodel import Session, create_engine, select
from starlette.testclient import TestClient

from ledger.store.tables import UserAccount
from tests.web.conftest import Site
from tests.world import PASSWORDS, World

pytestmark = pytest.mark.sqlite_only

TEMPORARY = "handed-over-pass-7"
# Bookkeeping that differs between two records created alike.
OWN = {"id", "login", "full_name", "created_at", "record_hash"}


def _events(w: World, after: int = 0) -> list[dict[str, Any]]:
    shown = w.ok(w.cli("audit", "show", "--entity", "user", "--json")).json()["events"]
    return [e for e in shown if e["seq"] > after]


def _last_seq(w: World) -> int:
    return int(w.ok(w.cli("audit", "show", "--last", "1", "--json")).json()["events"][0]["seq"])


def _about(events: list[dict[str, Any]], login: str, ids: dict[str, str]) -> list[tuple[Any, ...]]:
    """The events of one account, with its own login and ID written as placeholders."""
    out = []
    for e in events:
        if e["entity_id"] != ids[login]:
            continue
        old = json.loads(e["old_value"]) if e["old_value"] else None
        new = json.loads(e["new_value"]) if e["new_value"] else None
        if isinstance(new, dict):
            new = {k: v for k, v in new.items() if k not in OWN}
        reason = (e["reason"] or "").replace(login, "LOGIN")
        out.append((e["actor"], e["action"], e["field"], old, new, reason))
    return out


def _ids(w: World) -> dict[str, str]:
    listed = w.ok(w.cli("user", "list", "--json")).json()["users"]
    return {u["login"]: str(u["id"]) for u in listed}


def _form(site: Site, path: str, data: dict[str, str], **kw: Any) -> Any:
    return site.client.post(path, data={"csrf": site.csrf(), **data}, follow_redirects=False, **kw)


def _error_beside(page: str, form: str, name: str) -> str:
    found = re.search(
        rf'id="{form}-{name}"[^>]*aria-invalid="true"[^>]*>.*?'
        rf'<p class="error" id="{form}-{name}-error" role="alert">([^<]*)</p>',
        page,
        re.S,
    )
    assert found, page
    return found.group(1).replace("&#39;", "'")


def _no_secrets(w: World, texts: list[str], passwords: list[str]) -> None:
    with Session(create_engine(w.url)) as s:
        hashes = [u.password_hash for u in s.exec(select(UserAccount))]
    for text in texts:
        assert "$argon2" not in text
        for secret in [*hashes, *passwords]:
            assert secret not in text


def test_an_added_user_signs_in_with_the_temporary_password_and_must_change_it(
    site: Site,
) -> None:
    w = site.world
    site.sign_in("sysadm", PASSWORDS["sysadm"])
    seen = [site.client.get("/users").text, site.client.get("/users?format=json").text]
    listed = json.loads(seen[1])["users"]
    assert [u["login"] for u in listed] == ["sysadm", "eng.ray", "qa.lin", "op.kim"]
    assert {u["state"] for u in listed} == {"active"}

    before = _last_seq(w)
    form = {"login": "adm.two", "name": "Noor Haddad", "role": "admin", "password": TEMPORARY,
            "password_repeat": TEMPORARY}  # fmt: skip
    added = _form(site, "/users", form)
    assert added.status_code == 303
    assert added.headers["location"] == "/users/adm.two?done=added#done"
    page = site.client.get(added.headers["location"]).text
    assert "The password is temporary" in page and "Your password" in page
    seen += [page, site.client.get("/users/adm.two?format=json").text]
    assert json.loads(seen[-1])["user"]["temporary_password"] is True
    # The same event as the CLI's `user add` (the password hash is never in it).
    w.ok(w.as_user("sysadm", "user", "add", "adm.cli", "--name", "Noor Haddad", "--role",
                   "admin", extra=[TEMPORARY, TEMPORARY]))  # fmt: skip
    ids, events = _ids(w), _events(w, before)
    assert _about(events, "adm.two", ids) == _about(events, "adm.cli", ids) != []
    seen += [site.client.get(f"/audit?entity=user{f}").text for f in ("", "&format=json")]

    # The new administrator signs in with the temporary password; a write is refused.
    other = Site(w, TestClient(site.client.app), site.clock)
    first = other.sign_in("adm.two", TEMPORARY)
    assert first.status_code == 303  # type: ignore[attr-defined]
    assert first.headers["location"] == "/password?temporary=1"  # type: ignore[attr-defined]
    assert "set by an administrator" in other.client.get("/password?temporary=1").text
    seen.append(other.client.get("/users").text)
    snapshot = w.snapshot()
    form = {**form, "login": "op.lee", "name": "Lee Park", "role": "operator"}
    refused = _form(other, "/users", form)
    assert refused.status_code == 403 and "temporary" in refused.text
    assert w.snapshot() == snapshot

    # They choose their own on the page Your password: the current one again, the new twice.
    def choose(current: str, new: str, again: str) -> Any:
        data = {"csrf": other.csrf("/password"), "current": current, "new": new, "again": again}
        return other.client.post("/password", data=data)

    differ = choose(TEMPORARY, "noor-own-pass-42", "noor-own-pass-43")
    assert differ.status_code == 400 and 'id="again-error"' in differ.text
    weak = choose(TEMPORARY, "password", "password")
    assert weak.status_code == 400 and 'id="new-error"' in weak.text
    assert w.snapshot() == snapshot  # neither changed anything
    wrong = choose("not-the-temporary", "noor-own-pass-42", "noor-own-pass-42")
    assert wrong.status_code == 400 and 'id="current-error"' in wrong.text
    # A wrong current password counts toward lockout, as a wrong sign-in does.
    assert (
        json.loads(site.client.get("/users/adm.two?format=json").text)["user"]["failed_sign_ins"]
        == 1
    )
    assert choose(TEMPORARY, "noor-own-pass-42", "noor-own-pass-42").status_code == 200
    assert json.loads(site.client.get("/users/adm.two?format=json").text)["user"] == {
        **json.loads(seen[3])["user"], "temporary_password": False, "failed_sign_ins": 0,
    }  # fmt: skip
    accepted = _form(other, "/users", form)
    assert accepted.status_code == 303 and "op.lee" in _ids(w)
    seen.append(other.client.get("/users/op.lee").text)
    _no_secrets(w, seen, [TEMPORARY, "noor-own-pass-42", *PASSWORDS.values()])


def test_each_action_writes_the_event_the_cli_writes_and_bad_values_write_nothing(
    site: Site,
) -> None:
    w = site.world
    for login in ("op.web", "op.cli"):
        w.ok(w.as_user("sysadm", "user", "add", login, "--name", "Sam Ortiz", "--role",
                       "operator", extra=[TEMPORARY, TEMPORARY]))  # fmt: skip
    # Both accounts locked by wrong passwords: op.web on the web, op.cli on the CLI.
    for _ in range(5):
        site.sign_in("op.web", "not-the-password")
        w.as_user("op.cli", "module", "add", "QMB-9999", "--type", "HF-750")
    ids = _ids(w)
    site.sign_in("sysadm", PASSWORDS["sysadm"])
    seen = [site.client.get("/users").text, site.client.get("/users/op.web").text]
    assert "Unlock and set the password" in seen[-1]
    before = _last_seq(w)

    why = "moved to process development"
    assert _form(site, "/users/op.web/role", {"role": "engineer", "reason": why}).status_code == 303
    w.ok(w.as_user("sysadm", "user", "role", "op.cli", "--role", "engineer", "--reason", why))
    new = "second-temp-pass-9"
    reset = _form(site, "/users/op.web/password", {"password": new, "password_repeat": new})
    assert reset.status_code == 303 and reset.headers["location"].endswith("done=password#done")
    w.ok(w.as_user("sysadm", "user", "passwd", "op.cli", extra=[new, new]))
    seen.append(site.client.get("/users/op.web?done=password").text)
    assert "the account is unlocked" in seen[-1]
    unlocked = Site(w, TestClient(site.client.app), site.clock)
    assert unlocked.sign_in("op.web", new).status_code == 303
    gone = "left the site"
    done = _form(site, "/users/op.web/disable", {"reason": gone})
    assert done.status_code == 303
    w.ok(w.as_user("sysadm", "user", "disable", "op.cli", "--reason", gone))

    events = _events(w, before)
    ours, theirs = _about(events, "op.web", ids), _about(events, "op.cli", ids)
    assert ours == theirs
    assert [e[1:5] for e in ours] == [
        ("role_change", "role", "operator", "engineer"),
        ("change", "password_hash", "(not shown)", "(not shown)"),
        ("change", "failed_logins", 5, 0),
        ("change", "locked", True, False),
        ("change", "active", True, False),
    ]
    seen += [site.client.get(f"/audit?entity=user{f}").text for f in ("", "&format=json")]
    listed = {u["login"]: u for u in site.client.get("/users?format=json").json()["users"]}
    assert {**listed["op.web"], "created_at": None} == {
        **listed["op.cli"],
        "login": "op.web",
        "created_at": None,
    }
    assert listed["op.web"]["state"] == "disabled" and listed["op.web"]["role"] == "engineer"

    # Bad values: beside their field, nothing written.
    snapshot = w.snapshot()
    bad = [
        ("/users", "add", {"login": "op.neu", "name": "Ada Neu", "role": "boss",
                           "password": TEMPORARY, "password_repeat": TEMPORARY}, "role",
         "role 'boss' is unknown"),
        ("/users", "add", {"login": "op.neu", "name": "Ada Neu", "role": "operator",
                           "password": "qwertyuiop", "password_repeat": "qwertyuiop"},
         "password", "common passwords"),
        ("/users", "add", {"login": "op.neu", "name": "Ada Neu", "role": "operator",
                           "password": "short", "password_repeat": "short"}, "password",
         "at least 10 characters"),
        ("/users", "add", {"login": "Op Neu", "name": "Ada Neu", "role": "operator",
                           "password": TEMPORARY, "password_repeat": TEMPORARY}, "login",
         "holds a space"),
        ("/users", "add", {"login": "op.neu", "name": "Ada Neu", "role": "operator",
                           "password": TEMPORARY, "password_repeat": TEMPORARY + "x"},
         "password_repeat", "differ"),
        ("/users/eng.ray/role", "role", {"role": "qa", "reason": " "}, "reason", "reason"),
        ("/users/eng.ray/password", "password", {"password": "1234567890",
                                                 "password_repeat": "1234567890"},
         "password", "common passwords"),
        ("/users/eng.ray/disable", "disable", {"reason": ""}, "reason", "reason"),
    ]  # fmt: skip
    for path, form, data, name, words in bad:
        answer = _form(site, path, data)
        assert answer.status_code == 400, (path, data)
        assert words in _error_beside(answer.text, form, name)
        seen.append(answer.text)
    own = _form(site, "/users/sysadm/role", {"role": "qa", "reason": "try"})
    assert own.status_code == 403 and "their own role" in own.text
    assert w.snapshot() == snapshot
    _no_secrets(w, seen, [TEMPORARY, new, *PASSWORDS.values()])


@pytest.mark.parametrize("login", ["eng.ray", "op.kim", "qa.lin"])
def test_other_roles_are_refused_and_write_nothing(site: Site, login: str) -> None:
    w = site.world
    site.sign_in(login, PASSWORDS[login])
    assert site.client.get("/users").status_code == 403
    assert site.client.get("/users?format=json").status_code == 403
    assert site.client.get("/users/op.kim").status_code == 403
    snapshot = w.snapshot()
    form = {"login": "op.sly", "name": "Sly Hand", "role": "admin", "password": TEMPORARY,
            "password_repeat": TEMPORARY}  # fmt: skip
    added = _form(site, "/users", form)
    assert added.status_code == 403 and "may not add users" in added.text
    assert _form(site, "/users/sysadm/disable", {"reason": "x"}).status_code == 403
    assert _form(site, "/users/sysadm/role", {"role": "qa", "reason": "x"}).status_code == 403
    assert w.snapshot() == snapshot


def test_a_post_after_the_idle_time_writes_nothing(site: Site) -> None:
    w = site.world
    site.sign_in("sysadm", PASSWORDS["sysadm"])
    token = site.csrf("/users")
    snapshot = w.snapshot()
    site.clock.now += 16 * 60
    late = site.client.post(
        "/users",
        data={"csrf": token, "login": "op.late", "name": "Late Comer", "role": "operator",
              "password": TEMPORARY, "password_repeat": TEMPORARY},
        follow_redirects=False,
    )  # fmt: skip
    assert late.status_code == 303 and late.headers["location"] == "/sign-in?next=/users&idle=1"
    assert w.snapshot() == snapshot
