"""Integrity tests of a hollow-fiber module: pressure decay, defect flow, LRV and bubble point.

All quantities are SI: pressures in Pa (gauge unless a name says absolute), times in s,
volumes in m³, flows in m³/s, temperatures in K, viscosities in Pa·s, surface tension in N/m,
angles in rad.

Sources:

- Pressure-decay test, gas flow at atmosphere, air–liquid conversion ratio (ALCR) and the
  log removal value of a direct integrity test: USEPA, *Membrane Filtration Guidance Manual*,
  EPA 815-R-06-009 (2005), ch. 4; see also ASTM D6908.
- Air viscosity: Sutherland's law with the constants for air quoted in F. M. White,
  *Viscous Fluid Flow*.
- Bubble point: the Young–Laplace capillary pressure of a cylindrical pore.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ledger.errors import DomainError, out_of_range
from ledger.science.fit import fit_line
from ledger.science.guards import finite, non_negative, paired, positive, within

STANDARD_ATMOSPHERE_PA = 101325.0

SUTHERLAND_MU0_PA_S = 1.716e-5
SUTHERLAND_T0_K = 273.15
SUTHERLAND_S_K = 110.4
# Narrower than the range usually quoted for Sutherland's law: within it the law agrees with
# the Lemmon et al. (2004) air correlation to 1 %, and integrity tests never leave it.
SUTHERLAND_T_MIN_K = 200.0
SUTHERLAND_T_MAX_K = 400.0


@dataclass(frozen=True)
class DecayFit:
    """Straight-line fit through pressure-hold readings.

    ``rate_pa_s`` is positive when the pressure falls (the usual sign for a decay test) and
    negative when it rises. ``rate_se_pa_s`` is NaN for two readings. ``start_pressure_pa`` and
    ``end_pressure_pa`` are the first and last readings as measured (same reference, gauge or
    absolute, as the input).
    """

    rate_pa_s: float
    rate_se_pa_s: float
    r_squared: float
    start_pressure_pa: float
    end_pressure_pa: float
    duration_s: float
    n: int


@dataclass(frozen=True)
class DecayJudgement:
    """Outcome of comparing a measured decay rate (or gas flow) with its allowed limit.

    ``margin`` = allowed − measured, in the unit of the inputs (positive: headroom left);
    ``fraction_of_limit`` = measured / allowed.
    """

    passed: bool
    measured: float
    allowed: float
    margin: float
    fraction_of_limit: float


def decay_rate(
    times_s: Sequence[float] | NDArray[np.float64],
    pressures_pa: Sequence[float] | NDArray[np.float64],
) -> DecayFit:
    """Fit the pressure-decay rate (Pa/s) through hold-time readings by least squares.

    Times in s, strictly increasing (no duplicates); pressures in Pa, gauge or absolute (the
    rate does not depend on the reference). At least two readings. The rate is the negated
    slope of the ordinary least-squares line, so every reading counts, not only the first and
    last (DEVELOPERS.md; pressure-decay test per EPA 815-R-06-009, 2005, ch. 4).
    """
    t, p = paired("times_s", times_s, "pressures_pa", pressures_pa, 2)
    steps = np.diff(t)
    if np.any(steps <= 0.0):
        i = int(np.argmax(steps <= 0.0))
        raise DomainError(
            f"times_s must be strictly increasing; reading {i + 2} ({float(t[i + 1]):g} s) "
            f"does not follow reading {i + 1} ({float(t[i]):g} s)",
            field="times_s",
            value=float(t[i + 1]),
            expected="strictly increasing times without duplicates",
            index=i + 1,
        )
    line = fit_line(t, p, x_name="times_s", y_name="pressures_pa")
    return DecayFit(
        rate_pa_s=-line.slope,
        rate_se_pa_s=line.slope_se,
        r_squared=line.r_squared,
        start_pressure_pa=float(p[0]),
        end_pressure_pa=float(p[-1]),
        duration_s=float(t[-1] - t[0]),
        n=line.n,
    )


def checked_decay_rate(decay_rate_pa_s: float) -> float:
    """A pressure-decay rate (Pa/s) that is finite and not negative, else a DomainError."""
    rate = finite("decay_rate_pa_s", decay_rate_pa_s)
    if rate < 0.0:
        raise out_of_range(
            "decay_rate_pa_s",
            decay_rate_pa_s,
            "a value of zero or more (a rising pressure implies no gas loss; check that the "
            "temperature was stable during the hold)",
        )
    return rate


def gas_flow_from_decay(
    decay_rate_pa_s: float,
    upstream_volume_m3: float,
    atmospheric_pressure_pa: float = STANDARD_ATMOSPHERE_PA,
) -> float:
    """Air flow through the membrane implied by a pressure decay, as m³/s at atmospheric pressure.

    Q_air = V_up · (dP/dt) / P_atm, with V_up the pressurized upstream volume (m³), dP/dt the
    decay rate (Pa/s, ≥ 0) and P_atm the absolute atmospheric pressure (Pa). Isothermal ideal
    gas (Boyle's law): the gas lost from V_up is expressed as a volume at P_atm and the same
    temperature. Source: EPA 815-R-06-009 (2005) ch. 4.
    """
    rate = checked_decay_rate(decay_rate_pa_s)
    volume = positive("upstream_volume_m3", upstream_volume_m3)
    p_atm = positive("atmospheric_pressure_pa", atmospheric_pressure_pa)
    return volume * rate / p_atm


def judge_decay(measured: float, allowed: float) -> DecayJudgement:
    """Pass when ``measured`` ≤ ``allowed``.

    Works for a decay rate (Pa/s) or a gas flow (m³/s) as long as both arguments share the unit.
    The acceptance criterion (at or below the module type's limit) is common practice; the
    limit itself comes from the site's validated procedure.
    """
    m = non_negative("measured", measured)
    a = positive("allowed", allowed)
    return DecayJudgement(
        passed=m <= a,
        measured=m,
        allowed=a,
        margin=a - m,
        fraction_of_limit=m / a,
    )


def air_viscosity(temperature_k: float) -> float:
    """Dynamic viscosity of dry air (Pa·s) at low pressure by Sutherland's law.

    µ = µ0 · (T/T0)^(3/2) · (T0 + S)/(T + S), µ0 = 1.716e-5 Pa·s at T0 = 273.15 K, S = 110.4 K
    (Sutherland's law with the air constants quoted by White, *Viscous Fluid Flow*).
    Valid here from 200 K to 400 K (−73 °C to 127 °C), which is enforced: over that range the
    law agrees with the Lemmon & Jacobsen (Int. J. Thermophys. 25 (2004) 21) correlation for
    air at 1 atm within 1 %; at higher temperatures the deviation grows (about 2 % at 600 K).
    The pressure dependence is neglected (small for air up to a few bar).
    """
    t = within(
        "temperature_k",
        temperature_k,
        SUTHERLAND_T_MIN_K,
        SUTHERLAND_T_MAX_K,
        f"{SUTHERLAND_T_MIN_K:g} K to {SUTHERLAND_T_MAX_K:g} K (validity of Sutherland's law)",
    )
    return (
        SUTHERLAND_MU0_PA_S
        * (t / SUTHERLAND_T0_K) ** 1.5
        * (SUTHERLAND_T0_K + SUTHERLAND_S_K)
        / (t + SUTHERLAND_S_K)
    )


def air_liquid_conversion_ratio(
    test_pressure_pa: float,
    back_pressure_pa: float,
    operating_tmp_pa: float,
    water_viscosity_pa_s: float,
    *,
    air_viscosity_pa_s: float | None = None,
    temperature_k: float | None = None,
    atmospheric_pressure_pa: float = STANDARD_ATMOSPHERE_PA,
) -> float:
    """Air–liquid conversion ratio (ALCR, dimensionless) for a laminar (viscous-flow) defect.

    ALCR = Q_air / Q_water: the air flow through a breach during the integrity test, as volume
    at atmospheric pressure, over the water flow through the same breach in operation.

    With a breach of hydraulic conductance K (m³), laminar flow gives Q_water = K·TMP/µ_w.
    For air, the mass flow is constant along the path while the density ρ = P·M/(R·T) falls
    with pressure, so integrating Darcy / Hagen–Poiseuille flow gives
    Q_air(at P_atm) = K·(P_up² − P_down²)/(2·P_atm·µ_a), with absolute pressures
    P_up = TP + P_atm and P_down = BP + P_atm. Dividing:

        ALCR = (µ_w/µ_a) · (TP − BP)(TP + BP + 2·P_atm) / (2·P_atm·TMP)

    Inputs: TP the test pressure and BP the back pressure on the other side of the membrane
    (Pa gauge, TP > BP ≥ 0), TMP the operating transmembrane pressure (Pa), µ_w the water (or
    filtrate) viscosity at operating temperature (Pa·s, from the caller), and either µ_a
    (Pa·s) or the test temperature in K (then µ_a from :func:`air_viscosity`). P_atm absolute.

    Assumptions: flow in the defect is laminar (viscous) for both fluids; the test is
    isothermal and air is an ideal gas; air and water take the same flow path through the
    defect; the air volume is referred to atmospheric pressure at the test temperature; the
    intact membrane stays wetted, so only the defect passes bulk gas (diffusion through wetted
    pores is not modelled; it adds to the measured decay). The MFGM (EPA 815-R-06-009,
    2005, ch. 4) presents this viscous-flow (Hagen–Poiseuille) model among other ways of
    obtaining the ALCR (e.g. an orifice-flow model or empirical determination); use the
    approach the site's validated procedure names.
    """
    tp = positive("test_pressure_pa", test_pressure_pa)
    bp = non_negative("back_pressure_pa", back_pressure_pa)
    if bp >= tp:
        raise out_of_range(
            "back_pressure_pa", back_pressure_pa, f"a value below test_pressure_pa ({tp!r} Pa)"
        )
    tmp = positive("operating_tmp_pa", operating_tmp_pa)
    mu_w = positive("water_viscosity_pa_s", water_viscosity_pa_s)
    p_atm = positive("atmospheric_pressure_pa", atmospheric_pressure_pa)
    if air_viscosity_pa_s is not None and temperature_k is not None:
        raise DomainError(
            "give either air_viscosity_pa_s or temperature_k, not both",
            field="air_viscosity_pa_s",
            value=air_viscosity_pa_s,
            expected="one of air_viscosity_pa_s or temperature_k",
        )
    if air_viscosity_pa_s is not None:
        mu_a = positive("air_viscosity_pa_s", air_viscosity_pa_s)
    elif temperature_k is not None:
        mu_a = air_viscosity(temperature_k)
    else:
        raise DomainError(
            "air_viscosity_pa_s or temperature_k is needed",
            field="air_viscosity_pa_s",
            value=None,
            expected="an air viscosity in Pa·s or a test temperature in K",
        )
    return (mu_w / mu_a) * (tp - bp) * (tp + bp + 2.0 * p_atm) / (2.0 * p_atm * tmp)


def log_removal_value(
    filtrate_flow_m3_s: float,
    alcr: float,
    air_flow_m3_s: float,
    volumetric_concentration_factor: float = 1.0,
) -> float:
    """Log removal value verified by a direct integrity test (dimensionless).

    LRV = log10(Qp · ALCR / (VCF · Q_air)), with Qp the filtrate flow of the unit (m³/s),
    ALCR the air–liquid conversion ratio, VCF the volumetric concentration factor (≥ 1; 1 for
    dead-end or unconcentrated feed) and Q_air the air flow at atmospheric pressure from the
    test (m³/s, > 0). Source: EPA 815-R-06-009 (2005) ch. 4. A zero air flow would mean an
    unbounded LRV; report the test's sensitivity limit instead.
    """
    qp = positive("filtrate_flow_m3_s", filtrate_flow_m3_s)
    ratio = positive("alcr", alcr)
    q_air = finite("air_flow_m3_s", air_flow_m3_s)
    if q_air <= 0.0:
        raise out_of_range(
            "air_flow_m3_s",
            air_flow_m3_s,
            "a value greater than zero (zero air flow gives no finite LRV; use the "
            "test's sensitivity limit)",
        )
    vcf = finite("volumetric_concentration_factor", volumetric_concentration_factor)
    if vcf < 1.0:
        raise out_of_range(
            "volumetric_concentration_factor",
            volumetric_concentration_factor,
            "a value of 1 or more",
        )
    # a sum of logarithms: the product of two small positive inputs could underflow to 0
    return math.log10(qp) + math.log10(ratio) - math.log10(vcf) - math.log10(q_air)


def _cos_wetting(contact_angle_rad: float) -> float:
    theta = finite("contact_angle_rad", contact_angle_rad)
    if not 0.0 <= theta < math.pi / 2.0:
        raise out_of_range(
            "contact_angle_rad", contact_angle_rad, "0 ≤ angle < π/2 rad (a wetting liquid)"
        )
    return math.cos(theta)


def bubble_point_pressure(
    pore_diameter_m: float, surface_tension_n_m: float, contact_angle_rad: float = 0.0
) -> float:
    """Bubble-point pressure (Pa, differential) of a cylindrical pore by Young–Laplace.

    P = 4·γ·cosθ/d, with d the pore diameter (m), γ the surface tension of the wetting liquid
    (N/m; for water see the IAPWS 2014 release on surface tension) and θ the contact angle
    (rad, default 0: complete wetting).
    """
    d = positive("pore_diameter_m", pore_diameter_m)
    gamma = positive("surface_tension_n_m", surface_tension_n_m)
    return 4.0 * gamma * _cos_wetting(contact_angle_rad) / d


def pore_diameter_from_bubble_point(
    bubble_point_pa: float, surface_tension_n_m: float, contact_angle_rad: float = 0.0
) -> float:
    """Largest-pore diameter (m) implied by a bubble-point pressure (Pa) by Young–Laplace.

    d = 4·γ·cosθ/P, the inverse of :func:`bubble_point_pressure`; γ in N/m, θ in rad.
    """
    p = positive("bubble_point_pa", bubble_point_pa)
    gamma = positive("surface_tension_n_m", surface_tension_n_m)
    return 4.0 * gamma * _cos_wetting(contact_angle_rad) / p
