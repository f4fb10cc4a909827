"""A cleaning against its validated procedure (DEVELOPERS.md): each departure is named.

The procedure's ranges below are invented for the test; real ones come from the site's
validated cleaning SOP.
"""

from __future__ import annotations

import dataclasses

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.rules.cleaning import Done, Procedure, deviations

PROC = Procedure(
    code="CP-NAOH-05",
    agent="sodium hydroxide",
    concentration_min=450.0,  # mol/m³ = 0.45 mol/L
    concentration_max=550.0,
    concentration_unit="mol/m**3",
    temperature_min_k=293.15,
    temperature_max_k=303.15,
    contact_time_min_s=3600.0,
    rinse_ph_min=5.0,
    rinse_ph_max=8.0,
    rinse_conductivity_max_s_m=2e-4,  # 2 µS/cm
)
GOOD = Done("Sodium Hydroxide", 500.0, "mol/m**3", 298.15, 3600.0, 7.1, 1.5e-4)


def test_a_cleaning_inside_every_range_conforms() -> None:
    assert deviations(GOOD, PROC) == []  # the agent's case does not matter


@pytest.mark.parametrize(
    ("change", "words"),
    [({"agent": "citric acid"}, "agent 'citric acid' is not the procedure's"),
     ({"concentration": 400.0}, "concentration 0.4 mol/L is outside 0.45 mol/L–0.55 mol/L"),
     ({"concentration_unit": "kg/m**3"}, "not given in the procedure's kind of unit (mol/L)"),
     ({"temperature_k": 313.15}, "temperature 40.0 °C is outside 20.0 °C–30.0 °C"),
     ({"contact_time_s": 2700.0}, "contact time 45 min is shorter than the procedure's 60 min"),
     ({"rinse_ph": 9.2}, "final rinse pH 9.2 is outside 5–8"),
     ({"rinse_ph": None}, "no final rinse pH recorded"),
     ({"rinse_conductivity_s_m": 3e-4}, "final rinse conductivity 3 µS/cm is above 2 µS/cm"),
     ({"rinse_conductivity_s_m": None}, "no final rinse conductivity recorded")],
)  # fmt: skip
def test_each_departure_is_named(change: dict[str, object], words: str) -> None:
    found = deviations(dataclasses.replace(GOOD, **change), PROC)  # type: ignore[arg-type]
    assert len(found) == 1 and words in found[0], found


def test_the_range_edges_are_inside() -> None:
    edge = dataclasses.replace(GOOD, concentration=550.0, temperature_k=293.15,
                               contact_time_s=3600.0, rinse_ph=8.0,
                               rinse_conductivity_s_m=2e-4)  # fmt: skip
    assert deviations(edge, PROC) == []


def test_a_procedure_without_rinse_endpoints_asks_for_none() -> None:
    loose = dataclasses.replace(PROC, rinse_ph_min=None, rinse_ph_max=None,
                                rinse_conductivity_max_s_m=None)  # fmt: skip
    assert deviations(dataclasses.replace(GOOD, rinse_ph=None, rinse_conductivity_s_m=None),
                      loose) == []  # fmt: skip


@given(
    st.floats(min_value=100.0, max_value=1000.0),
    st.floats(min_value=274.0, max_value=372.0),
    st.floats(min_value=60.0, max_value=14_400.0),
)
def test_conforms_exactly_when_every_value_is_in_range(c: float, t: float, s: float) -> None:
    done = dataclasses.replace(GOOD, concentration=c, temperature_k=t, contact_time_s=s)
    inside = 450.0 <= c <= 550.0 and 293.15 <= t <= 303.15 and s >= 3600.0
    assert (deviations(done, PROC) == []) is inside
