"""Laws of the hydraulics functions."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import DomainError
from ledger.science import hydraulics


@given(
    st.floats(min_value=100, max_value=20000),
    st.integers(min_value=1, max_value=5000),
    st.floats(min_value=0.1e-3, max_value=2e-3),
)
def test_shear_and_feed_flow_are_inverses(gamma: float, fibers: int, d: float) -> None:
    h = hydraulics.module_hydraulics(fibers, d, target_shear_1_s=gamma)
    assert h.wall_shear_rate == pytest.approx(gamma, rel=1e-12)
    back = hydraulics.module_hydraulics(fibers, d, feed_flow_m3_s=h.feed_flow)
    assert back.wall_shear_rate == pytest.approx(gamma, rel=1e-12)


def test_turbulent_flow_is_flagged() -> None:
    h = hydraulics.module_hydraulics(1, 2e-3, feed_flow_m3_s=5e-6)  # about 3200
    assert h.reynolds > hydraulics.LAMINAR_LIMIT
    assert not h.laminar


def test_pressure_drop_only_with_length() -> None:
    assert hydraulics.module_hydraulics(10, 1e-3, feed_flow_m3_s=1e-6).pressure_drop is None
    assert hydraulics.module_hydraulics(10, 1e-3, feed_flow_m3_s=1e-6, length_m=0.3).pressure_drop


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"fibers": 0, "lumen_diameter_m": 1e-3, "feed_flow_m3_s": 1e-6}, "fibers"),
        ({"fibers": 2.5, "lumen_diameter_m": 1e-3, "feed_flow_m3_s": 1e-6}, "fibers"),
        ({"fibers": 10, "lumen_diameter_m": -1e-3, "feed_flow_m3_s": 1e-6}, "lumen_id"),
        ({"fibers": 10, "lumen_diameter_m": 1e-3}, "feed_flow"),
        (
            {"fibers": 10, "lumen_diameter_m": 1e-3, "feed_flow_m3_s": 1e-6, "temperature_k": 400},
            "temperature",
        ),
    ],
)
def test_bad_inputs_name_the_parameter(kwargs: dict[str, float], field: str) -> None:
    with pytest.raises(DomainError) as err:
        hydraulics.module_hydraulics(**kwargs)  # type: ignore[arg-type]
    assert err.value.field == field
