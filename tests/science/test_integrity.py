"""Behaviour, properties and input guards of ledger.science.integrity."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from numpy.typing import NDArray

from ledger.errors import DomainError
from ledger.science import integrity as ig


def _linear_hold(
    rate_pa_s: float, n: int = 11, dt: float = 30.0, p0: float = 2.0e5
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    t = np.asarray(np.arange(n) * dt, dtype=np.float64)
    return t, np.asarray(p0 - rate_pa_s * t, dtype=np.float64)


# --- decay rate -------------------------------------------------------------------------------


def test_decay_rate_of_exact_line_is_positive_for_falling_pressure() -> None:
    t, p = _linear_hold(4.0)
    fit = ig.decay_rate(t, p)
    assert fit.rate_pa_s == pytest.approx(4.0, rel=1e-12)
    assert fit.r_squared == pytest.approx(1.0, abs=1e-12)
    assert fit.n == 11
    assert fit.duration_s == pytest.approx(300.0)
    assert fit.start_pressure_pa == pytest.approx(2.0e5)
    assert fit.end_pressure_pa == pytest.approx(2.0e5 - 4.0 * 300.0)


def test_decay_rate_is_negative_when_pressure_rises() -> None:
    t, p = _linear_hold(-0.5)
    assert ig.decay_rate(t, p).rate_pa_s == pytest.approx(-0.5, rel=1e-12)


def test_decay_rate_two_readings_gives_nan_standard_error() -> None:
    fit = ig.decay_rate([0.0, 600.0], [2.0e5, 1.97e5])
    assert fit.rate_pa_s == pytest.approx(3000.0 / 600.0)
    assert math.isnan(fit.rate_se_pa_s)


@given(
    offset=st.floats(min_value=-1.0e5, max_value=1.0e6, allow_nan=False),
    rate=st.floats(min_value=0.01, max_value=500.0),
    seed=st.integers(min_value=0, max_value=2**32 - 1),
)
def test_decay_rate_is_invariant_to_a_time_offset(offset: float, rate: float, seed: int) -> None:
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0.0, 900.0, 15))
    t = np.unique(t)
    p = 2.5e5 - rate * t + rng.normal(0.0, 20.0, t.size)
    base = ig.decay_rate(t, p)
    shifted = ig.decay_rate(t + offset, p)
    assert shifted.rate_pa_s == pytest.approx(base.rate_pa_s, rel=1e-7, abs=1e-9)
    assert shifted.r_squared == pytest.approx(base.r_squared, rel=1e-7, abs=1e-9)
    assert shifted.duration_s == pytest.approx(base.duration_s, rel=1e-9, abs=1e-6)


# --- gas flow and judgement -------------------------------------------------------------------


def test_gas_flow_scales_with_volume_and_rate_and_inversely_with_atmosphere() -> None:
    q = ig.gas_flow_from_decay(10.0, 1.0e-3)
    assert ig.gas_flow_from_decay(20.0, 1.0e-3) == pytest.approx(2.0 * q)
    assert ig.gas_flow_from_decay(10.0, 3.0e-3) == pytest.approx(3.0 * q)
    assert ig.gas_flow_from_decay(10.0, 1.0e-3, 2 * 101325.0) == pytest.approx(q / 2.0)
    assert ig.gas_flow_from_decay(0.0, 1.0e-3) == 0.0


def test_judge_decay_passes_at_and_below_limit_and_fails_above() -> None:
    at = ig.judge_decay(5.0, 5.0)
    assert at.passed and at.margin == 0.0 and at.fraction_of_limit == 1.0
    below = ig.judge_decay(2.0, 5.0)
    assert below.passed and below.margin == pytest.approx(3.0)
    above = ig.judge_decay(6.0, 5.0)
    assert not above.passed
    assert above.margin == pytest.approx(-1.0)
    assert above.fraction_of_limit == pytest.approx(1.2)


def test_judge_decay_works_for_gas_flows_in_m3_s() -> None:
    assert ig.judge_decay(1.0e-9, 2.0e-9).passed
    assert not ig.judge_decay(3.0e-9, 2.0e-9).passed


# --- air viscosity ----------------------------------------------------------------------------


def test_air_viscosity_equals_reference_value_at_reference_temperature() -> None:
    # Sutherland's law reduces to µ0 at T0 by construction (White, Viscous Fluid Flow).
    assert ig.air_viscosity(273.15) == pytest.approx(1.716e-5, rel=1e-12)


def test_air_viscosity_rises_with_temperature() -> None:
    temps = np.linspace(200.0, 400.0, 30)
    mus = np.array([ig.air_viscosity(float(t)) for t in temps])
    assert np.all(np.diff(mus) > 0.0)


@pytest.mark.parametrize("t", [100.0, 199.9, 400.1, 1000.0, math.nan])
def test_air_viscosity_refuses_temperatures_outside_validity(t: float) -> None:
    with pytest.raises(DomainError) as err:
        ig.air_viscosity(t)
    assert err.value.field == "temperature_k"


# --- ALCR -------------------------------------------------------------------------------------


def test_alcr_reduces_to_pressure_ratio_in_incompressible_limit() -> None:
    # With equal viscosities and TP << P_atm the gas hardly expands: ALCR -> TP/TMP.
    tp, tmp = 10.0, 5.0
    alcr = ig.air_liquid_conversion_ratio(tp, 0.0, tmp, 1.8e-5, air_viscosity_pa_s=1.8e-5)
    assert alcr == pytest.approx(tp / tmp, rel=1e-4)


def test_alcr_from_temperature_matches_explicit_air_viscosity() -> None:
    mu_a = ig.air_viscosity(293.15)
    by_mu = ig.air_liquid_conversion_ratio(2.0e5, 0.0, 1.0e5, 1.0e-3, air_viscosity_pa_s=mu_a)
    by_t = ig.air_liquid_conversion_ratio(2.0e5, 0.0, 1.0e5, 1.0e-3, temperature_k=293.15)
    assert by_t == pytest.approx(by_mu, rel=1e-15)


def test_alcr_falls_with_back_pressure_and_rises_with_test_pressure() -> None:
    def alcr(tp: float, bp: float) -> float:
        return ig.air_liquid_conversion_ratio(tp, bp, 1.0e5, 1.0e-3, air_viscosity_pa_s=1.8e-5)

    assert alcr(2.0e5, 0.5e5) < alcr(2.0e5, 0.0)
    assert alcr(3.0e5, 0.0) > alcr(2.0e5, 0.0)


def test_alcr_needs_exactly_one_of_air_viscosity_or_temperature() -> None:
    with pytest.raises(DomainError) as none_given:
        ig.air_liquid_conversion_ratio(2.0e5, 0.0, 1.0e5, 1.0e-3)
    assert none_given.value.field == "air_viscosity_pa_s"
    with pytest.raises(DomainError) as both_given:
        ig.air_liquid_conversion_ratio(
            2.0e5, 0.0, 1.0e5, 1.0e-3, air_viscosity_pa_s=1.8e-5, temperature_k=293.15
        )
    assert both_given.value.field == "air_viscosity_pa_s"


def test_alcr_refuses_back_pressure_at_or_above_test_pressure() -> None:
    with pytest.raises(DomainError) as err:
        ig.air_liquid_conversion_ratio(1.0e5, 1.0e5, 1.0e5, 1.0e-3, air_viscosity_pa_s=1.8e-5)
    assert err.value.field == "back_pressure_pa"


@pytest.mark.parametrize(
    ("field", "kwargs"),
    [
        ("test_pressure_pa", {"test_pressure_pa": -1.0}),
        ("back_pressure_pa", {"back_pressure_pa": -1.0}),
        ("operating_tmp_pa", {"operating_tmp_pa": 0.0}),
        ("water_viscosity_pa_s", {"water_viscosity_pa_s": math.nan}),
        ("air_viscosity_pa_s", {"air_viscosity_pa_s": -1.8e-5}),
        ("atmospheric_pressure_pa", {"atmospheric_pressure_pa": 0.0}),
    ],
)
def test_alcr_guards_name_the_parameter(field: str, kwargs: dict[str, float]) -> None:
    args: dict[str, float] = {
        "test_pressure_pa": 2.0e5,
        "back_pressure_pa": 0.0,
        "operating_tmp_pa": 1.0e5,
        "water_viscosity_pa_s": 1.0e-3,
        "air_viscosity_pa_s": 1.8e-5,
    }
    args.update(kwargs)
    with pytest.raises(DomainError) as err:
        ig.air_liquid_conversion_ratio(**args)
    assert err.value.field == field


# --- LRV --------------------------------------------------------------------------------------


@given(
    qp=st.floats(min_value=1e-7, max_value=1.0),
    alcr=st.floats(min_value=1.0, max_value=1e4),
    q_air=st.floats(min_value=1e-12, max_value=1e-3),
    vcf=st.floats(min_value=1.0, max_value=50.0),
)
def test_lrv_rises_by_one_when_air_flow_falls_tenfold(
    qp: float, alcr: float, q_air: float, vcf: float
) -> None:
    lrv = ig.log_removal_value(qp, alcr, q_air, vcf)
    assert ig.log_removal_value(qp, alcr, q_air / 10.0, vcf) - lrv == pytest.approx(1.0, abs=1e-9)


def test_lrv_falls_by_log10_vcf() -> None:
    lrv1 = ig.log_removal_value(1e-3, 200.0, 1e-8)
    lrv20 = ig.log_removal_value(1e-3, 200.0, 1e-8, 20.0)
    assert lrv1 - lrv20 == pytest.approx(math.log10(20.0))


@pytest.mark.parametrize(
    ("field", "args"),
    [
        ("filtrate_flow_m3_s", (0.0, 200.0, 1e-8, 1.0)),
        ("alcr", (1e-3, -1.0, 1e-8, 1.0)),
        ("air_flow_m3_s", (1e-3, 200.0, 0.0, 1.0)),
        ("air_flow_m3_s", (1e-3, 200.0, math.nan, 1.0)),
        ("volumetric_concentration_factor", (1e-3, 200.0, 1e-8, 0.5)),
    ],
)
def test_lrv_guards_name_the_parameter(field: str, args: tuple[float, ...]) -> None:
    with pytest.raises(DomainError) as err:
        ig.log_removal_value(*args)
    assert err.value.field == field


# --- bubble point -----------------------------------------------------------------------------


@given(
    d=st.floats(min_value=1e-8, max_value=1e-4),
    gamma=st.floats(min_value=0.01, max_value=0.08),
    theta=st.floats(min_value=0.0, max_value=1.4),
)
def test_bubble_point_round_trip(d: float, gamma: float, theta: float) -> None:
    p = ig.bubble_point_pressure(d, gamma, theta)
    assert ig.pore_diameter_from_bubble_point(p, gamma, theta) == pytest.approx(d, rel=1e-12)


def test_bubble_point_falls_with_contact_angle_and_pore_size() -> None:
    wet = ig.bubble_point_pressure(0.2e-6, 0.072)
    assert ig.bubble_point_pressure(0.2e-6, 0.072, math.radians(40.0)) < wet
    assert ig.bubble_point_pressure(0.45e-6, 0.072) < wet


@pytest.mark.parametrize("theta", [math.pi / 2, 2.0, -0.1])
def test_bubble_point_refuses_non_wetting_angles(theta: float) -> None:
    with pytest.raises(DomainError) as err:
        ig.bubble_point_pressure(0.2e-6, 0.072, theta)
    assert err.value.field == "contact_angle_rad"


# --- input errors -----------------------------------------------------------------------------


def test_decay_rate_refuses_nan_pressure() -> None:
    with pytest.raises(DomainError) as err:
        ig.decay_rate([0.0, 60.0, 120.0], [2.0e5, math.nan, 1.99e5])
    assert err.value.field == "pressures_pa"


def test_decay_rate_refuses_nan_time() -> None:
    with pytest.raises(DomainError) as err:
        ig.decay_rate([0.0, math.nan, 120.0], [2.0e5, 1.995e5, 1.99e5])
    assert err.value.field == "times_s"


def test_decay_rate_refuses_unsorted_times() -> None:
    with pytest.raises(DomainError) as err:
        ig.decay_rate([0.0, 120.0, 60.0], [2.0e5, 1.99e5, 1.995e5])
    assert err.value.field == "times_s"


def test_decay_rate_refuses_duplicated_times() -> None:
    with pytest.raises(DomainError) as err:
        ig.decay_rate([0.0, 60.0, 60.0, 120.0], [2.0e5, 1.995e5, 1.995e5, 1.99e5])
    assert err.value.field == "times_s"
    assert "strictly increasing" in str(err.value)


def test_decay_rate_refuses_fewer_than_two_readings() -> None:
    with pytest.raises(DomainError) as err:
        ig.decay_rate([0.0], [2.0e5])
    assert err.value.field == "times_s"


def test_decay_rate_refuses_mismatched_lengths() -> None:
    with pytest.raises(DomainError) as err:
        ig.decay_rate([0.0, 60.0, 120.0], [2.0e5, 1.99e5])
    assert err.value.field == "pressures_pa"


def test_gas_flow_refuses_negative_volume() -> None:
    with pytest.raises(DomainError) as err:
        ig.gas_flow_from_decay(5.0, -1.0e-3)
    assert err.value.field == "upstream_volume_m3"


def test_gas_flow_refuses_rising_pressure() -> None:
    with pytest.raises(DomainError) as err:
        ig.gas_flow_from_decay(-0.1, 1.0e-3)
    assert err.value.field == "decay_rate_pa_s"


def test_gas_flow_refuses_nan_rate() -> None:
    with pytest.raises(DomainError) as err:
        ig.gas_flow_from_decay(math.nan, 1.0e-3)
    assert err.value.field == "decay_rate_pa_s"


def test_judge_decay_refuses_bad_limit() -> None:
    with pytest.raises(DomainError) as err:
        ig.judge_decay(1.0, 0.0)
    assert err.value.field == "allowed"
    with pytest.raises(DomainError) as err:
        ig.judge_decay(math.nan, 1.0)
    assert err.value.field == "measured"
