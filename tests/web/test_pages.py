"""The web workspace's first pages through the ASGI test client: signing in with the CLI's
accounts and lockout, the fleet and a module's history with their JSON twins, and the guards
every answer passes (CSRF, idle time, security headers, body limit, no traceback).

The numbers on the pages come from the same services as `fluxledger fleet` and `history`;
here they are compared with those commands' --json output, which the logbook tests check
against independent references (numpy, statsmodels)."""

from __future__ import annotations

import pytest
from sqlmodel import Session, create_engine, select

from ledger.store.tables import AuditEvent, UserAccount
from tests.web.conftest import Site
from tests.world import PASSWORDS

pytestmark = pytest.mark.sqlite_only


def _user(site: Site, login: str) -> UserAccount:
    with Session(create_engine(site.world.url)) as s:
        user = s.exec(select(UserAccount).where(UserAccount.login == login)).one()
        s.expunge(user)
        return user


def _events(site: Site) -> int:
    with Session(create_engine(site.world.url)) as s:
        return len(s.exec(select(AuditEvent)).all())


def test_sign_in_then_fleet_and_history_match_the_cli(site: Site) -> None:
    w = site.world
    w.ready("QMB-0101")
    w.ok(w.cycle("QMB-0101", recovery_flow="160 mL/min"))
    assert (
        site.client.get("/fleet", follow_redirects=False)
        .headers["location"]
        .startswith("/sign-in?next=/fleet")
    )
    answer = site.sign_in("op.kim", PASSWORDS["op.kim"])
    assert answer.status_code == 303 and answer.headers["location"] == "/fleet"
    cookie = answer.headers["set-cookie"].lower()
    assert "httponly" in cookie and "samesite=strict" in cookie
    assert "secure" not in cookie  # plain http here; behind TLS the cookie is Secure

    page = site.client.get("/fleet")
    assert page.status_code == 200 and "QMB-0101" in page.text and "Kim Varga" in page.text
    twin = site.client.get("/fleet?format=json").json()["fleet"]
    cli = w.ok(w.cli("fleet", "--json")).json()["fleet"]
    assert [r["serial"] for r in twin] == [r["serial"] for r in cli]
    assert twin[0]["last_recovery"] == pytest.approx(cli[0]["last_recovery"]["value"] / 100)

    history = site.client.get("/modules/QMB-0101")
    assert history.status_code == 200 and "Recovery per cycle" in history.text
    ours = site.client.get("/modules/QMB-0101?format=json").json()["history"]
    theirs = w.ok(w.cli("history", "QMB-0101", "--json")).json()
    assert ours["cycles_used"] == theirs["module"]["cycles_used"]
    chart = site.client.get("/modules/QMB-0101/charts.png")
    assert (
        chart.headers["content-type"] == "image/png" and chart.content[:8] == b"\x89PNG\r\n\x1a\n"
    )


def test_a_post_without_or_with_another_sessions_token_is_refused(site: Site) -> None:
    before = (_user(site, "op.kim").failed_logins, _events(site))
    bare = site.client.post("/sign-in", data={"login": "op.kim", "password": "wrong"})
    assert bare.status_code == 403 and "csrf" in bare.text
    other = Site(site.world, type(site.client)(site.client.app))
    stolen = other.csrf()
    forged = site.client.post(
        "/sign-in", data={"csrf": stolen, "login": "op.kim", "password": "wrong"}
    )
    assert forged.status_code == 403
    # Refused before the password was looked at: no failed attempt counted, nothing audited.
    assert (_user(site, "op.kim").failed_logins, _events(site)) == before


def test_wrong_passwords_lock_the_account_as_on_the_cli(site: Site) -> None:
    for _ in range(5):
        wrong = site.sign_in("op.kim", "not-my-password")
        assert wrong.status_code == 403
    assert _user(site, "op.kim").locked
    right = site.sign_in("op.kim", PASSWORDS["op.kim"])
    assert right.status_code == 403 and "locked" in right.text.lower()
    # The CLI sees the same lock.
    refused = site.world.as_user("op.kim", "module", "list")
    assert refused.code != 0


def test_the_idle_time_signs_the_user_out(site: Site) -> None:
    assert site.sign_in("qa.lin", PASSWORDS["qa.lin"]).status_code == 303
    site.clock.now += 14 * 60
    assert site.client.get("/fleet").status_code == 200  # and this request renews the session
    site.clock.now += 15 * 60 + 1
    late = site.client.get("/fleet", follow_redirects=False)
    assert late.status_code == 303 and late.headers["location"].endswith("idle=1")
    page = site.client.get(late.headers["location"])
    assert "signed out after a time without activity" in page.text
    token = site.csrf()
    after = site.client.post("/sign-out", data={"csrf": token}, follow_redirects=False)
    assert after.status_code == 303  # signing out needs no session


def test_guards_on_every_answer(site: Site) -> None:
    page = site.client.get("/sign-in")
    csp = page.headers["content-security-policy"]
    assert "script-src 'self'" in csp and "unsafe-inline" not in csp
    assert page.headers["x-content-type-options"] == "nosniff"
    assert page.headers["x-frame-options"] == "DENY"
    assert "<script" not in page.text  # no inline script on the page
    huge = site.client.post("/sign-in", content=b"x" * (21 * 1024 * 1024))
    assert huge.status_code == 413


def test_errors_are_pages_not_tracebacks(site: Site) -> None:
    site.sign_in("eng.ray", PASSWORDS["eng.ray"])
    missing = site.client.get("/modules/NO-SUCH")
    assert missing.status_code in (400, 403) and "NO-SUCH" in missing.text
    assert "Traceback" not in missing.text and "SELECT" not in missing.text
    assert site.client.get("/modules/NO-SUCH?format=json").json()["error"]


@pytest.mark.parametrize("target", ["//elsewhere.example/x", "https://elsewhere.example/", "x"])
def test_sign_in_never_sends_the_user_off_site(site: Site, target: str) -> None:
    answer = site.client.post(
        "/sign-in",
        data={"csrf": site.csrf(), "login": "op.kim", "password": PASSWORDS["op.kim"],
              "next": target},
        follow_redirects=False,
    )  # fmt: skip
    assert answer.headers["location"] == "/fleet"


def test_the_bare_route_answers_without_a_session(site: Site) -> None:
    assert site.client.get("/alive").text == "ok"
