"""NaOH concentration from conductivity (ledger.science.conductivity) against published data.

Sources named beside each check:
- CRC Handbook of Chemistry and Physics, "Electrical Conductivity of Aqueous Solutions"
  (20 °C), NaOH row, in mS/cm.
- CRC Handbook, "Concentrative Properties of Aqueous Solutions" (20 °C, 102nd ed.), NaOH
  block: molarity c in mol/L.
- CRC Handbook, "Molar Electrical Conductivity of Electrolytes in Aqueous Solution at 25 °C",
  NaOH row, in S·cm²/mol.
- McCleskey, J. Chem. Eng. Data 56 (2011) 317, conductivity correlation for NaOH: an
  independent published correlation, used between table points and for the temperature law.
  Its coefficients were taken from a public transcription of the paper's values, not from
  the printed paper.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import DomainError
from ledger.science import conductivity as cd
from ledger.units import registry

MS_CM = 0.1  # S/m per mS/cm

# CRC "Electrical Conductivity of Aqueous Solutions", NaOH, 20 °C: mass %, κ in mS/cm.
CRC_KAPPA_20C = [(0.5, 24.8), (1.0, 48.6), (2.0, 93.1), (5.0, 206.0)]
# CRC "Concentrative Properties of Aqueous Solutions", NaOH, 20 °C: mass %, c in mol/L.
CRC_MOLARITY_20C = [
    (0.5, 0.125),
    (1.0, 0.252),
    (2.0, 0.510),
    (3.0, 0.774),
    (4.0, 1.043),
    (5.0, 1.317),
]
# CRC molar conductivity at 25 °C, NaOH: c in mol/L, Λ in S·cm²/mol.
CRC_MOLAR_25C = [(0.0005, 245.5), (0.001, 244.6), (0.005, 240.7), (0.01, 237.9)]

# McCleskey (2011), NaOH: Λ° = c1·t² + c2·t + c3, A = d1·t² + d2·t + d3 (t in °C),
# Λ = Λ° − A·√m/(1 + B·√m) in S·cm²/mol with m the molality (mol/kg).
MCC_C = (0.006936, 3.872, 148.3)
MCC_D = (0.01018, 0.67421, 56.76)
MCC_B = 0.2


def _mccleskey_s_m(mass_fraction: float, celsius: float) -> float:
    m = mass_fraction / ((1.0 - mass_fraction) * cd.NAOH_MOLAR_MASS_KG_MOL)
    lam0 = MCC_C[0] * celsius**2 + MCC_C[1] * celsius + MCC_C[2]
    a = MCC_D[0] * celsius**2 + MCC_D[1] * celsius + MCC_D[2]
    lam_s_cm2 = lam0 - a * math.sqrt(m) / (1.0 + MCC_B * math.sqrt(m))
    return lam_s_cm2 * 1e-4 * cd.naoh_molarity(mass_fraction)


# --- published values ---------------------------------------------------------------------


@pytest.mark.parametrize(("percent", "kappa_ms_cm"), CRC_KAPPA_20C)
def test_conductivity_at_20c_reproduces_the_crc_table(percent: float, kappa_ms_cm: float) -> None:
    # Source: CRC "Electrical Conductivity of Aqueous Solutions", NaOH, 20 °C. The curve passes
    # through the table points; rel 1e-9 checks the transcription and the unit chain.
    assert cd.naoh_conductivity(percent / 100.0) == pytest.approx(kappa_ms_cm * MS_CM, rel=1e-9)
    assert cd.naoh_mass_fraction(kappa_ms_cm * MS_CM) == pytest.approx(percent / 100.0, rel=1e-9)


def test_table_unit_conversion_agrees_with_pint() -> None:
    # 206 mS/cm in S/m with the project's registry (CRC NaOH 5 % value, 20 °C).
    ureg = registry()
    kappa = ureg.Quantity(206.0, "mS/cm").to("S/m").magnitude
    assert cd.naoh_conductivity(0.05) == pytest.approx(kappa, rel=1e-12)


@pytest.mark.parametrize(("percent", "molar_l"), CRC_MOLARITY_20C)
def test_molarity_matches_the_crc_concentrative_table(percent: float, molar_l: float) -> None:
    # Source: CRC "Concentrative Properties of Aqueous Solutions", NaOH, 20 °C, column c; c is
    # computed here from the density column, so this checks an independent column. Tolerance
    # 0.0006 mol/L: half a unit in the last printed digit plus the density's rounding.
    c_mol_m3 = cd.naoh_molarity(percent / 100.0)
    assert c_mol_m3 / 1000.0 == pytest.approx(molar_l, abs=6e-4)
    assert cd.naoh_mass_fraction_from_molarity(molar_l * 1000.0) == pytest.approx(
        percent / 100.0, abs=3e-5
    )


@pytest.mark.parametrize("percent", [0.75, 1.5, 3.0, 4.0, 4.5])
def test_between_table_points_agrees_with_mccleskey_correlation(percent: float) -> None:
    # Source: McCleskey (2011) NaOH correlation at 20 °C; it matches the CRC points to 3.5 %,
    # so 4 % is the tolerance for the interpolated curve between them.
    w = percent / 100.0
    assert cd.naoh_conductivity(w) == pytest.approx(_mccleskey_s_m(w, 20.0), rel=0.04)


@pytest.mark.parametrize(("molar_l", "lambda_s_cm2"), CRC_MOLAR_25C)
def test_dilute_end_agrees_with_crc_molar_conductivity_at_25c(
    molar_l: float, lambda_s_cm2: float
) -> None:
    # Source: CRC molar conductivity of NaOH at 25 °C, 0.0005-0.01 mol/L (below the 20 °C
    # table). κ = Λ·c; our 20 °C curve taken to 25 °C with the linear law; tolerance 1 %.
    kappa_25 = lambda_s_cm2 * 1e-4 * molar_l * 1000.0
    w = cd.naoh_mass_fraction_from_molarity(molar_l * 1000.0)
    assert cd.naoh_conductivity(w, 298.15) == pytest.approx(kappa_25, rel=0.01)


def test_default_temperature_coefficient_is_the_landolt_bornstein_value_at_20c() -> None:
    # 1.71 %/K at 25 °C reference (Landolt–Börnstein, 0.641 mol/L, 18-26 °C, secondary
    # tabulation) re-expressed for a 20 °C reference: α20 = α25/(1 − 5 K·α25).
    alpha = cd.NAOH_ALPHA_PER_K
    assert alpha == pytest.approx(0.0171 / (1 - 5 * 0.0171), rel=1e-12)
    assert alpha == pytest.approx(0.0187, abs=5e-5)


@pytest.mark.parametrize("percent", [0.5, 1.0, 2.0, 5.0])
@pytest.mark.parametrize("celsius", [5.0, 10.0, 15.0, 25.0, 30.0, 40.0, 50.0, 60.0])
def test_linear_temperature_law_follows_mccleskey_within_4_percent(
    percent: float, celsius: float
) -> None:
    # Source: McCleskey (2011) NaOH correlation, κ(t)/κ(20 °C) over 5-60 °C, against
    # 1 + α·(T − 293.15 K) with the default α; largest gap seen: 2.9 % at 5 °C, 5 % w/w.
    w = percent / 100.0
    ratio_mcc = _mccleskey_s_m(w, celsius) / _mccleskey_s_m(w, 20.0)
    ratio_ours = cd.naoh_conductivity(w, 273.15 + celsius) / cd.naoh_conductivity(w)
    assert ratio_ours == pytest.approx(ratio_mcc, rel=0.04)


# --- laws ---------------------------------------------------------------------------------

fractions = st.floats(min_value=0.0, max_value=cd.MASS_FRACTION_MAX)
temperatures = st.floats(min_value=cd.TEMPERATURE_MIN_K, max_value=cd.TEMPERATURE_MAX_K)


@given(w=fractions, t=temperatures)
def test_round_trip_concentration_conductivity_concentration(w: float, t: float) -> None:
    kappa = cd.naoh_conductivity(w, t)
    assert cd.naoh_mass_fraction(kappa, t) == pytest.approx(w, rel=1e-9, abs=1e-13)


@given(w=fractions)
def test_round_trip_mass_fraction_molarity(w: float) -> None:
    c = cd.naoh_molarity(w)
    assert cd.naoh_mass_fraction_from_molarity(c) == pytest.approx(w, rel=1e-9, abs=1e-13)


@given(a=fractions, b=fractions, t=temperatures)
def test_conductivity_rises_with_concentration(a: float, b: float, t: float) -> None:
    low, high = sorted((a, b))
    if high - low > 1e-9:
        assert cd.naoh_conductivity(low, t) < cd.naoh_conductivity(high, t)
    else:
        assert cd.naoh_conductivity(low, t) <= cd.naoh_conductivity(high, t) + 1e-9


def test_conductivity_rises_strictly_on_a_dense_grid() -> None:
    w = np.linspace(0.0, cd.MASS_FRACTION_MAX, 20001)
    kappa = np.array([cd.naoh_conductivity(float(x)) for x in w])
    assert np.all(np.diff(kappa) > 0.0)


@given(
    w=st.floats(min_value=1e-5, max_value=cd.MASS_FRACTION_MAX),
    t=temperatures,
    alpha=st.floats(min_value=0.0, max_value=cd.ALPHA_MAX_PER_K),
)
def test_temperature_law_is_linear_in_temperature(w: float, t: float, alpha: float) -> None:
    at_ref = cd.naoh_conductivity(w, 293.15, alpha)
    at_t = cd.naoh_conductivity(w, t, alpha)
    assert at_t / at_ref == pytest.approx(1.0 + alpha * (t - 293.15), rel=1e-12)
    assert cd.compensate_to_reference(at_t, t, alpha) == pytest.approx(at_ref, rel=1e-12)


@given(kappa=st.floats(min_value=0.0, max_value=30.0), t=temperatures)
def test_compensation_round_trip(kappa: float, t: float) -> None:
    back = cd.conductivity_at_temperature(cd.compensate_to_reference(kappa, t), t)
    assert back == pytest.approx(kappa, rel=1e-12, abs=1e-15)


def test_reading_above_20c_is_referred_down_before_lookup() -> None:
    # The same solution read at 40 °C reads higher and must give the same concentration.
    k40 = cd.naoh_conductivity(0.02, 313.15)
    assert k40 > cd.naoh_conductivity(0.02)
    result = cd.naoh_from_conductivity(k40, 313.15)
    assert result.mass_fraction == pytest.approx(0.02, rel=1e-9)
    assert result.conductivity_20c_s_m == pytest.approx(9.31, rel=1e-9)
    assert result.molarity_mol_m3 == pytest.approx(cd.naoh_molarity(0.02), rel=1e-9)
    assert result.mass_concentration_kg_m3 == pytest.approx(
        result.molarity_mol_m3 * cd.NAOH_MOLAR_MASS_KG_MOL, rel=1e-12
    )


def test_zero_conductivity_is_pure_water() -> None:
    assert cd.naoh_mass_fraction(0.0) == 0.0
    assert cd.naoh_conductivity(0.0) == 0.0
    assert cd.naoh_density(0.0) == pytest.approx(998.2, abs=0.05)  # water at 20 °C


# --- refusals -----------------------------------------------------------------------------


def test_refuses_conductivity_above_the_table() -> None:
    with pytest.raises(DomainError) as err:
        cd.naoh_mass_fraction(20.6 * 1.001)
    assert err.value.field == "conductivity_s_m"
    assert "20.6 S/m" in str(err.value)
    assert "206 mS/cm" in str(err.value)


def test_limit_follows_temperature() -> None:
    # At 40 °C the 5 % solution reads 20.6·(1 + 20·α) S/m; just above that is refused.
    limit_40 = 20.6 * (1 + 20 * cd.NAOH_ALPHA_PER_K)
    assert cd.naoh_mass_fraction(limit_40, 313.15) == pytest.approx(0.05, rel=1e-12)
    with pytest.raises(DomainError) as err:
        cd.naoh_mass_fraction(limit_40 * 1.001, 313.15)
    assert err.value.field == "conductivity_s_m"
    assert f"{limit_40:.4g} S/m" in str(err.value)


@pytest.mark.parametrize("kappa", [-0.01, math.nan, math.inf])
def test_refuses_negative_and_non_finite_conductivity(kappa: float) -> None:
    with pytest.raises(DomainError) as err:
        cd.naoh_mass_fraction(kappa)
    assert err.value.field == "conductivity_s_m"


@pytest.mark.parametrize(("w", "says"), [(-1e-6, "0.05"), (0.0501, "0.05"), (math.nan, "finite")])
def test_refuses_mass_fraction_outside_the_table(w: float, says: str) -> None:
    with pytest.raises(DomainError) as err:
        cd.naoh_conductivity(w)
    assert err.value.field == "mass_fraction"
    assert says in str(err.value)


@pytest.mark.parametrize(
    ("t", "says"),
    [(278.0, "278.15 K to 333.15 K"), (333.2, "278.15 K to 333.15 K"), (math.nan, "finite")],
)
def test_refuses_temperatures_outside_the_checked_range(t: float, says: str) -> None:
    with pytest.raises(DomainError) as err:
        cd.naoh_mass_fraction(5.0, t)
    assert err.value.field == "temperature_k"
    assert says in str(err.value)


@pytest.mark.parametrize("alpha", [-0.001, 0.05, math.nan])
def test_refuses_unreasonable_temperature_coefficients(alpha: float) -> None:
    with pytest.raises(DomainError) as err:
        cd.compensate_to_reference(5.0, 300.0, alpha)
    assert err.value.field == "alpha_per_k"


@pytest.mark.parametrize("c", [-1.0, 1318.0, math.nan])
def test_refuses_molarity_outside_the_range(c: float) -> None:
    with pytest.raises(DomainError) as err:
        cd.naoh_mass_fraction_from_molarity(c)
    assert err.value.field == "molarity_mol_m3"
