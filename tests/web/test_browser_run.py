"""A run in a real browser (Debian's Chromium through Playwright): the operator starts it,
signs its first step, uploads its skid log with the file input and sees its acceptance
checks on the page. Skipped, with the reason, without Chromium (tests/web/conftest.py)."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

from tests.cli.test_runs import MAPPING
from tests.records.flow import planned
from tests.web.conftest import sign_in_page
from tests.world import PASSWORDS, World


def test_an_operator_starts_a_run_signs_a_step_and_uploads_its_log(
    served: tuple[str, World], chromium: Any, tmp_path: Path
) -> None:
    from ledger.cli.demo_log import write_log

    base, w = served
    run = planned(w, "QMB-0142", "QB117-26-051")
    w.wide_log_tolerance()
    log = write_log(tmp_path / "skid.csv", datetime.now(UTC) - timedelta(hours=2))
    page = chromium.new_page(viewport={"width": 1024, "height": 768})
    try:
        sign_in_page(page, base, "op.kim", PASSWORDS["op.kim"], target="/runs")
        page.get_by_role("link", name=f"Run {run}").click()
        page.get_by_role("button", name="Start the run").click()
        page.wait_for_url(f"{base}/runs/{run}?done=started")
        assert page.get_by_text("The run is started").is_visible()

        page.fill("#step-1-value-permeate-ph", "7.4")
        page.fill("#step-1-value-permeate-conductivity", "15.2 mS/cm")
        page.fill("#step-1-password", PASSWORDS["op.kim"])
        page.get_by_role("button", name="Sign step 1 as performed").click()
        page.wait_for_url(f"{base}/runs/{run}?done=signed#step-1")
        step = page.locator("#step-1")
        assert "performed by Kim Varga (op.kim)" in step.inner_text()
        assert "15.2 mS/cm" in step.inner_text()

        page.set_input_files("#log-file", str(log))
        page.set_input_files("#log-mapping", str(MAPPING))
        page.get_by_role("button", name="Upload and check").click()
        page.wait_for_url(f"{base}/runs/{run}?done=imported#log")
        checks = page.locator("#checks table")
        checks.wait_for()
        text = checks.inner_text()
        # The demo export's 24 s TMP spike fails the TMP check; the feed flow passes.
        tmp_row = checks.locator("tr", has_text="TMP, every sample")
        assert "FAIL" in tmp_row.inner_text() and "longest 24 s" in tmp_row.inner_text()
        assert "Feed flow for the target wall shear" in text and "PASS" in text
        assert page.locator("#log").get_by_text("skid.csv").first.is_visible()
        shown = w.ok(w.cli("run", "checks", str(run), "--json")).json()["acceptance_checks"]
        assert next(c for c in shown if c["name"] == "tmp")["verdict"] == "FAIL"
        # Large touch targets: the next step's button is at least 44 px high.
        box = page.get_by_role("button", name="Sign step 2 as performed").bounding_box()
        assert box is not None and box["height"] >= 44
    finally:
        page.close()
