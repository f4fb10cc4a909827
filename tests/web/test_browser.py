"""The workspace in a real browser: Debian's Chromium driven by Playwright (launched by
``executable_path``; Playwright's own browser download is not used). Skipped, with the reason,
when no Chromium is installed; CI installs it first (.ci/run)."""

from __future__ import annotations

from typing import Any

from tests.web.conftest import CHROMIUM
from tests.world import PASSWORDS, World


def test_an_engineer_signs_in_and_sees_the_fleet_and_a_history(served: tuple[str, World]) -> None:
    from playwright.sync_api import sync_playwright

    base, w = served
    w.ready("QMB-0101")
    w.ok(w.cycle("QMB-0101", recovery_flow="160 mL/min"))
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=["--no-sandbox"])
        try:
            for width, height in ((1024, 768), (390, 844)):
                page = browser.new_page(viewport={"width": width, "height": height})
                page.goto(base + "/fleet")
                assert page.url.startswith(base + "/sign-in")
                # Keyboard only: the user ID has the focus, Tab to the password, Enter sends.
                page.wait_for_function("document.activeElement?.id === 'login'")
                page.keyboard.type("eng.ray")
                page.keyboard.press("Tab")
                page.keyboard.type(PASSWORDS["eng.ray"])
                page.keyboard.press("Enter")
                page.wait_for_url(base + "/fleet")
                assert page.get_by_role("link", name="QMB-0101").is_visible()
                page.get_by_role("link", name="QMB-0101").click()
                page.wait_for_load_state("networkidle")
                chart = page.locator("figure img")
                assert chart.evaluate("img => img.complete && img.naturalWidth > 800")
                assert page.get_by_text("Recovery per cycle").is_visible()
                # Large touch targets: the sign-out button is at least 44 px high.
                box = page.get_by_role("button", name="Sign out").bounding_box()
                assert box is not None and box["height"] >= 44
                page.close()
        finally:
            browser.close()


def test_five_wrong_passwords_lock_the_account_for_the_browser_and_the_cli(
    served: tuple[str, World], chromium: Any
) -> None:
    """Each wrong password is told beside the password box; the fifth locks the account (the
    test world's lockout setting is 5), after which even the right password is refused, here
    and on the CLI, until an administrator sets a new one."""
    base, w = served
    page = chromium.new_page(viewport={"width": 1024, "height": 768})
    for attempt in range(1, 6):
        page.goto(base + "/sign-in")
        page.fill("#login", "op.kim")
        page.fill("#password", f"not-it-{attempt}")
        page.click("button.primary")
        alert = page.locator("#password-error, #login-error")
        alert.wait_for(timeout=10_000)
        assert "password" in alert.inner_text().lower() or "locked" in alert.inner_text()
    page.goto(base + "/sign-in")
    page.fill("#login", "op.kim")
    page.fill("#password", PASSWORDS["op.kim"])
    page.click("button.primary")
    refused = page.get_by_role("alert")
    refused.wait_for(timeout=10_000)
    assert "locked" in refused.inner_text()
    assert page.url.startswith(base + "/sign-in")
    cli = w.as_user("op.kim", "module", "add", "QMB-0999", "--type", "HF-750")
    assert cli.code == 3 and "locked" in cli.stderr + cli.stdout
    page.close()


def test_wrong_password_shows_the_reason_beside_the_field(served: tuple[str, World]) -> None:
    from playwright.sync_api import sync_playwright

    base, _ = served
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=["--no-sandbox"])
        try:
            page = browser.new_page(viewport={"width": 1024, "height": 768})
            page.goto(base + "/sign-in")
            page.fill("#login", "op.kim")
            page.fill("#password", "not-it")
            page.click("button.primary")
            alert = page.get_by_role("alert")
            alert.wait_for(timeout=10_000)
            assert alert.is_visible() and "password" in alert.inner_text().lower()
        finally:
            browser.close()
