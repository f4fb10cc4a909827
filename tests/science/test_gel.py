"""Behaviour, properties and input guards of ledger.science.gel."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st

from ledger.errors import DomainError
from ledger.science import gel

LMH = 1.0 / 3.6e6  # 1 L/(m²·h) in m/s


def test_exact_synthetic_data_recover_k_and_cg() -> None:
    # Synthetic data generated from the model itself: J = k·ln(Cg/Cb), k = 18 LMH, Cg = 280 g/L.
    k, cg = 18.0 * LMH, 280.0
    c = np.array([8.0, 20.0, 45.0, 90.0, 140.0, 200.0])
    fit = gel.fit_gel_model(c, k * np.log(cg / c))
    assert fit.k_m_s == pytest.approx(k, rel=1e-12)
    assert fit.cg_kg_m3 == pytest.approx(cg, rel=1e-12)
    assert fit.r_squared == pytest.approx(1.0, abs=1e-12)
    assert fit.n == 6
    assert fit.k_se_m_s == pytest.approx(0.0, abs=1e-12 * k)
    assert fit.cg_se_kg_m3 == pytest.approx(0.0, abs=1e-9 * cg)


@given(
    k_lmh=st.floats(min_value=2.0, max_value=60.0),
    cg=st.floats(min_value=50.0, max_value=500.0),
    fractions=st.lists(
        st.floats(min_value=0.02, max_value=0.9), min_size=3, max_size=8, unique=True
    ),
)
def test_fit_recovers_random_k_and_cg_from_exact_data(
    k_lmh: float, cg: float, fractions: list[float]
) -> None:
    frac = np.array(fractions)
    assume(frac.max() / frac.min() > 1.5)
    k = k_lmh * LMH
    c = cg * frac
    fit = gel.fit_gel_model(c, k * np.log(cg / c))
    assert fit.k_m_s == pytest.approx(k, rel=1e-9)
    assert fit.cg_kg_m3 == pytest.approx(cg, rel=1e-9)


def test_two_points_give_exact_line_with_nan_standard_errors() -> None:
    k, cg = 10.0 * LMH, 200.0
    c = np.array([20.0, 100.0])
    fit = gel.fit_gel_model(c, k * np.log(cg / c))
    assert fit.k_m_s == pytest.approx(k, rel=1e-12)
    assert fit.cg_kg_m3 == pytest.approx(cg, rel=1e-12)
    assert math.isnan(fit.k_se_m_s)
    assert math.isnan(fit.cg_se_kg_m3)


def test_noisy_fit_has_finite_positive_standard_errors() -> None:
    rng = np.random.default_rng(7)
    k, cg = 15.0 * LMH, 250.0
    c = np.linspace(15.0, 180.0, 8)
    j = k * np.log(cg / c) * (1.0 + rng.normal(0.0, 0.03, c.size))
    fit = gel.fit_gel_model(c, j)
    assert 0.0 < fit.k_se_m_s < fit.k_m_s
    assert 0.0 < fit.cg_se_kg_m3 < fit.cg_kg_m3
    assert 0.0 < fit.r_squared < 1.0


def test_flux_at_evaluates_the_model() -> None:
    k, cg = 12.0 * LMH, 300.0
    c = np.array([10.0, 50.0, 150.0])
    fit = gel.fit_gel_model(c, k * np.log(cg / c))
    assert fit.flux_at(cg) == pytest.approx(0.0, abs=1e-18)
    assert fit.flux_at(cg / math.e**2) == pytest.approx(2.0 * k, rel=1e-10)


# --- optimum and diafiltration ----------------------------------------------------------------


def test_optimum_is_cg_over_e_where_flux_equals_k() -> None:
    # Ng, Lundblad & Mitra (1976): at the time-optimal concentration J = k.
    k, cg = 20.0 * LMH, 260.0
    c_opt = gel.optimum_concentration((k, cg))
    assert c_opt == pytest.approx(cg / math.e, rel=1e-15)
    assert gel.gel_flux(k, cg, c_opt) == pytest.approx(k, rel=1e-12)


def test_tuple_and_fit_models_agree() -> None:
    k, cg = 20.0 * LMH, 260.0
    c = np.array([10.0, 40.0, 120.0])
    fit = gel.fit_gel_model(c, k * np.log(cg / c))
    a = gel.diafiltration_at(fit, 0.5, 60.0, 7.0, 0.2)
    b = gel.diafiltration_at((k, cg), 0.5, 60.0, 7.0, 0.2)
    assert a.time_s == pytest.approx(b.time_s, rel=1e-10)
    assert gel.optimum_concentration(fit) == pytest.approx(gel.optimum_concentration((k, cg)))


def test_diafiltration_plan_mass_and_volume_balances() -> None:
    k, cg = 20.0 * LMH, 260.0
    plan = gel.diafiltration_at((k, cg), 0.75, 50.0, 8.0, 0.35)
    # Mass held at Cb: V·Cb = M. Buffer N·V. Permeate collected at J·A over t equals the buffer.
    assert plan.volume_m3 * plan.concentration_kg_m3 == pytest.approx(0.75, rel=1e-12)
    assert plan.buffer_volume_m3 == pytest.approx(8.0 * plan.volume_m3, rel=1e-12)
    assert plan.flux_m_s * plan.area_m2 * plan.time_s == pytest.approx(
        plan.buffer_volume_m3, rel=1e-12
    )
    assert plan.flux_m_s == pytest.approx(k * math.log(cg / 50.0), rel=1e-12)


@given(
    k_lmh=st.floats(min_value=2.0, max_value=60.0),
    cg=st.floats(min_value=50.0, max_value=500.0),
    fraction=st.floats(min_value=0.01, max_value=0.99),
)
def test_no_concentration_beats_the_optimum(k_lmh: float, cg: float, fraction: float) -> None:
    cmp = gel.compare_with_optimum((k_lmh * LMH, cg), 1.0, fraction * cg, 6.0, 0.5)
    assert cmp.time_ratio >= 1.0 - 1e-12
    assert cmp.extra_time_s == pytest.approx(cmp.chosen.time_s - cmp.optimum.time_s)
    # Above the optimum less buffer is used; below it more.
    if fraction * cg > cg / math.e:
        assert cmp.buffer_difference_m3 < 0.0
    elif fraction * cg < cg / math.e:
        assert cmp.buffer_difference_m3 > 0.0


def test_diafiltration_refuses_concentration_at_or_above_cg() -> None:
    with pytest.raises(DomainError) as err:
        gel.diafiltration_at((5.0e-6, 200.0), 1.0, 200.0, 7.0, 0.5)
    assert err.value.field == "concentration_kg_m3"


@pytest.mark.parametrize(
    ("field", "args"),
    [
        ("product_mass_kg", (0.0, 50.0, 7.0, 0.5)),
        ("concentration_kg_m3", (1.0, -5.0, 7.0, 0.5)),
        ("diavolumes", (1.0, 50.0, math.nan, 0.5)),
        ("area_m2", (1.0, 50.0, 7.0, -0.5)),
    ],
)
def test_diafiltration_guards_name_the_parameter(
    field: str, args: tuple[float, float, float, float]
) -> None:
    with pytest.raises(DomainError) as err:
        gel.diafiltration_at((5.0e-6, 200.0), *args)
    assert err.value.field == field


def test_bad_model_tuple_is_refused() -> None:
    with pytest.raises(DomainError) as err:
        gel.optimum_concentration((5.0e-6, -1.0))
    assert err.value.field == "cg_kg_m3"
    with pytest.raises(DomainError) as err:
        gel.diafiltration_at((0.0, 200.0), 1.0, 50.0, 7.0, 0.5)
    assert err.value.field == "k_m_s"


# --- input errors -----------------------------------------------------------------------------


def test_fit_refuses_flux_rising_with_concentration() -> None:
    c = np.array([10.0, 50.0, 100.0])
    with pytest.raises(DomainError) as err:
        gel.fit_gel_model(c, 1e-6 * np.log(c))
    assert err.value.field == "fluxes_m_s"
    assert "does not fall with concentration" in str(err.value)


def test_fit_refuses_flat_flux() -> None:
    with pytest.raises(DomainError) as err:
        gel.fit_gel_model([10.0, 50.0, 100.0], [5e-6, 5e-6, 5e-6])
    assert err.value.field == "fluxes_m_s"


def test_fit_refuses_nan_concentration() -> None:
    with pytest.raises(DomainError) as err:
        gel.fit_gel_model([10.0, math.nan, 100.0], [5e-6, 4e-6, 3e-6])
    assert err.value.field == "concentrations_kg_m3"


def test_fit_refuses_non_positive_concentration() -> None:
    with pytest.raises(DomainError) as err:
        gel.fit_gel_model([-10.0, 50.0, 100.0], [5e-6, 4e-6, 3e-6])
    assert err.value.field == "concentrations_kg_m3"


def test_fit_refuses_non_positive_flux() -> None:
    with pytest.raises(DomainError) as err:
        gel.fit_gel_model([10.0, 50.0, 100.0], [5e-6, 4e-6, 0.0])
    assert err.value.field == "fluxes_m_s"


def test_fit_refuses_single_point() -> None:
    with pytest.raises(DomainError) as err:
        gel.fit_gel_model([10.0], [5e-6])
    assert err.value.field == "concentrations_kg_m3"


def test_fit_refuses_single_concentration() -> None:
    with pytest.raises(DomainError) as err:
        gel.fit_gel_model([50.0, 50.0, 50.0], [5e-6, 4.9e-6, 5.1e-6])
    assert err.value.field == "concentrations_kg_m3"


def test_fit_refuses_mismatched_lengths() -> None:
    with pytest.raises(DomainError) as err:
        gel.fit_gel_model([10.0, 50.0, 100.0], [5e-6, 4e-6])
    assert err.value.field == "fluxes_m_s"
