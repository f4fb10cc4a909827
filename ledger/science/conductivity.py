"""Concentration of a sodium hydroxide solution from its electrical conductivity, and back.

SI in and out: conductivity κ in S/m (1 mS/cm = 0.1 S/m), temperature in K, mass fraction w
in kg/kg (0.02 = 2 % w/w), mass concentration in kg/m³ (= g/L), molar concentration in
mol/m³ (1 mol/L = 1000 mol/m³). Densities and molarities refer to 20 °C, the temperature of
both tables below; the mass fraction does not depend on temperature.

Sources:

- Conductivity at 20 °C: CRC Handbook of Chemistry and Physics, table "Electrical
  Conductivity of Aqueous Solutions" (all values at 20 °C), sodium hydroxide row:
  0.5 % 24.8, 1 % 48.6, 2 % 93.1, 5 % 206 mS/cm. The table stops at 5 %, so that is the
  upper end of the valid range here; at higher concentration NaOH conductivity passes through
  a maximum, where one reading would fit two concentrations.
- Density and molarity at 20 °C: CRC Handbook, table "Concentrative Properties of Aqueous
  Solutions" (102nd ed., 2021), sodium hydroxide block, 0.5 % to 5 %; molar mass 39.997 g/mol
  as printed there. Pure water (w = 0): :func:`ledger.science.water.density` (Kell 1975).
- Dilute end: limiting molar conductivity Λ° = 247.7 S·cm²/mol at 25 °C, CRC Handbook table
  "Molar Electrical Conductivity of Electrolytes in Aqueous Solution at 25 °C", referred to
  20 °C with the temperature coefficient below.
- Temperature coefficient: 1.71 %/K for 0.641 mol/L NaOH, mean over 18-26 °C referred to
  25 °C, from Landolt–Börnstein as quoted in a secondary tabulation (the original volume was
  not checked). Referred to 20 °C: α20 = α25/(1 − 5 K·α25) = 1.87 %/K. The linear law
  κ(T) = κ20·(1 + α·(T − 293.15 K)) is the usual linear compensation of conductivity meters.

Interpolation: the molar conductivity Λ = κ/c is interpolated against √c (monotone cubic,
PCHIP), because Λ is close to linear in √c (Kohlrausch) and so the curve through the four
table points and Λ° stays physical down to infinite dilution. Between table points the
result agrees with the McCleskey (J. Chem. Eng. Data 56 (2011) 317) correlation for NaOH
within 4 %, and below 0.5 % with the CRC 25 °C molar conductivities (0.0005-0.01 mol/L)
within 1 % (tests/science/test_conductivity.py).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from functools import cache
from typing import TYPE_CHECKING

from ledger.errors import out_of_range
from ledger.science.guards import non_negative, within
from ledger.science.water import density as water_density

if TYPE_CHECKING:
    from scipy.interpolate import PchipInterpolator

NAOH_MOLAR_MASS_KG_MOL = 0.039997  # CRC "Concentrative Properties", NaOH block
REFERENCE_TEMPERATURE_K = 293.15  # 20 °C, the temperature of both CRC tables
# Landolt–Börnstein 1.71 %/K (0.641 mol/L, 18-26 °C, referred to 25 °C) referred to 20 °C.
NAOH_ALPHA_PER_K = 0.0171 / (1.0 - 5.0 * 0.0171)

# CRC "Electrical Conductivity of Aqueous Solutions", NaOH, 20 °C: mass fraction, S/m.
CONDUCTIVITY_TABLE: tuple[tuple[float, float], ...] = (
    (0.005, 2.48),
    (0.01, 4.86),
    (0.02, 9.31),
    (0.05, 20.6),
)
# CRC "Concentrative Properties of Aqueous Solutions", NaOH, 20 °C: mass fraction, kg/m³.
DENSITY_TABLE: tuple[tuple[float, float], ...] = (
    (0.005, 1003.9),
    (0.01, 1009.5),
    (0.02, 1020.7),
    (0.03, 1031.8),
    (0.04, 1042.8),
    (0.05, 1053.8),
)
# CRC molar conductivity table, NaOH at infinite dilution, 25 °C: 247.7 S·cm²/mol in S·m²/mol.
LIMITING_MOLAR_CONDUCTIVITY_25C = 247.7e-4

MASS_FRACTION_MAX = CONDUCTIVITY_TABLE[-1][0]
CONDUCTIVITY_MAX_20C_S_M = CONDUCTIVITY_TABLE[-1][1]
TEMPERATURE_MIN_K = 278.15  # 5 °C
TEMPERATURE_MAX_K = 333.15  # 60 °C
ALPHA_MAX_PER_K = 0.04

_T_RANGE = "278.15 K to 333.15 K (5-60 °C, where the linear temperature law is checked)"
_W_RANGE = (
    f"a mass fraction from 0 to {MASS_FRACTION_MAX:g} (0-5 % w/w, the range of the CRC "
    "conductivity table for NaOH)"
)


@dataclass(frozen=True)
class NaOHConcentration:
    """A NaOH solution's concentration, worked out from a conductivity reading.

    ``mass_fraction`` kg/kg; ``mass_concentration_kg_m3`` and ``molarity_mol_m3`` at 20 °C;
    ``conductivity_20c_s_m`` the reading referred to 20 °C (S/m).
    """

    mass_fraction: float
    mass_concentration_kg_m3: float
    molarity_mol_m3: float
    conductivity_20c_s_m: float


def _check_mass_fraction(name: str, value: float) -> float:
    return within(name, value, 0.0, MASS_FRACTION_MAX, _W_RANGE)


def _check_temperature(temperature_k: float) -> float:
    return within("temperature_k", temperature_k, TEMPERATURE_MIN_K, TEMPERATURE_MAX_K, _T_RANGE)


def _check_alpha(alpha_per_k: float) -> float:
    return within(
        "alpha_per_k",
        alpha_per_k,
        0.0,
        ALPHA_MAX_PER_K,
        f"a temperature coefficient from 0 to {ALPHA_MAX_PER_K:g} 1/K (0-4 %/K)",
    )


@cache
def _density_curve() -> PchipInterpolator:
    import numpy as np
    from scipy.interpolate import PchipInterpolator

    w = np.array([0.0] + [p[0] for p in DENSITY_TABLE])
    rho = np.array([water_density(REFERENCE_TEMPERATURE_K)] + [p[1] for p in DENSITY_TABLE])
    return PchipInterpolator(w, rho)


def _molarity(mass_fraction: float) -> float:
    return mass_fraction * float(_density_curve()(mass_fraction)) / NAOH_MOLAR_MASS_KG_MOL


@cache
def _molar_conductivity_curve() -> PchipInterpolator:
    import numpy as np
    from scipy.interpolate import PchipInterpolator

    limiting_20c = LIMITING_MOLAR_CONDUCTIVITY_25C / (
        1.0 + NAOH_ALPHA_PER_K * (298.15 - REFERENCE_TEMPERATURE_K)
    )
    roots = [0.0]
    molar = [limiting_20c]
    for w, kappa in CONDUCTIVITY_TABLE:
        c = _molarity(w)
        roots.append(math.sqrt(c))
        molar.append(kappa / c)
    return PchipInterpolator(np.array(roots), np.array(molar))


def _conductivity_20c(mass_fraction: float) -> float:
    if mass_fraction == 0.0:
        return 0.0
    c = _molarity(mass_fraction)
    return float(_molar_conductivity_curve()(math.sqrt(c))) * c


def compensate_to_reference(
    conductivity_s_m: float,
    temperature_k: float,
    alpha_per_k: float = NAOH_ALPHA_PER_K,
) -> float:
    """Conductivity (S/m) referred to 20 °C from a reading (S/m) taken at ``temperature_k``.

    κ20 = κ_T / (1 + α·(T − 293.15 K)), α in 1/K (default 1.87 %/K for NaOH, see the module
    docstring). Give the meter's uncompensated reading. T from 278.15 K to 333.15 K.
    """
    kappa = non_negative("conductivity_s_m", conductivity_s_m)
    t = _check_temperature(temperature_k)
    alpha = _check_alpha(alpha_per_k)
    return kappa / (1.0 + alpha * (t - REFERENCE_TEMPERATURE_K))


def conductivity_at_temperature(
    conductivity_20c_s_m: float,
    temperature_k: float,
    alpha_per_k: float = NAOH_ALPHA_PER_K,
) -> float:
    """Conductivity (S/m) at ``temperature_k`` of a solution whose κ at 20 °C is given (S/m).

    κ_T = κ20 · (1 + α·(T − 293.15 K)); the inverse of :func:`compensate_to_reference`.
    """
    kappa = non_negative("conductivity_20c_s_m", conductivity_20c_s_m)
    t = _check_temperature(temperature_k)
    alpha = _check_alpha(alpha_per_k)
    return kappa * (1.0 + alpha * (t - REFERENCE_TEMPERATURE_K))


def naoh_density(mass_fraction: float) -> float:
    """Density (kg/m³) at 20 °C of aqueous NaOH of the given mass fraction (0 to 0.05).

    Monotone cubic interpolation (PCHIP) in the CRC "Concentrative Properties" table, with pure
    water at w = 0.
    """
    w = _check_mass_fraction("mass_fraction", mass_fraction)
    return float(_density_curve()(w))


def naoh_molarity(mass_fraction: float) -> float:
    """Molar concentration (mol/m³, at 20 °C) of NaOH at mass fraction w (0 to 0.05).

    c = w·ρ(w)/M with ρ from :func:`naoh_density` and M = 0.039997 kg/mol.
    """
    w = _check_mass_fraction("mass_fraction", mass_fraction)
    return _molarity(w)


def naoh_mass_concentration(mass_fraction: float) -> float:
    """Mass concentration (kg/m³ = g/L, at 20 °C) of NaOH at mass fraction w: w·ρ(w)."""
    w = _check_mass_fraction("mass_fraction", mass_fraction)
    return w * float(_density_curve()(w))


def naoh_mass_fraction_from_molarity(molarity_mol_m3: float) -> float:
    """Mass fraction of NaOH (kg/kg) whose molar concentration at 20 °C is given (mol/m³).

    The inverse of :func:`naoh_molarity`, found by root finding on the monotone c(w); valid
    from 0 to the molarity at 5 % w/w (about 1317 mol/m³).
    """
    c = non_negative("molarity_mol_m3", molarity_mol_m3)
    c_max = _molarity(MASS_FRACTION_MAX)
    if c > c_max:
        raise out_of_range(
            "molarity_mol_m3",
            molarity_mol_m3,
            f"a molar concentration from 0 to {c_max:.0f} mol/m³ ({c_max / 1000:.3f} mol/L, "
            "5 % w/w NaOH at 20 °C)",
        )
    return _invert(_molarity, c, c_max)


def naoh_conductivity(
    mass_fraction: float,
    temperature_k: float = REFERENCE_TEMPERATURE_K,
    alpha_per_k: float = NAOH_ALPHA_PER_K,
) -> float:
    """Electrical conductivity (S/m) of aqueous NaOH at mass fraction w and temperature T.

    κ20(w) from the CRC 20 °C table (interpolated as the module docstring says), then
    κ_T = κ20·(1 + α·(T − 293.15 K)). w from 0 to 0.05; T from 278.15 K to 333.15 K.
    """
    w = _check_mass_fraction("mass_fraction", mass_fraction)
    return conductivity_at_temperature(_conductivity_20c(w), temperature_k, alpha_per_k)


def naoh_mass_fraction(
    conductivity_s_m: float,
    temperature_k: float = REFERENCE_TEMPERATURE_K,
    alpha_per_k: float = NAOH_ALPHA_PER_K,
) -> float:
    """Mass fraction of NaOH (kg/kg) from a conductivity reading (S/m) taken at T (K).

    The reading is referred to 20 °C (:func:`compensate_to_reference`) and the 20 °C curve is
    inverted by root finding (it rises monotonically over the valid range). Readings above
    the table's last point (20.6 S/m = 206 mS/cm at 20 °C, 5 % w/w) are refused.
    """
    kappa_20 = compensate_to_reference(conductivity_s_m, temperature_k, alpha_per_k)
    if kappa_20 > CONDUCTIVITY_MAX_20C_S_M:
        t = float(temperature_k)
        kappa_max = conductivity_at_temperature(CONDUCTIVITY_MAX_20C_S_M, t, alpha_per_k)
        raise out_of_range(
            "conductivity_s_m",
            conductivity_s_m,
            f"a conductivity from 0 to {kappa_max:.4g} S/m ({kappa_max * 10:.4g} mS/cm) at "
            f"{t:.2f} K, i.e. at most 5 % w/w NaOH (206 mS/cm at 20 °C, the last point of the "
            "CRC table; above it NaOH conductivity goes through a maximum and a reading no "
            "longer fixes the concentration)",
        )
    return _invert(_conductivity_20c, kappa_20, CONDUCTIVITY_MAX_20C_S_M)


def naoh_from_conductivity(
    conductivity_s_m: float,
    temperature_k: float = REFERENCE_TEMPERATURE_K,
    alpha_per_k: float = NAOH_ALPHA_PER_K,
) -> NaOHConcentration:
    """NaOH concentration from a conductivity reading (S/m) at T (K), in all three forms."""
    w = naoh_mass_fraction(conductivity_s_m, temperature_k, alpha_per_k)
    return NaOHConcentration(
        mass_fraction=w,
        mass_concentration_kg_m3=w * float(_density_curve()(w)),
        molarity_mol_m3=_molarity(w),
        conductivity_20c_s_m=compensate_to_reference(conductivity_s_m, temperature_k, alpha_per_k),
    )


def _invert(curve: Callable[[float], float], target: float, curve_max: float) -> float:
    """The w in [0, 0.05] with curve(w) = target, for a curve rising from 0 to curve_max."""
    if target <= 0.0:
        return 0.0
    if target >= curve_max:
        return MASS_FRACTION_MAX
    from scipy.optimize import brentq

    root: float = brentq(
        lambda w: curve(w) - target, 0.0, MASS_FRACTION_MAX, xtol=1e-15, rtol=1e-14
    )
    return float(root)
