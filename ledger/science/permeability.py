"""Clean-water flux, TMP, permeability and its temperature normalization (NWP), resistances.

SI throughout: pressures in Pa (gauge; only differences enter), flows in m³/s, area in m²,
flux in m/s, permeability in m/(s·Pa), temperature in K, resistance in 1/m.

Sources: TMP and flux definitions — M. Cheryan, *Ultrafiltration and Microfiltration Handbook*
(2nd ed., 1998), ch. 4; resistance in series J = TMP/(µ·(Rm + Rf)) — same, and R. van Reis &
A. L. Zydney, J. Membr. Sci. 297 (2007) 16. Since clean-water flux obeys J = TMP/(µ·Rm), the
permeability scales with 1/µ and NWP(T_ref) = Lp(T)·µ(T)/µ(T_ref). The exponential form
exp(U·(1/T - 1/T_ref)) is the one used to standardize RO data (ASTM D4516); with the U
values of RO practice it over-corrects UF water flux, so it is only an option here.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import NDArray

from ledger.errors import DomainError
from ledger.science import water
from ledger.science.fit import fit_line
from ledger.science.guards import finite, positive, series

Correction = Literal["viscosity", "exponential"]
DEFAULT_REFERENCE_K = 293.15


def transmembrane_pressure(feed_pa: float, retentate_pa: float, permeate_pa: float) -> float:
    """TMP (Pa) = (P_feed + P_retentate)/2 - P_permeate."""
    f = finite("feed", feed_pa)
    r = finite("retentate", retentate_pa)
    p = finite("permeate", permeate_pa)
    return (f + r) / 2.0 - p


def channel_pressure_drop(feed_pa: float, retentate_pa: float) -> float:
    """Pressure drop along the feed channel (Pa) = P_feed - P_retentate."""
    return finite("feed", feed_pa) - finite("retentate", retentate_pa)


def flux(permeate_flow_m3_s: float, area_m2: float) -> float:
    """Permeate flux J (m/s) = Qp / A."""
    q = finite("permeate_flow", permeate_flow_m3_s)
    if q < 0:
        raise DomainError(
            f"permeate_flow = {q!r} is negative",
            field="permeate_flow",
            value=q,
            expected="a flow of zero or more",
        )
    return q / positive("area", area_m2)


def permeability(flux_m_s: float, tmp_pa: float) -> float:
    """Hydraulic permeability Lp (m/(s·Pa)) = J / TMP; TMP must be positive."""
    return finite("flux", flux_m_s) / positive("tmp", tmp_pa)


def correction_factor(
    temperature_k: float,
    reference_k: float = DEFAULT_REFERENCE_K,
    method: Correction = "viscosity",
    u_kelvin: float | None = None,
) -> float:
    """Factor that takes a permeability measured at T to its value at T_ref.

    viscosity:   µ(T) / µ(T_ref)                 (water viscosities from IAPWS 2008)
    exponential: exp(U · (1/T - 1/T_ref)), U in K (ASTM D4516 form)

    Orientation: both factors exceed 1 when T < T_ref (cold water flows less, so its
    measured value is raised) and are exactly 1 at T = T_ref.
    """
    t = water.check_temperature(temperature_k)
    t_ref = water.check_temperature(reference_k, "reference_temperature")
    if method == "viscosity":
        return water.viscosity(t) / water.viscosity(t_ref)
    if method == "exponential":
        if u_kelvin is None:
            raise DomainError(
                "the exponential correction needs U (K)",
                field="u",
                value=None,
                expected="a positive constant in K, e.g. 2640 K",
            )
        u = positive("u", u_kelvin)
        return math.exp(u * (1.0 / t - 1.0 / t_ref))
    raise DomainError(
        f"correction = {method!r} is not known",
        field="correction",
        value=method,
        expected="viscosity or exponential",
    )


@dataclass(frozen=True)
class NwpPoint:
    """One clean-water flux measurement and its normalization (SI units)."""

    tmp: float
    channel_drop: float
    flux: float
    permeability: float
    temperature: float
    factor: float
    nwp: float  # permeability at the reference temperature
    reference_temperature: float
    method: str


def normalized_permeability(
    permeate_flow_m3_s: float,
    area_m2: float,
    feed_pa: float,
    retentate_pa: float,
    permeate_pa: float,
    temperature_k: float,
    reference_k: float = DEFAULT_REFERENCE_K,
    method: Correction = "viscosity",
    u_kelvin: float | None = None,
) -> NwpPoint:
    """NWP (m/(s·Pa)) at T_ref from one flow and pressure reading at temperature T."""
    tmp = transmembrane_pressure(feed_pa, retentate_pa, permeate_pa)
    j = flux(permeate_flow_m3_s, area_m2)
    lp = permeability(j, tmp)
    k = correction_factor(temperature_k, reference_k, method, u_kelvin)
    return NwpPoint(
        tmp=tmp,
        channel_drop=channel_pressure_drop(feed_pa, retentate_pa),
        flux=j,
        permeability=lp,
        temperature=temperature_k,
        factor=k,
        nwp=lp * k,
        reference_temperature=reference_k,
        method=method,
    )


@dataclass(frozen=True)
class NwpSlope:
    """NWP from several TMP points: slope of temperature-normalized flux against TMP.

    ``intercept`` (m/s) should be near zero for clean water; ``intercept_ratio`` is
    intercept / mean normalized flux, a quality flag (large values hint at a pressure offset
    or a non-linear, compacting or fouled membrane).
    """

    nwp: float
    intercept: float
    r_squared: float
    n: int
    intercept_ratio: float
    normalized_flux: tuple[float, ...]
    tmp: tuple[float, ...]
    reference_temperature: float
    method: str


def nwp_from_points(
    fluxes_m_s: Sequence[float] | NDArray[np.float64],
    tmps_pa: Sequence[float] | NDArray[np.float64],
    temperatures_k: Sequence[float] | NDArray[np.float64],
    reference_k: float = DEFAULT_REFERENCE_K,
    method: Correction = "viscosity",
    u_kelvin: float | None = None,
) -> NwpSlope:
    """Least-squares slope of J(T_ref) vs TMP over several points (≥ 2, distinct TMPs)."""
    j = series("flux", fluxes_m_s, 2)
    tmp = series("tmp", tmps_pa, 2)
    temps = series("temperature", temperatures_k, 1)
    if temps.size == 1:
        temps = np.full(j.size, temps[0])
    if not j.size == tmp.size == temps.size:
        raise DomainError(
            "flux, tmp and temperature columns differ in length",
            field="temperature",
            value=(j.size, tmp.size, temps.size),
            expected="one value per point",
        )
    if np.any(tmp <= 0):
        raise DomainError(
            "every TMP must be positive",
            field="tmp",
            value=float(tmp.min()),
            expected="a TMP greater than zero",
        )
    factors = np.array([correction_factor(t, reference_k, method, u_kelvin) for t in temps])
    jn = j * factors
    line = fit_line(tmp, jn, x_name="tmp", y_name="flux")
    mean_j = float(jn.mean())
    return NwpSlope(
        nwp=line.slope,
        intercept=line.intercept,
        r_squared=line.r_squared,
        n=line.n,
        intercept_ratio=line.intercept / mean_j if mean_j else math.inf,
        normalized_flux=tuple(float(v) for v in jn),
        tmp=tuple(float(v) for v in tmp),
        reference_temperature=reference_k,
        method=method,
    )


def recovery(nwp_m_s_pa: float, baseline_m_s_pa: float) -> float:
    """NWP recovery as a fraction of the baseline (1.0 = 100 %); both at the same T_ref."""
    return finite("nwp", nwp_m_s_pa) / positive("baseline", baseline_m_s_pa)


def membrane_resistance(tmp_pa: float, flux_m_s: float, viscosity_pa_s: float) -> float:
    """Hydraulic resistance R (1/m) = TMP / (µ·J) (Darcy's law for a membrane)."""
    j = positive("flux", flux_m_s)
    return positive("tmp", tmp_pa) / (positive("viscosity", viscosity_pa_s) * j)


def resistance_from_permeability(permeability_m_s_pa: float, viscosity_pa_s: float) -> float:
    """R (1/m) = 1 / (µ·Lp), for a permeability measured with a liquid of viscosity µ."""
    return 1.0 / (
        positive("viscosity", viscosity_pa_s) * positive("permeability", permeability_m_s_pa)
    )


@dataclass(frozen=True)
class Resistances:
    """Resistance in series (1/m): clean membrane, after use, after cleaning."""

    membrane: float
    after_use: float | None
    after_clean: float | None

    @property
    def fouling(self) -> float | None:
        """Total fouling resistance after use, R_use - R_m."""
        return None if self.after_use is None else self.after_use - self.membrane

    @property
    def residual(self) -> float | None:
        """Fouling left after cleaning (irreversible to that cleaning), R_clean - R_m."""
        return None if self.after_clean is None else self.after_clean - self.membrane

    @property
    def removed_fraction(self) -> float | None:
        """Share of the fouling resistance that cleaning removed."""
        if self.fouling is None or self.residual is None or self.fouling <= 0:
            return None
        return 1.0 - self.residual / self.fouling


def resistances(
    baseline_nwp: float,
    after_use_nwp: float | None = None,
    after_clean_nwp: float | None = None,
    reference_k: float = DEFAULT_REFERENCE_K,
) -> Resistances:
    """Resistances (1/m) from NWP values (m/(s·Pa)) normalized to the same T_ref."""
    mu = water.viscosity(water.check_temperature(reference_k, "reference_temperature"))
    return Resistances(
        membrane=resistance_from_permeability(baseline_nwp, mu),
        after_use=None
        if after_use_nwp is None
        else resistance_from_permeability(after_use_nwp, mu),
        after_clean=(
            None if after_clean_nwp is None else resistance_from_permeability(after_clean_nwp, mu)
        ),
    )
