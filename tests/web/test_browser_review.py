"""Reviewing and signing a batch record in Debian's Chromium (Playwright): QA opens the record,
meets the exceptions before the record, types the password again and approves; an operator
is offered no approval, and an approval posted by hand with the page's token is refused.
Skipped, with the reason, when no Chromium is installed."""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from tests.records import flow
from tests.web.conftest import CHROMIUM, NO_CHROMIUM, sign_in_page
from tests.world import PASSWORDS, World, Worlds


@pytest.fixture
def browser_world(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """Run 1 in review (tests.records.flow.reviewed) on the site's database where there is
    one (CI: PostgreSQL), else SQLite; ``served`` serves it."""
    if CHROMIUM is None:
        pytest.skip(NO_CHROMIUM)
    backend = "postgresql" if os.environ.get("FLUXLEDGER_TEST_POSTGRES_URL") else "sqlite"
    with worlds.copy(backend, tmp_path, flow.reviewed) as w:
        yield w


def test_qa_sees_the_exceptions_first_and_approves(
    served: tuple[str, World], chromium: Any
) -> None:
    base, w = served
    for meaning, user in (("performed", "op.kim"), ("verified", "eng.ray"),
                          ("reviewed", "qa.nova")):  # fmt: skip
        w.ok(w.as_user(user, "record", "sign", "1", "--meaning", meaning))
    page = chromium.new_page(viewport={"width": 1024, "height": 768})
    sign_in_page(page, base, "qa.lin", PASSWORDS["qa.lin"], "/records")
    page.get_by_role("link", name="BR-000001").first.click()
    page.wait_for_url(base + "/records/1")
    exceptions = page.get_by_role("heading", name="Look at these first")
    record = page.get_by_role("heading", name="Planned against actual")
    finding = page.get_by_text("TMP, every sample: FAIL")
    assert exceptions.bounding_box()["y"] < finding.bounding_box()["y"]  # type: ignore[index]
    assert finding.bounding_box()["y"] < record.bounding_box()["y"]  # type: ignore[index]
    # The form says what is signed before signing: approval (preselected), by whom, the hash.
    approval = page.get_by_label("approved")
    assert approval.is_checked()
    sha = w.ok(w.cli("record", "show", "1", "--json")).json()["revisions"][0]["sha256"]
    form = page.locator("#sign")
    assert sha in form.inner_text() and "Lin Marchetti (qa.lin, qa)" in form.inner_text()
    page.fill("#password", PASSWORDS["qa.lin"])
    page.get_by_role("button", name="Sign with my password").click()
    page.wait_for_url(base + "/records/1/signatures/*")
    status = page.get_by_role("status")
    assert "Approved and locked" in status.inner_text()
    assert sha in page.locator(".record-receipt").inner_text()
    shown = w.ok(w.cli("record", "show", "1", "--json")).json()
    assert shown["record"]["run_status"] == "approved"
    assert shown["signatures"][-1]["login"] == "qa.lin"
    page.close()


def test_an_operator_cannot_reach_the_approval(served: tuple[str, World], chromium: Any) -> None:
    base, w = served
    page = chromium.new_page(viewport={"width": 390, "height": 844})
    sign_in_page(page, base, "op.kim", PASSWORDS["op.kim"], "/records/1")
    assert page.locator('input[name="meaning"][value="approved"]').count() == 0
    assert page.get_by_label("performed").is_visible()
    token = page.locator('#sign input[name="csrf"]').get_attribute("value")
    before = w.snapshot()
    answer = page.request.post(
        base + "/records/1/sign",
        form={"csrf": token or "", "meaning": "approved", "password": PASSWORDS["op.kim"]},
    )
    assert answer.status == 403
    assert "needs the role qa; op.kim is operator" in answer.text()
    assert w.snapshot() == before
    page.close()
