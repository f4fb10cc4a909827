"""Gel-polarization model of limiting flux, and the diafiltration concentration it implies.

In the pressure-independent (mass-transfer-limited) regime of ultrafiltration the permeate
flux follows J = k·ln(Cg/Cb), with k the mass-transfer coefficient (m/s), Cg the gel (wall)
concentration and Cb the bulk concentration of the retained product (kg/m³ = g/L). The
diafiltration time at fixed product mass, membrane area and number of diavolumes is
proportional to 1/(Cb·J(Cb)), which is least at Cb = Cg/e, where J = k.

Sources: P. Ng, J. Lundblad and G. Mitra, *Sep. Sci.* 11 (1976) 499 (the model applied to
optimizing diafiltration); R. van Reis and A. L. Zydney, *J. Membr. Sci.* 297 (2007) 16
(review of bioprocess membrane technology).

Units are SI throughout: flux in m/s, concentration in kg/m³, mass in kg, volume in m³,
area in m², time in s.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TypeAlias

import numpy as np
from numpy.typing import NDArray

from ledger.errors import DomainError, out_of_range
from ledger.science.fit import fit_line
from ledger.science.guards import paired, positive


@dataclass(frozen=True)
class GelFit:
    """Gel-polarization parameters fitted from flux-vs-concentration points.

    ``k_m_s``: mass-transfer coefficient (m/s); ``cg_kg_m3``: gel concentration (kg/m³);
    ``k_se_m_s`` and ``cg_se_kg_m3``: their standard errors (NaN when fitted from 2 points);
    ``r_squared`` of J on ln(Cb); ``residual_sd_m_s`` (NaN for 2 points); ``n`` points.
    """

    k_m_s: float
    k_se_m_s: float
    cg_kg_m3: float
    cg_se_kg_m3: float
    r_squared: float
    residual_sd_m_s: float
    n: int

    def flux_at(self, concentration_kg_m3: float) -> float:
        """Model flux J = k·ln(Cg/Cb) in m/s at bulk concentration Cb (kg/m³)."""
        return gel_flux(self.k_m_s, self.cg_kg_m3, concentration_kg_m3)


@dataclass(frozen=True)
class DiafiltrationPlan:
    """Constant-volume diafiltration at one bulk concentration.

    ``volume_m3`` = M/Cb held in the system; ``buffer_volume_m3`` = N·V; ``flux_m_s`` = J(Cb);
    ``time_s`` = N·V/(J·A).
    """

    concentration_kg_m3: float
    product_mass_kg: float
    diavolumes: float
    area_m2: float
    volume_m3: float
    buffer_volume_m3: float
    flux_m_s: float
    time_s: float


@dataclass(frozen=True)
class DiafiltrationComparison:
    """A chosen diafiltration concentration set against the gel-model optimum Cb = Cg/e.

    ``time_ratio`` = chosen time / optimum time (≥ 1 by construction of the optimum);
    ``extra_time_s`` = chosen − optimum time; ``buffer_difference_m3`` = chosen − optimum buffer
    (negative when the chosen concentration is above the optimum: less buffer, more time).
    """

    optimum: DiafiltrationPlan
    chosen: DiafiltrationPlan
    time_ratio: float
    extra_time_s: float
    buffer_difference_m3: float


GelModel: TypeAlias = GelFit | tuple[float, float]


def _k_cg(model: GelModel) -> tuple[float, float]:
    if isinstance(model, GelFit):
        k, cg = model.k_m_s, model.cg_kg_m3
    else:
        try:
            k, cg = model
        except (TypeError, ValueError):
            raise DomainError(
                f"gel model {model!r} is neither a GelFit nor a (k_m_s, cg_kg_m3) pair",
                field="model",
                value=model,
                expected="a GelFit or a (k_m_s, cg_kg_m3) pair",
            ) from None
    return positive("k_m_s", k), positive("cg_kg_m3", cg)


def gel_flux(k_m_s: float, cg_kg_m3: float, concentration_kg_m3: float) -> float:
    """Gel-polarization flux J = k·ln(Cg/Cb) (m/s); k in m/s, Cg and Cb in kg/m³.

    Source: Ng, Lundblad & Mitra, Sep. Sci. 11 (1976) 499. The result is ≤ 0 for Cb ≥ Cg,
    where the model predicts no flux.
    """
    k = positive("k_m_s", k_m_s)
    cg = positive("cg_kg_m3", cg_kg_m3)
    cb = positive("concentration_kg_m3", concentration_kg_m3)
    return k * math.log(cg / cb)


def fit_gel_model(
    concentrations_kg_m3: Sequence[float] | NDArray[np.float64],
    fluxes_m_s: Sequence[float] | NDArray[np.float64],
) -> GelFit:
    """Fit k (m/s) and Cg (kg/m³) of J = k·ln(Cg/Cb) from limiting-flux data.

    Ordinary least squares of J (m/s) on ln(Cb) (Cb in kg/m³): slope = −k, intercept = k·ln Cg,
    so Cg = exp(−intercept/slope). The standard error of k is that of the slope; the standard
    error of Cg is propagated by the delta method with the intercept–slope covariance. Two
    points give an exact line with NaN standard errors; three or more give finite errors.
    Points should be limiting (pressure-independent) fluxes. A fit in which flux does not fall
    with concentration (k ≤ 0) is refused. Sources: Ng, Lundblad & Mitra, Sep. Sci. 11 (1976)
    499; van Reis & Zydney, J. Membr. Sci. 297 (2007) 16.
    """
    c, j = paired("concentrations_kg_m3", concentrations_kg_m3, "fluxes_m_s", fluxes_m_s, 2)
    if np.any(c <= 0.0):
        raise out_of_range(
            "concentrations_kg_m3", float(c[np.argmax(c <= 0.0)]), "values greater than zero"
        )
    if np.any(j <= 0.0):
        raise out_of_range("fluxes_m_s", float(j[np.argmax(j <= 0.0)]), "values greater than zero")
    if float(c.max()) == float(c.min()):
        raise DomainError(
            "all concentrations_kg_m3 are equal; the gel model needs at least two concentrations",
            field="concentrations_kg_m3",
            value=float(c[0]),
            expected="at least two different concentrations",
        )
    line = fit_line(np.log(c), j, x_name="ln(concentrations_kg_m3)", y_name="fluxes_m_s")
    a, b = line.intercept, line.slope
    if b >= 0.0:
        raise DomainError(
            f"flux does not fall with concentration (fitted k = {-b!r} m/s); the gel model "
            "needs limiting fluxes that decrease as concentration rises",
            field="fluxes_m_s",
            value=-b,
            expected="fluxes that fall with concentration (k > 0)",
        )
    k = -b
    cg = math.exp(-a / b)
    # delta method on Cg = exp(-a/b): dCg/da = -Cg/b, dCg/db = Cg·a/b²
    d_a = -cg / b
    d_b = cg * a / b**2
    var_cg = (
        d_a**2 * line.intercept_se**2
        + d_b**2 * line.slope_se**2
        + 2.0 * d_a * d_b * line.covariance
    )
    cg_se = math.sqrt(var_cg) if var_cg >= 0.0 else math.nan
    return GelFit(
        k_m_s=k,
        k_se_m_s=line.slope_se,
        cg_kg_m3=cg,
        cg_se_kg_m3=cg_se,
        r_squared=line.r_squared,
        residual_sd_m_s=line.residual_sd,
        n=line.n,
    )


def optimum_concentration(model: GelModel) -> float:
    """Bulk concentration (kg/m³) that minimizes constant-volume diafiltration time: Cb* = Cg/e.

    At fixed product mass M, area A and diavolumes N, t = N·M/(A·Cb·J(Cb)); with
    J = k·ln(Cg/Cb), Cb·ln(Cg/Cb) is largest at ln(Cg/Cb) = 1, i.e. Cb = Cg/e, where J = k.
    ``model`` is a :class:`GelFit` or a (k_m_s, cg_kg_m3) pair. Source: Ng, Lundblad & Mitra,
    Sep. Sci. 11 (1976) 499.
    """
    _, cg = _k_cg(model)
    return cg / math.e


def diafiltration_at(
    model: GelModel,
    product_mass_kg: float,
    concentration_kg_m3: float,
    diavolumes: float,
    area_m2: float,
) -> DiafiltrationPlan:
    """Volume, buffer, flux and time of constant-volume diafiltration at concentration Cb.

    V = M/Cb (m³), buffer = N·V (m³), J = k·ln(Cg/Cb) (m/s), t = N·V/(J·A) (s); M in kg, Cb
    in kg/m³, A in m². Assumes the product is fully retained (Cb constant through the step) and
    that the flux is the gel-limited flux at Cb; the concentration step before it is not
    included. ``model`` is a :class:`GelFit` or a (k_m_s, cg_kg_m3) pair. Source of the flux
    model: Ng, Lundblad & Mitra, Sep. Sci. 11 (1976) 499.
    """
    k, cg = _k_cg(model)
    mass = positive("product_mass_kg", product_mass_kg)
    cb = positive("concentration_kg_m3", concentration_kg_m3)
    n_dv = positive("diavolumes", diavolumes)
    area = positive("area_m2", area_m2)
    if cb >= cg:
        raise out_of_range(
            "concentration_kg_m3",
            concentration_kg_m3,
            f"a value below the gel concentration {cg:.6g} kg/m³ (the model predicts no flux)",
        )
    volume = mass / cb
    buffer = n_dv * volume
    flux = k * math.log(cg / cb)
    return DiafiltrationPlan(
        concentration_kg_m3=cb,
        product_mass_kg=mass,
        diavolumes=n_dv,
        area_m2=area,
        volume_m3=volume,
        buffer_volume_m3=buffer,
        flux_m_s=flux,
        time_s=buffer / (flux * area),
    )


def compare_with_optimum(
    model: GelModel,
    product_mass_kg: float,
    concentration_kg_m3: float,
    diavolumes: float,
    area_m2: float,
) -> DiafiltrationComparison:
    """Diafiltration at a chosen Cb against the time-optimal Cb* = Cg/e (see above for units)."""
    chosen = diafiltration_at(model, product_mass_kg, concentration_kg_m3, diavolumes, area_m2)
    best = diafiltration_at(
        model, product_mass_kg, optimum_concentration(model), diavolumes, area_m2
    )
    return DiafiltrationComparison(
        optimum=best,
        chosen=chosen,
        time_ratio=chosen.time_s / best.time_s,
        extra_time_s=chosen.time_s - best.time_s,
        buffer_difference_m3=chosen.buffer_volume_m3 - best.buffer_volume_m3,
    )
