"""Concentration, diafiltration wash-out, buffer use and module loading (SI units).

Volumes in m³, concentrations in kg/m³ (= g/L), areas in m²; rejection, sieving and removal
are fractions (0-1). Sources: M. Cheryan, *Ultrafiltration and Microfiltration Handbook*
(2nd ed., 1998), ch. 5 and 8; R. van Reis & A. L. Zydney, J. Membr. Sci. 297 (2007) 16.

- Concentration by a factor CF = V0/Vf of a species with observed rejection R (constant):
  Cf/C0 = CF^R and yield (mass retained) = CF^(R-1).
- Constant-volume diafiltration with N diavolumes of a species with sieving S = 1 - R:
  C/C0 = exp(-N·S); N = ln(C0/C)/S; buffer = N·V.
- Discontinuous (dilute/concentrate) diafiltration, dilution by d then concentration back to
  V in each of n steps: mass retained per step = d^(-S) (from dM/M = S·dV/V during the
  concentration; the dilution keeps the mass), buffer = n·(d-1)·V.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ledger.errors import DomainError
from ledger.science.guards import non_negative, positive, whole, within


def _fraction(name: str, value: float) -> float:
    return within(name, value, 0.0, 1.0, "a fraction from 0 to 1 (0-100 %)")


def concentration_factor(initial_volume_m3: float, final_volume_m3: float) -> float:
    """Volumetric concentration factor CF = V0/Vf (≥ 1 for a concentration step)."""
    v0 = positive("initial_volume", initial_volume_m3)
    vf = positive("final_volume", final_volume_m3)
    if vf > v0:
        raise DomainError(
            f"final_volume ({vf!r} m³) exceeds initial_volume ({v0!r} m³)",
            field="final_volume",
            value=vf,
            expected="a final volume no larger than the initial volume",
        )
    return v0 / vf


def _factor(cf: float) -> float:
    x = positive("factor", cf)
    if x < 1.0:
        raise DomainError(
            f"factor = {cf!r} is below 1",
            field="factor",
            value=cf,
            expected="a concentration factor of 1 or more",
        )
    return x


def concentrated_ratio(factor: float, rejection: float = 1.0) -> float:
    """Retentate concentration ratio Cf/C0 = CF^R after concentrating by CF."""
    return _factor(factor) ** _fraction("rejection", rejection)


def concentration_yield(factor: float, rejection: float = 1.0) -> float:
    """Fraction of the species kept in the retentate after concentrating: CF^(R-1)."""
    return _factor(factor) ** (_fraction("rejection", rejection) - 1.0)


def final_volume(initial_volume_m3: float, factor: float) -> float:
    """Final retentate volume (m³) = V0/CF."""
    return positive("initial_volume", initial_volume_m3) / _factor(factor)


def _sieving(s: float) -> float:
    x = _fraction("sieving", s)
    if x == 0.0:
        raise DomainError(
            "sieving = 0 means the species never passes; no number of diavolumes removes it",
            field="sieving",
            value=s,
            expected="a sieving coefficient above 0 and up to 1",
        )
    return x


def washout_remaining(diavolumes: float, sieving: float = 1.0) -> float:
    """Fraction left after N diavolumes of constant-volume diafiltration: exp(-N·S)."""
    return math.exp(-non_negative("diavolumes", diavolumes) * _fraction("sieving", sieving))


def diavolumes_for_removal(removal: float, sieving: float = 1.0) -> float:
    """Diavolumes N for a removal fraction (e.g. 0.999): N = -ln(1 - removal)/S."""
    r = within(
        "removal", removal, 0.0, 1.0, "a removal fraction from 0 up to, not including, 100 %"
    )
    if r >= 1.0:
        raise DomainError(
            "removal = 100 % cannot be reached by wash-out",
            field="removal",
            value=removal,
            expected="a removal below 100 %, e.g. 99.9 %",
        )
    return -math.log1p(-r) / _sieving(sieving)


def buffer_volume(diavolumes: float, volume_m3: float) -> float:
    """Buffer consumed (m³) by N diavolumes at constant retentate volume V: N·V."""
    return non_negative("diavolumes", diavolumes) * positive("volume", volume_m3)


def _dilution(dilution_factor: float) -> float:
    d = positive("dilution_factor", dilution_factor)
    if d <= 1.0:
        raise DomainError(
            f"dilution_factor = {dilution_factor!r} does not dilute",
            field="dilution_factor",
            value=dilution_factor,
            expected="a dilution factor above 1 (e.g. 2 = add one volume of buffer)",
        )
    return d


@dataclass(frozen=True)
class Discontinuous:
    """Outcome of n dilute/concentrate steps of dilution factor d (volumes in units of V)."""

    steps: int
    dilution_factor: float
    remaining: float
    buffer_per_volume: float  # buffer used / retentate volume V
    continuous_buffer_per_volume: float  # N·1 for the same removal by constant-volume DF


def discontinuous_diafiltration(
    dilution_factor: float, steps: int, sieving: float = 1.0
) -> Discontinuous:
    """Remaining fraction d^(-n·S) and buffer n·(d-1)·V after n dilute/concentrate steps."""
    d = _dilution(dilution_factor)
    n = whole("steps", steps)
    s = _sieving(sieving)
    remaining = d ** (-n * s)
    return Discontinuous(
        steps=n,
        dilution_factor=d,
        remaining=remaining,
        buffer_per_volume=n * (d - 1.0),
        continuous_buffer_per_volume=-math.log(remaining) / s,
    )


def steps_for_removal(removal: float, dilution_factor: float, sieving: float = 1.0) -> int:
    """Fewest dilute/concentrate steps of factor d that reach the removal fraction."""
    n_cont = diavolumes_for_removal(removal, sieving)
    d = _dilution(dilution_factor)
    # n·S·ln d >= N·S  <=>  n >= N / ln d; the tolerance keeps exact cases from rounding up.
    return max(1, math.ceil(n_cont / math.log(d) - 1e-9))


def volumetric_loading(volume_m3: float, area_m2: float) -> float:
    """Volume processed per membrane area (m³/m² = m; 1 L/m² = 1e-3 m)."""
    return positive("volume", volume_m3) / positive("area", area_m2)


def mass_loading(mass_kg: float, area_m2: float) -> float:
    """Product mass per membrane area (kg/m²; 1 g/m² = 1e-3 kg/m²)."""
    return positive("mass", mass_kg) / positive("area", area_m2)
