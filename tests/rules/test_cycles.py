"""The cleaning-cycle rule (``ledger.rules.cycles``): each way a step departs from its procedure
step, in words, and the edges (a value exactly at a limit keeps it, as every limit of the
project does; that convention is common practice, not a published rule).

Ranges here are invented test values in SI units.
"""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.rules.cycles import Range, StepDone, StepSpec, departures

CAUSTIC = StepSpec(
    name="caustic",
    agent="sodium hydroxide",
    concentration=Range(450.0, 550.0),  # mol/m³ (0.45-0.55 mol/L)
    concentration_unit="mol/m**3",
    temperature_k=Range(313.15, 323.15),  # 40-50 °C
    contact_time_min_s=3600.0,
    flow_m3_s=Range(200e-6 / 60, 400e-6 / 60),  # 200-400 mL/min
    tmp_pa=Range(0.0, 1e5),
)
GOOD = StepDone(concentration=500.0, temperature_k=318.15, contact_time_s=3600.0,
                flow_m3_s=300e-6 / 60, tmp_pa=0.5e5)  # fmt: skip


def test_a_step_inside_every_range_conforms() -> None:
    assert departures(2, CAUSTIC, GOOD) == []


@pytest.mark.parametrize(
    ("change", "words"),
    [
        ({"concentration": 600.0}, "concentration 0.6 mol/L outside 0.45 mol/L – 0.55 mol/L"),
        ({"temperature_k": 303.15}, "temperature 30 °C outside 40 °C – 50 °C"),
        ({"contact_time_s": 3000.0}, "contact time 50 min shorter than the 60 min required"),
        ({"flow_m3_s": 450e-6 / 60}, "flow 450 mL/min outside 200 mL/min – 400 mL/min"),
        ({"tmp_pa": 1.2e5}, "TMP 1.2 bar outside 0 bar – 1 bar"),
    ],
)
def test_each_departure_is_named_with_its_values(change: dict[str, float], words: str) -> None:
    from dataclasses import replace

    found = departures(2, CAUSTIC, replace(GOOD, **change))
    assert found == [f"step 2 (caustic): {words}"]


def test_a_value_exactly_at_a_limit_keeps_it() -> None:
    edge = StepDone(concentration=550.0, temperature_k=313.15, contact_time_s=3600.0,
                    flow_m3_s=400e-6 / 60, tmp_pa=1e5)  # fmt: skip
    assert departures(2, CAUSTIC, edge) == []


def test_two_departures_are_both_listed() -> None:
    from dataclasses import replace

    found = departures(2, CAUSTIC, replace(GOOD, concentration=300.0, contact_time_s=60.0))
    assert len(found) == 2


@pytest.mark.parametrize(
    ("endpoint", "limit", "value", "words"),
    [
        ("conductivity", Range(None, 2e-4), 3.4e-4, "conductivity 3.4 µS/cm above 2 µS/cm"),
        ("toc", Range(None, 500e-6), 800e-6, "TOC 800 µg/L above 500 µg/L"),
        ("volume", Range(5e-3, None), 4e-3, "volume 4 L below the 5 L required"),
        ("ph", Range(6.0, 8.0), 9.1, "pH 9.1 outside 6 – 8"),
    ],
)
def test_an_endpoint_not_reached_says_so(
    endpoint: str, limit: Range, value: float, words: str
) -> None:
    spec = StepSpec(name="rinse", agent="water", endpoint=endpoint, endpoint_range=limit)
    assert departures(5, spec, StepDone(endpoint_value=value)) == [
        f"step 5 (rinse): endpoint not reached: {words}"
    ]
    # and reached on the right side of the limit
    ok = (limit.high if limit.high is not None else limit.low) or 0.0
    assert departures(5, spec, StepDone(endpoint_value=ok)) == []


def test_a_missing_value_the_spec_asks_for_is_a_bug_not_a_pass() -> None:
    with pytest.raises(ValueError, match="temperature missing"):
        departures(2, CAUSTIC, StepDone(concentration=500.0))


def test_needs_lists_what_a_record_of_the_step_must_give() -> None:
    spec = StepSpec(name="caustic", agent="sodium hydroxide", needs_solution=True,
                    concentration=Range(1, 2), temperature_k=Range(300, 310),
                    endpoint="ph", endpoint_range=Range(6, 8))  # fmt: skip
    assert spec.needs() == ("solution", "concentration", "temperature", "endpoint")


@given(st.floats(min_value=0.0, max_value=2000.0, allow_nan=False))
def test_a_concentration_departs_exactly_when_it_is_outside_its_range(c: float) -> None:
    from dataclasses import replace

    found = departures(2, CAUSTIC, replace(GOOD, concentration=c))
    inside = 450.0 * (1 - 1e-9) <= c <= 550.0 * (1 + 1e-9)
    assert (found == []) == inside or abs(c - 450.0) < 1e-6 or abs(c - 550.0) < 1e-6
