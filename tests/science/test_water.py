"""Properties of the water functions: range, monotonicity."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import DomainError
from ledger.science import water

liquid = st.floats(min_value=273.15, max_value=373.15)


@given(liquid, liquid)
def test_viscosity_falls_monotonically_with_temperature(t1: float, t2: float) -> None:
    lo, hi = sorted((t1, t2))
    if hi - lo > 1e-9:
        assert water.viscosity(lo) > water.viscosity(hi)


@given(liquid)
def test_surface_tension_falls_with_temperature(t: float) -> None:
    if t < 373.0:
        assert water.surface_tension(t) > water.surface_tension(t + 0.1)


@pytest.mark.parametrize("bad", [273.0, 374.0, float("nan"), float("inf"), -5.0])
def test_outside_liquid_range_is_refused(bad: float) -> None:
    with pytest.raises(DomainError) as err:
        water.viscosity(bad)
    assert err.value.field == "temperature"
    assert "273.15 K to 373.15 K" in str(err.value) or "finite" in str(err.value)
