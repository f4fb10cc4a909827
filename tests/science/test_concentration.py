"""Laws of the concentration and diafiltration functions."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import DomainError
from ledger.science import concentration as conc

sieving = st.floats(min_value=0.01, max_value=1.0)


@given(st.floats(min_value=1e-6, max_value=0.999999), sieving)
def test_diavolumes_and_washout_are_inverses(removal: float, s: float) -> None:
    n = conc.diavolumes_for_removal(removal, s)
    assert 1.0 - conc.washout_remaining(n, s) == pytest.approx(removal, rel=1e-9)


@given(st.floats(min_value=0, max_value=30), sieving)
def test_washout_then_diavolumes(n: float, s: float) -> None:
    remaining = conc.washout_remaining(n, s)
    # Only where 1 - remaining is well conditioned in floating point: below 1e-8 remaining,
    # the subtraction itself loses the digits (found by hypothesis at n = 29, s = 1).
    if 1e-8 < remaining < 1.0 - 1e-12:
        assert conc.diavolumes_for_removal(1.0 - remaining, s) == pytest.approx(n, rel=1e-6)


@given(st.floats(min_value=1, max_value=100), st.floats(min_value=0, max_value=1))
def test_mass_balance_of_concentration(cf: float, r: float) -> None:
    # mass kept = concentration ratio x volume ratio
    assert conc.concentration_yield(cf, r) == pytest.approx(conc.concentrated_ratio(cf, r) / cf)


@given(st.floats(min_value=0.5, max_value=0.999999), st.floats(min_value=1.2, max_value=5), sieving)
def test_steps_for_removal_is_the_fewest(removal: float, d: float, s: float) -> None:
    n = conc.steps_for_removal(removal, d, s)
    assert 1 - conc.discontinuous_diafiltration(d, n, s).remaining >= removal - 1e-9
    if n > 1:
        assert 1 - conc.discontinuous_diafiltration(d, n - 1, s).remaining < removal


def test_loading() -> None:
    assert conc.volumetric_loading(2e-3, 0.05) == pytest.approx(0.04)  # 40 L/m²
    assert conc.mass_loading(0.2e-3, 0.05) == pytest.approx(4e-3)  # 4 g/m²


@pytest.mark.parametrize(
    ("call", "field"),
    [
        (lambda: conc.concentration_factor(1.0, 2.0), "final_volume"),
        (lambda: conc.concentrated_ratio(0.5), "factor"),
        (lambda: conc.concentrated_ratio(2.0, 1.5), "rejection"),
        (lambda: conc.diavolumes_for_removal(1.0), "removal"),
        (lambda: conc.diavolumes_for_removal(0.9, 0.0), "sieving"),
        (lambda: conc.discontinuous_diafiltration(1.0, 3), "dilution_factor"),
        (lambda: conc.discontinuous_diafiltration(2.0, 2.5), "steps"),  # type: ignore[arg-type]
        (lambda: conc.buffer_volume(-1, 1.0), "diavolumes"),
    ],
)
def test_bad_inputs_name_the_parameter(call: object, field: str) -> None:
    with pytest.raises(DomainError) as err:
        call()  # type: ignore[operator]
    assert err.value.field == field
