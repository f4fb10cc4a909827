"""Diffusion and water-intrusion integrity tests (ledger.science.diffusion) and their verdicts
(ledger.rules.integrity_limits; kept here, beside the computation they judge).

Worked example by hand, diffusion (forward-flow) test from a pressure decay, ideal gas law
with R = 8.314462618 J/(mol·K) (CODATA 2018):

    upstream volume V = 1.5 L = 1.5e-3 m³, decay 0.9 mbar/min = 90 Pa / 60 s = 1.5 Pa/s,
    T = 20 °C = 293.15 K, P_atm = 101325 Pa.
    R·T = 8.314462618 × 293.15 = 2437.3847 J/mol
    ṅ = V·(dP/dt)/(R·T) = 1.5e-3 × 1.5 / 2437.3847 = 2.25e-3 / 2437.3847 = 9.2312e-7 mol/s
    Q at P_atm, 293.15 K = ṅ·R·T/P_atm = 2.25e-3 / 101325 = 2.22058e-8 m³/s
                         = 2.22058e-8 × 6e7 mL/min = 1.33235 mL/min
    Q at normal conditions (273.15 K, 101325 Pa) = 1.33235 × 273.15/293.15 = 1.24145 mL/min

Worked example by hand, water intrusion (Boyle's law):

    gas volume over the water V_gas = 3.0 L = 3.0e-3 m³ at 2.5 bar gauge = 250000 Pa,
    absolute p = 250000 + 101325 = 351325 Pa; decay 0.3 mbar/min = 30 Pa / 60 s = 0.5 Pa/s.
    Q = V_gas·(dP/dt)/p = 3.0e-3 × 0.5 / 351325 = 4.26955e-9 m³/s = 0.256173 mL/min
"""

from __future__ import annotations

import math
from collections.abc import Callable

import pytest
import scipy.constants
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import DomainError, InputError
from ledger.rules import integrity_limits as il
from ledger.science import diffusion as df
from ledger.science import integrity as ig
from ledger.units import registry

ML_MIN = 1e-6 / 60.0  # m³/s per mL/min


# --- worked examples --------------------------------------------------------------------------


def test_gas_constant_is_codata() -> None:
    # CODATA 2018: R = 8.314 462 618... J/(mol·K), exact in the 2019 SI as N_A·k;
    # scipy.constants as the reference library.
    r = df.GAS_CONSTANT_J_MOL_K
    assert r == pytest.approx(scipy.constants.R, rel=1e-15)
    assert r == pytest.approx(scipy.constants.Avogadro * scipy.constants.Boltzmann, rel=1e-15)
    assert r == pytest.approx(8.314462618, rel=1e-10)


def test_diffusion_worked_example() -> None:
    # Hand calculation in the module docstring; rel 1e-5 covers its rounding to 6 figures.
    n = df.gas_molar_flow_from_decay(1.5, 1.5e-3, 293.15)
    assert n == pytest.approx(9.2312e-7, rel=1e-4)
    q = df.diffusion_flow_from_decay(1.5, 1.5e-3, 293.15)
    assert q == pytest.approx(2.22058e-8, rel=1e-5)
    assert df.gas_volume_flow(n, 101325.0, 293.15) == pytest.approx(q, rel=1e-12)
    assert q / ML_MIN == pytest.approx(1.33235, rel=1e-5)
    q_normal = df.diffusion_flow_from_decay(
        1.5,
        1.5e-3,
        293.15,
        reference_pressure_abs_pa=df.NORMAL_PRESSURE_PA,
        reference_temperature_k=df.NORMAL_TEMPERATURE_K,
    )
    assert q_normal / ML_MIN == pytest.approx(1.24145, rel=1e-5)


def test_water_intrusion_worked_example() -> None:
    q = df.water_intrusion_flow(0.5, 3.0e-3, 250000.0)
    assert q == pytest.approx(4.26955e-9, rel=1e-5)
    assert q / ML_MIN == pytest.approx(0.256173, rel=1e-5)


def test_diffusion_flow_at_atmosphere_equals_the_pressure_decay_gas_flow() -> None:
    # Same formula as ledger.science.integrity.gas_flow_from_decay (EPA 815-R-06-009, ch. 4).
    for rate, volume, p_atm in [(1.5, 1.5e-3, 101325.0), (12.0, 4.0e-4, 95000.0)]:
        ours = df.diffusion_flow_from_decay(rate, volume, 295.0, reference_pressure_abs_pa=p_atm)
        assert ours == pytest.approx(ig.gas_flow_from_decay(rate, volume, p_atm), rel=1e-12)


def test_direct_flow_reading_restated_at_normal_conditions() -> None:
    # 1.33235 mL/min read at 293.15 K and 101325 Pa is 1.24145 mL/min at 273.15 K (by hand
    # above); at 2 atm the same molar flow occupies half the volume.
    q = 1.33235 * ML_MIN
    assert df.gas_flow_at_reference(q, 101325.0, 293.15) / ML_MIN == pytest.approx(
        1.24145, rel=1e-5
    )
    assert df.gas_flow_at_reference(
        q, 101325.0, 293.15, reference_pressure_abs_pa=202650.0, reference_temperature_k=293.15
    ) == pytest.approx(q / 2.0, rel=1e-12)


# --- dimensions with pint ---------------------------------------------------------------------


def test_diffusion_flow_dimensions_with_pint() -> None:
    ureg = registry()
    v = ureg.Quantity(1.5, "L")
    rate = ureg.Quantity(0.9, "mbar/min")
    p_atm = ureg.Quantity(1.01325, "bar")
    t = ureg.Quantity(293.15, "K")
    r = ureg.Quantity(scipy.constants.R, "J/(mol*K)")
    q = v * rate / p_atm
    assert q.dimensionality == ureg.Quantity(1, "m^3/s").dimensionality
    si = df.diffusion_flow_from_decay(
        rate.to("Pa/s").magnitude, v.to("m^3").magnitude, t.to("K").magnitude
    )
    assert q.to("m^3/s").magnitude == pytest.approx(si, rel=1e-12)
    assert q.to("mL/min").magnitude == pytest.approx(1.33235, rel=1e-5)
    n = v * rate / (r * t)
    assert n.dimensionality == ureg.Quantity(1, "mol/s").dimensionality
    assert n.to("mol/s").magnitude == pytest.approx(
        df.gas_molar_flow_from_decay(1.5, 1.5e-3, 293.15), rel=1e-12
    )


def test_water_intrusion_dimensions_with_pint() -> None:
    ureg = registry()
    v = ureg.Quantity(3.0, "L")
    rate = ureg.Quantity(0.3, "mbar/min")
    p = ureg.Quantity(2.5, "bar") + ureg.Quantity(101325.0, "Pa")
    q = v * rate / p
    assert q.dimensionality == ureg.Quantity(1, "m^3/s").dimensionality
    assert q.to("m^3/s").magnitude == pytest.approx(
        df.water_intrusion_flow(0.5, 3.0e-3, 250000.0), rel=1e-12
    )


# --- laws -------------------------------------------------------------------------------------

rates = st.floats(min_value=0.0, max_value=1.0e3)
volumes = st.floats(min_value=1e-6, max_value=1.0)
factors = st.floats(min_value=1e-3, max_value=1e3)
temperatures = st.floats(min_value=275.0, max_value=330.0)


@given(rate=rates, volume=volumes, k=factors, t=temperatures)
def test_diffusion_flow_is_linear_in_volume_and_decay_rate(
    rate: float, volume: float, k: float, t: float
) -> None:
    q = df.diffusion_flow_from_decay(rate, volume, t)
    assert df.diffusion_flow_from_decay(rate, volume * k, t) == pytest.approx(k * q, rel=1e-12)
    assert df.diffusion_flow_from_decay(rate * k, volume, t) == pytest.approx(k * q, rel=1e-12)


@given(
    rate=rates,
    volume=volumes,
    k=factors,
    p=st.floats(min_value=1e3, max_value=1e6),
)
def test_water_intrusion_flow_is_linear_in_volume_and_decay_rate(
    rate: float, volume: float, k: float, p: float
) -> None:
    q = df.water_intrusion_flow(rate, volume, p)
    assert df.water_intrusion_flow(rate, volume * k, p) == pytest.approx(k * q, rel=1e-12)
    assert df.water_intrusion_flow(rate * k, volume, p) == pytest.approx(k * q, rel=1e-12)


@given(rate=rates, volume=volumes, t=temperatures, t_ref=temperatures)
def test_flow_at_a_reference_temperature_scales_as_kelvin(
    rate: float, volume: float, t: float, t_ref: float
) -> None:
    at_t = df.diffusion_flow_from_decay(rate, volume, t)
    at_ref = df.diffusion_flow_from_decay(rate, volume, t, reference_temperature_k=t_ref)
    assert at_ref == pytest.approx(at_t * t_ref / t, rel=1e-12, abs=1e-300)


@given(
    volume=volumes,
    p0=st.floats(min_value=1e4, max_value=5e5),
    drop=st.floats(min_value=0.0, max_value=0.5),
)
def test_intrusion_volume_obeys_boyles_law(volume: float, p0: float, drop: float) -> None:
    p1 = p0 * (1.0 - drop)
    dv = df.water_intrusion_volume(volume, p0, p1)
    p_atm = 101325.0
    assert (p0 + p_atm) * volume == pytest.approx((p1 + p_atm) * (volume + dv), rel=1e-12)


def test_small_decay_volume_matches_flow_times_duration() -> None:
    # 600 s hold at 0.5 Pa/s from 250000 Pa: exact Boyle volume vs the flow at the mean
    # pressure times the hold; the decay (300 Pa) is 0.09 % of p, so they agree to 1e-6.
    volume, p0, rate, hold = 3.0e-3, 250000.0, 0.5, 600.0
    p1 = p0 - rate * hold
    exact = df.water_intrusion_volume(volume, p0, p1)
    approx = df.water_intrusion_flow(rate, volume, (p0 + p1) / 2.0) * hold
    assert exact == pytest.approx(approx, rel=1e-3)
    assert exact / hold == pytest.approx(4.26955e-9, rel=2e-3)


# --- refusals ---------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("field", "call"),
    [
        ("decay_rate_pa_s", lambda: df.diffusion_flow_from_decay(-0.1, 1e-3, 293.15)),
        ("decay_rate_pa_s", lambda: df.diffusion_flow_from_decay(math.nan, 1e-3, 293.15)),
        ("upstream_volume_m3", lambda: df.diffusion_flow_from_decay(1.0, 0.0, 293.15)),
        ("temperature_k", lambda: df.diffusion_flow_from_decay(1.0, 1e-3, 20.0)),
        (
            "reference_pressure_abs_pa",
            lambda: df.diffusion_flow_from_decay(1.0, 1e-3, 293.15, reference_pressure_abs_pa=0),
        ),
        ("gas_volume_m3", lambda: df.water_intrusion_flow(0.5, -1e-3, 2.5e5)),
        ("test_pressure_pa", lambda: df.water_intrusion_flow(0.5, 3e-3, 0.0)),
        ("atmospheric_pressure_pa", lambda: df.water_intrusion_flow(0.5, 3e-3, 2.5e5, math.nan)),
        ("end_pressure_pa", lambda: df.water_intrusion_volume(3e-3, 2.0e5, 2.1e5)),
        ("flow_m3_s", lambda: df.gas_flow_at_reference(-1e-8, 101325.0, 293.15)),
        ("molar_flow_mol_s", lambda: df.gas_volume_flow(-1.0, 101325.0, 293.15)),
    ],
)
def test_bad_inputs_name_the_parameter(field: str, call: Callable[[], float]) -> None:
    with pytest.raises(DomainError) as err:
        call()
    assert err.value.field == field


def test_celsius_temperature_is_refused_with_the_range() -> None:
    with pytest.raises(DomainError) as err:
        df.gas_molar_flow_from_decay(1.0, 1e-3, 20.0)
    assert "250 K to 400 K" in str(err.value)


# --- verdicts (ledger.rules.integrity_limits) ------------------------------------------------

LIMIT = il.FlowLimit("diffusion", max_flow_m3_s=20.0 * ML_MIN, test_pressure_pa=2.5e5)
STEP = 1e-6  # relative: far above rounding, far below any measured difference that matters


@pytest.mark.parametrize(
    ("fraction", "passed"),
    [(0.0, True), (0.5, True), (1.0 - STEP, True), (1.0, True), (1.0 + STEP, False), (2.0, False)],
)
def test_verdict_at_and_around_the_limit(fraction: float, passed: bool) -> None:
    v = il.judge_flow(fraction * LIMIT.max_flow_m3_s, 2.5e5, LIMIT)
    assert v.passed is passed
    assert v.fraction_of_limit == pytest.approx(fraction, rel=1e-12)
    assert v.margin_m3_s == pytest.approx(LIMIT.max_flow_m3_s * (1.0 - fraction), abs=1e-20)
    assert ("at or below" if passed else "above") in v.reason


def test_a_flow_on_the_limit_but_for_rounding_passes() -> None:
    # 12 mL/min converted in two orders is not bit-equal: 12·(1e-6/60) < 12e-6/60 in binary.
    limit = il.FlowLimit("diffusion", max_flow_m3_s=12.0 * (1e-6 / 60.0), test_pressure_pa=2.5e5)
    measured = 12.0 * 1e-6 / 60.0
    assert measured > limit.max_flow_m3_s
    assert il.judge_flow(measured, 2.5e5, limit).passed
    assert not il.judge_flow(measured * (1 + STEP), 2.5e5, limit).passed


def test_water_intrusion_verdict_uses_its_own_words() -> None:
    limit = il.FlowLimit("water_intrusion", max_flow_m3_s=0.3 * ML_MIN, test_pressure_pa=2.5e5)
    q = df.water_intrusion_flow(0.5, 3.0e-3, 2.5e5)  # 0.256 mL/min, worked example
    v = il.judge_flow(q, 2.5e5, limit)
    assert v.passed and "water intrusion flow" in v.reason
    assert not il.judge_flow(q, 2.5e5, il.FlowLimit("water_intrusion", 0.25 * ML_MIN, 2.5e5)).passed


@pytest.mark.parametrize("pressure", [2.4e5, 2.5e5 * (1 + 1e-6), 3.0e5])
def test_a_test_pressure_other_than_the_limits_is_refused(pressure: float) -> None:
    with pytest.raises(InputError) as err:
        il.judge_flow(1.0 * ML_MIN, pressure, LIMIT)
    assert err.value.field == "test_pressure_pa"
    assert "250000 Pa" in str(err.value)


def test_pressure_within_the_limits_tolerance_is_judged() -> None:
    limit = il.FlowLimit("diffusion", 20.0 * ML_MIN, 2.5e5, pressure_tolerance_pa=2000.0)
    assert il.judge_flow(5.0 * ML_MIN, 2.48e5, limit).passed
    assert il.judge_flow(5.0 * ML_MIN, 2.52e5, limit).passed
    with pytest.raises(InputError) as err:
        il.judge_flow(5.0 * ML_MIN, 2.53e5, limit)
    assert "250000 Pa ± 2000 Pa" in str(err.value)


def test_pressure_equal_but_for_rounding_is_judged() -> None:
    # 2.5 bar arriving as 36.2594 psi converted back: equal within EDGE_TOLERANCE.
    p = 2.5e5 * (1 + 1e-12)
    assert il.judge_flow(5.0 * ML_MIN, p, LIMIT).passed


@pytest.mark.parametrize("flow", [-1e-9, math.nan, math.inf])
def test_verdict_refuses_a_meaningless_flow(flow: float) -> None:
    with pytest.raises(InputError) as err:
        il.judge_flow(flow, 2.5e5, LIMIT)
    assert err.value.field == "measured_flow_m3_s"


@pytest.mark.parametrize(
    ("field", "limit"),
    [
        ("limit.max_flow_m3_s", il.FlowLimit("diffusion", 0.0, 2.5e5)),
        ("limit.max_flow_m3_s", il.FlowLimit("diffusion", math.nan, 2.5e5)),
        ("limit.test_pressure_pa", il.FlowLimit("diffusion", 1e-7, -1.0)),
        ("limit.pressure_tolerance_pa", il.FlowLimit("diffusion", 1e-7, 2.5e5, -5.0)),
        ("limit.test", il.FlowLimit("bubble_point", 1e-7, 2.5e5)),  # type: ignore[arg-type]
    ],
)
def test_verdict_refuses_a_malformed_limit(field: str, limit: il.FlowLimit) -> None:
    with pytest.raises(InputError) as err:
        il.judge_flow(1e-8, 2.5e5, limit)
    assert err.value.field == field
