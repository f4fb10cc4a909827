"""The inner lumen area N·π·D·L of a hollow-fiber module: linear in each of fibers, lumen
diameter and length (hypothesis), a hand-computed worked example, and its guards."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import DomainError
from ledger.science.hydraulics import lumen_area

FIBERS = st.integers(min_value=1, max_value=20_000)
DIAMETER = st.floats(min_value=1e-4, max_value=5e-3)  # m
LENGTH = st.floats(min_value=0.01, max_value=2.0)  # m
FACTOR = st.integers(min_value=2, max_value=50)


@given(FIBERS, DIAMETER, LENGTH, FACTOR)
def test_linear_in_each_dimension(n: int, d: float, length: float, k: int) -> None:
    a = lumen_area(n, d, length)
    assert lumen_area(n * k, d, length) == pytest.approx(k * a, rel=1e-12)
    assert lumen_area(n, d * k, length) == pytest.approx(k * a, rel=1e-12)
    assert lumen_area(n, d, length * k) == pytest.approx(k * a, rel=1e-12)


@given(FIBERS, DIAMETER, LENGTH)
def test_wall_area_of_the_lumen_volume(n: int, d: float, length: float) -> None:
    # Independent: a cylinder's wall area is 4·V/D with V = π·D²/4·L (any geometry text).
    volume = n * math.pi * d**2 / 4 * length
    assert lumen_area(n, d, length) == pytest.approx(4 * volume / d, rel=1e-12)


def test_worked_example() -> None:
    # By hand: 120 fibers × 3.14159265 × 0.0005 m × 0.30 m = 0.056548668 m² (565.5 cm²); the
    # invented demo type states 565 cm², the area at the lumen rounded down.
    assert lumen_area(120, 0.5e-3, 0.30) == pytest.approx(0.056548668, rel=1e-8)


@pytest.mark.parametrize(
    ("args", "field"),
    [((0, 0.5e-3, 0.3), "fibers"), ((120, 0.0, 0.3), "lumen_id"), ((120, 0.5e-3, -1.0), "length"),
     ((120, math.nan, 0.3), "lumen_id"), ((1.5, 0.5e-3, 0.3), "fibers")],
)  # fmt: skip
def test_guards_name_the_parameter(args: tuple[float, float, float], field: str) -> None:
    with pytest.raises(DomainError) as err:
        lumen_area(*args)  # type: ignore[arg-type]
    assert err.value.field == field
