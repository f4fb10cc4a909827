"""An operator records a three-point water-flux test in Debian's Chromium: the units offered
while typing (ledger/web/static/units.js), the values typed as at the bench ("12 psi",
"228 mL/min"), and the NWP and recovery on the result page equal to the stored test.
Skipped, with the reason, when no Chromium is installed."""

from __future__ import annotations

import re
from typing import Any

import pytest
from sqlmodel import Session, select

from ledger.store.tables import Module, WaterFluxTest
from tests.web.conftest import sign_in_page
from tests.world import PASSWORDS, World

SERIAL = "QMB-0401"
ROWS = (
    ("12 psi", "9 psi", "228 mL/min"),
    ("15 psi", "11 psi", "290 mL/min"),
    ("18 psi", "13 psi", "350 mL/min"),
)


def _last_test(w: World) -> WaterFluxTest:
    with Session(w.engine()) as s:
        module = s.exec(select(Module).where(Module.serial == SERIAL)).one()
        test = s.exec(
            select(WaterFluxTest)
            .where(WaterFluxTest.module_id == module.id)
            .order_by(WaterFluxTest.id.desc())  # type: ignore[union-attr]
        ).first()
        assert test is not None
        s.expunge(test)
        return test


def test_an_operator_records_a_three_point_test(served: tuple[str, World], chromium: Any) -> None:
    base, w = served
    w.ready(SERIAL)  # registered, baseline and integrity test: available
    page = chromium.new_page(viewport={"width": 390, "height": 844})
    target = f"/modules/{SERIAL}"
    sign_in_page(page, base, "op.kim", PASSWORDS["op.kim"], target)
    page.get_by_role("link", name="Record a water-flux test").click()
    page.wait_for_url(base + target + "/water")
    page.select_option("#stage", "pre-use")

    # Typing "12 " offers the number with each pressure unit of the list.
    page.click("#feed_1")
    page.keyboard.type("12 ")
    offered = page.eval_on_selector(
        "#units-pressure", "l => Array.from(l.options).map(o => o.value)"
    )
    assert offered[:2] == ["12 psi", "12 bar"] and "12 kPa" in offered
    page.keyboard.type("psi")
    for row, (feed, retentate, flow) in enumerate(ROWS, start=1):
        if row > 1:
            page.fill(f"#feed_{row}", feed)
        page.fill(f"#retentate_{row}", retentate)
        page.fill(f"#flow_{row}", flow)
    page.fill("#temperature", "22 degC")
    page.get_by_role("button", name="Record the water-flux test").click()
    page.wait_for_selector("#result-nwp")

    test = _last_test(w)
    assert len(test.points) == 3 and test.stage == "pre_use" and test.recovery is not None
    nwp = page.inner_text("#result-nwp dd")
    found = re.fullmatch(r"([0-9.]+) LMH/bar", nwp.strip())
    # 1 m/(s·Pa) = 1000 L/m³ · 3600 s/h · 1e5 Pa/bar = 3.6e11 LMH/bar; shown to 4 digits.
    assert found and float(found.group(1)) == pytest.approx(test.nwp_m_s_pa * 3.6e11, rel=5e-4)
    recovery = page.inner_text("#result-recovery dd")
    assert recovery == f"{100 * test.recovery:.1f} %"
    assert page.get_by_text("Module status now").is_visible()
    # The whole result fits the phone's width (no sideways scrolling).
    assert page.evaluate("document.documentElement.scrollWidth") <= 390
    page.close()
