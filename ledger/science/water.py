"""Properties of liquid water at atmospheric pressure (SI: K, kg/m³, Pa·s, N/m).

Valid range: liquid water at about 0.1 MPa, 273.15 K to 373.15 K (0-100 °C). Values outside
are refused, because every normalization that uses them would silently extrapolate.

Sources:
- Viscosity: IAPWS R12-08, *Release on the IAPWS Formulation 2008 for the Viscosity of
  Ordinary Water Substance* (Huber et al., J. Phys. Chem. Ref. Data 38 (2009) 101), with the
  critical enhancement µ2 = 1 (recommended for industrial use away from the critical point).
- Density at 1 atm (input to the viscosity formulation): G. S. Kell, J. Chem. Eng. Data 20
  (1975) 97, the rational fit for air-free water at 101.325 kPa, 0-150 °C.
- Surface tension: IAPWS R1-76(2014), *Revised Release on Surface Tension of Ordinary Water
  Substance*.
"""

from __future__ import annotations

import math

from ledger.errors import DomainError
from ledger.science.guards import finite

T_MIN = 273.15
T_MAX = 373.15
T_CRITICAL = 647.096  # K, IAPWS
RHO_CRITICAL = 322.0  # kg/m³, IAPWS

_RANGE = "273.15 K to 373.15 K (0-100 °C, liquid water at 1 atm)"

# IAPWS R12-08 Table 1: coefficients H_i of µ0.
_H0 = (1.67752, 2.20462, 0.6366564, -0.241605)
# IAPWS R12-08 Table 2: coefficients H_ij of µ1 (row i = power of 1/T̄ - 1, column j).
_H1 = (
    (5.20094e-1, 2.22531e-1, -2.81378e-1, 1.61913e-1, -3.25372e-2, 0.0, 0.0),
    (8.50895e-2, 9.99115e-1, -9.06851e-1, 2.57399e-1, 0.0, 0.0, 0.0),
    (-1.08374, 1.88797, -7.72479e-1, 0.0, 0.0, 0.0, 0.0),
    (-2.89555e-1, 1.26613, -4.89837e-1, 0.0, 6.98452e-2, 0.0, -4.35673e-3),
    (0.0, 0.0, -2.57040e-1, 0.0, 0.0, 8.72102e-3, 0.0),
    (0.0, 1.20573e-1, 0.0, 0.0, 0.0, 0.0, -5.93264e-4),
)


def check_temperature(temperature_k: float, name: str = "temperature") -> float:
    """Return the temperature if it lies in the liquid range at 1 atm, else raise."""
    t = finite(name, temperature_k)
    if not T_MIN <= t <= T_MAX:
        raise DomainError(
            f"{name} = {t:.2f} K ({t - 273.15:.2f} °C) is outside the valid range",
            field=name,
            value=temperature_k,
            expected=_RANGE,
        )
    return t


def viscosity_iapws2008(temperature_k: float, density_kg_m3: float) -> float:
    """Viscosity (Pa·s) of water at temperature T (K) and density ρ (kg/m³), IAPWS R12-08.

    µ = µ* · µ0(T̄) · µ1(T̄, ρ̄), with µ* = 1 µPa·s, T̄ = T/647.096 K, ρ̄ = ρ/322 kg/m³ and the
    critical enhancement µ2 taken as 1. This is the bare formulation: the range check is left
    to the caller so that the release's verification table (which includes steam) can be used.
    """
    tb = temperature_k / T_CRITICAL
    rb = density_kg_m3 / RHO_CRITICAL
    mu0 = 100.0 * math.sqrt(tb) / sum(h / tb**i for i, h in enumerate(_H0))
    a = 1.0 / tb - 1.0
    b = rb - 1.0
    total = sum(a**i * sum(h * b**j for j, h in enumerate(row) if h) for i, row in enumerate(_H1))
    mu1 = math.exp(rb * total)
    return 1e-6 * mu0 * mu1


def density(temperature_k: float) -> float:
    """Density (kg/m³) of air-free water at 101.325 kPa, Kell (1975), 0-100 °C."""
    t = check_temperature(temperature_k) - 273.15
    num = (
        999.83952
        + 16.945176 * t
        - 7.9870401e-3 * t**2
        - 46.170461e-6 * t**3
        + 105.56302e-9 * t**4
        - 280.54253e-12 * t**5
    )
    return num / (1.0 + 16.879850e-3 * t)


def viscosity(temperature_k: float) -> float:
    """Dynamic viscosity (Pa·s) of liquid water at 1 atm and temperature T (K).

    IAPWS 2008 formulation evaluated at the Kell (1975) density for 101.325 kPa.
    """
    return viscosity_iapws2008(temperature_k, density(temperature_k))


def surface_tension(temperature_k: float) -> float:
    """Surface tension (N/m) of water against its vapour, IAPWS R1-76(2014).

    σ = B·τ^µ·(1 + b·τ), τ = 1 - T/Tc, B = 235.8 mN/m, b = -0.625, µ = 1.256.
    """
    tau = 1.0 - check_temperature(temperature_k) / T_CRITICAL
    return 235.8e-3 * tau**1.256 * (1.0 - 0.625 * tau)
