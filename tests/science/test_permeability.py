"""Laws of the permeability functions."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import DomainError
from ledger.science import permeability as perm

liquid = st.floats(min_value=275.0, max_value=370.0)


@given(liquid, liquid)
def test_correction_there_and_back_is_identity(t: float, t_ref: float) -> None:
    there = perm.correction_factor(t, t_ref)
    back = perm.correction_factor(t_ref, t)
    assert there * back == pytest.approx(1.0, rel=1e-12)


@given(liquid, liquid, st.floats(min_value=500, max_value=5000))
def test_exponential_correction_there_and_back_is_identity(
    t: float, t_ref: float, u: float
) -> None:
    there = perm.correction_factor(t, t_ref, "exponential", u)
    assert there * perm.correction_factor(t_ref, t, "exponential", u) == pytest.approx(1.0)


@given(st.floats(min_value=275.0, max_value=292.0))
def test_cold_water_is_corrected_upwards(t: float) -> None:
    assert perm.correction_factor(t) > 1.0


def test_tmp_and_channel_drop_definitions() -> None:
    assert perm.transmembrane_pressure(2.0e5, 1.0e5, 0.2e5) == pytest.approx(1.3e5)
    assert perm.channel_pressure_drop(2.0e5, 1.0e5) == pytest.approx(1.0e5)


@given(st.floats(min_value=1e-12, max_value=1e-8), st.floats(min_value=1e4, max_value=3e5))
def test_nwp_is_exact_for_noise_free_points(lp: float, tmp0: float) -> None:
    tmps = [tmp0, 2 * tmp0, 3 * tmp0]
    res = perm.nwp_from_points([lp * p for p in tmps], tmps, [293.15])
    assert res.nwp == pytest.approx(lp, rel=1e-9)
    assert abs(res.intercept_ratio) < 1e-9


def test_recovery_and_resistances() -> None:
    base = 900 / 3.6e11
    r = perm.resistances(base, after_use_nwp=base / 4, after_clean_nwp=base * 0.9)
    assert perm.recovery(base * 0.9, base) == pytest.approx(0.9)
    assert r.fouling == pytest.approx(3 * r.membrane)
    assert r.residual == pytest.approx(r.membrane / 9)
    assert r.removed_fraction == pytest.approx(1 - (1 / 9) / 3)


@pytest.mark.parametrize(
    ("call", "field"),
    [
        (lambda: perm.flux(-1e-6, 0.1), "permeate_flow"),
        (lambda: perm.flux(1e-6, 0.0), "area"),
        (lambda: perm.permeability(1e-5, -10.0), "tmp"),
        (lambda: perm.correction_factor(293.15, 400.0), "reference_temperature"),
        (lambda: perm.correction_factor(293.15, 298.15, "exponential"), "u"),
        (lambda: perm.nwp_from_points([1e-5, 2e-5], [1e4, 1e4], [293.15]), "tmp"),
    ],
)
def test_bad_inputs_name_the_parameter(call: object, field: str) -> None:
    with pytest.raises(DomainError) as err:
        call()  # type: ignore[operator]
    assert err.value.field == field
