"""The audit trail page through the ASGI client: its JSON twin lists the events of
`fluxledger audit show --json` for the same filter (newest first, 100 a page), each filter
narrows to the events that have the property, a bad filter value is shown beside its box, and
the chain's check is the one `fluxledger audit verify` reports."""

from __future__ import annotations

import re
import sqlite3
from typing import Any

import pytest

from tests.web.conftest import Site
from tests.world import PASSWORDS, World

pytestmark = pytest.mark.sqlite_only

# The fields of an event both lists carry; the CLI's "at" is the site's local time.
SAME = ("seq", "actor", "action", "entity", "entity_id", "module_id", "field", "old_value",
        "new_value", "reason", "record_hash", "prev_hash", "hash")  # fmt: skip


def _cli(w: World, *args: str) -> list[dict[str, Any]]:
    events: list[dict[str, Any]] = w.ok(w.cli("audit", "show", "--json", *args)).json()["events"]
    return events[::-1]  # the CLI lists oldest first, the page newest first


def _web(site: Site, query: str) -> list[dict[str, Any]]:
    """Every page of the JSON twin for ``query``, followed to the end."""
    events: list[dict[str, Any]] = []
    page = 1
    while True:
        answer = site.client.get(f"/audit?format=json&page={page}&{query}")
        assert answer.status_code == 200, answer.text
        body = answer.json()
        assert len(body["events"]) <= body["page_size"] == 100
        events += body["events"]
        if body["offset"] + len(body["events"]) >= body["total"]:
            assert len(events) == body["total"]
            return events
        page += 1


def _same(ours: list[dict[str, Any]], theirs: list[dict[str, Any]]) -> None:
    assert [e["seq"] for e in ours] == [e["seq"] for e in theirs]
    for a, b in zip(ours, theirs, strict=True):
        assert {k: a[k] for k in SAME} == {k: b[k] for k in SAME}
        assert a["at_local"] == b["at"]


def _history(site: Site) -> None:
    """Two modules, a cycle, a void, and enough wrong passwords (each an audited event) for
    the trail to fill more than one page."""
    w = site.world
    w.ready("QMB-0101")
    w.ok(w.cycle("QMB-0101"))
    w.ready("QMB-0202")
    w.ok(w.as_user("eng.ray", "void", "water-test", "1", "--reason", "typed the wrong flow"))
    for _ in range(15):  # four wrong, then the right one resets the count (5 events)
        for _ in range(4):
            assert site.sign_in("qa.lin", "not-the-password").status_code == 403
        assert site.sign_in("qa.lin", PASSWORDS["qa.lin"]).status_code == 303


def test_the_trail_lists_what_audit_show_lists_and_each_filter_narrows(site: Site) -> None:
    w = site.world
    _history(site)
    site.client.post("/sign-out", data={"csrf": site.csrf()})
    assert (
        site.client.get("/audit", follow_redirects=False)
        .headers["location"]
        .startswith("/sign-in?next=/audit")
    )
    site.sign_in("op.kim", PASSWORDS["op.kim"])  # any signed-in user reads the trail

    everything = _cli(w)
    assert len(everything) > 100  # so the paging is exercised
    _same(_web(site, ""), everything)
    first = site.client.get("/audit")
    assert first.status_code == 200 and f"events 1–100 of {len(everything)}" in first.text
    assert "page=2" in first.text and "Older" in first.text and "Newer" not in first.text
    second = site.client.get("/audit?page=2")
    assert f"events 101–{len(everything)} of {len(everything)}" in second.text
    assert "Newer" in second.text and "Older" not in second.text
    assert "past the last" in site.client.get("/audit?page=9").text

    times = [e["at"] for e in everything]
    cases = [
        ("module=QMB-0202", ["--module", "QMB-0202"], lambda e: e["module_id"] == 2),
        ("user=eng.ray", ["--by", "eng.ray"], lambda e: e["actor"] == "eng.ray"),
        ("entity=cleaning", ["--entity", "cleaning"], lambda e: e["entity"] == "cleaning"),
        (
            f"since={times[60]}&until={times[20]}".replace("+", "%2B"),
            ["--since", times[60], "--until", times[20]],
            lambda e: times[60] <= e["at"] <= times[20],
        ),
    ]
    for query, args, has in cases:
        ours = _web(site, query)
        _same(ours, _cli(w, *args))
        assert 0 < len(ours) < len(everything), query
        assert ours == [e for e in _web(site, "") if has(e)], query
    # Filters the CLI has no option for: the action, and a day typed as a date alone.
    voids = _web(site, "action=void")
    assert [e["seq"] for e in voids] == [e["seq"] for e in everything if e["action"] == "void"]
    assert voids and all(e["reason"] == "typed the wrong flow" for e in voids)
    day = everything[-1]["at"][:10]  # the site has no zone: UTC
    assert len(_web(site, f"since={day}")) == len(everything)
    assert [e["seq"] for e in _web(site, f"module=QMB-0202&user=op.kim&until={day}")] == [
        e["seq"] for e in _cli(w, "--module", "QMB-0202", "--by", "op.kim")
    ]

    shown = site.client.get("/audit?module=QMB-0202&entity=module")
    assert shown.status_code == 200
    assert 'value="QMB-0202"' in shown.text and '<option value="module" selected>' in shown.text
    rows = re.findall(r'<th scope="row">#(\d+)</th>', shown.text)
    assert [int(r) for r in rows] == [
        e["seq"] for e in _cli(w, "--module", "QMB-0202", "--entity", "module")
    ]
    assert "status: commissioning → available" in shown.text  # a change in words


@pytest.mark.parametrize(
    ("query", "box", "words"),
    [
        ("since=yesterday", "since", "'yesterday' is not a date"),
        ("until=2026-02-30", "until", "is not a date"),
        ("module=NO-SUCH", "module", "no module with serial"),
        ("run=0", "run", "1 or more"),
        ("entity=modules", "entity", "is unknown"),
    ],
)
def test_a_bad_filter_value_is_shown_beside_its_box(
    site: Site, query: str, box: str, words: str
) -> None:
    site.sign_in("qa.lin", PASSWORDS["qa.lin"])
    page = site.client.get(f"/audit?{query}")
    assert page.status_code == 400 and "Traceback" not in page.text
    beside = re.search(
        rf'<(?:input|select) id="f-{box}"[^>]*aria-invalid="true" aria-describedby="f-{box}-error"'
        rf'.*?<p class="error" id="f-{box}-error" role="alert">([^<]*)</p>',
        page.text,
        re.S,
    )
    assert beside and words in beside.group(1).replace("&#39;", "'"), page.text
    assert '<th scope="row">#' not in page.text  # no events under a bad filter
    twin = site.client.get(f"/audit?format=json&{query}")
    assert twin.status_code == 400 and twin.json()["field"] == box


def test_the_chain_is_checked_on_request_as_audit_verify_checks_it(site: Site) -> None:
    w = site.world
    w.add_module("QMB-0101")
    site.sign_in("eng.ray", PASSWORDS["eng.ray"])
    assert site.client.get("/audit?format=json").json()["verification"] is None
    assert "Check the chain now" in site.client.get("/audit").text

    verified = site.client.get("/audit?verify=1&format=json").json()["verification"]
    cli = w.ok(w.cli("audit", "verify", "--json")).json()
    assert verified["intact"] and cli["verdict"] == "intact"
    assert (verified["events"], verified["records"]) == (
        cli["checked"]["events"],
        cli["checked"]["records"],
    )
    assert "Chain intact." in site.client.get("/audit?verify=1").text

    # A record edited behind fluxledger's back: the page names what verify names.
    with sqlite3.connect(w.url.removeprefix("sqlite:///")) as conn:
        conn.execute("UPDATE module SET note = 'edited in SQL' WHERE serial = 'QMB-0101'")
    broken = site.client.get("/audit?verify=1&format=json").json()["verification"]
    found = w.cli("audit", "verify", "--json")
    assert found.code == 1
    problems = found.json()["problems"]
    assert not broken["intact"]
    assert [(p["table"], p["row"], p["what"]) for p in broken["problems"]] == [
        (p["entity"], str(p["key"]), p["what"]) for p in problems
    ]
    page = site.client.get("/audit?verify=1")
    assert "Problems found: 1." in page.text and "module" in page.text
