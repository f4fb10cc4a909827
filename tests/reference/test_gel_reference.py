"""ledger.science.gel checked against independent fits and a numerical optimizer.

Each check names its source beside it. scipy and statsmodels are test-only references here.
The flux data are invented (synthetic, noisy), not taken from a publication.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from numpy.typing import NDArray
from scipy import stats
from scipy.optimize import curve_fit, minimize_scalar

from ledger.science import gel

LMH = 1.0 / 3.6e6  # 1 L/(m²·h) in m/s


def _noisy_dataset(seed: int) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    # Invented: k = 22 LMH, Cg = 240 g/L, 9 points, 4 % multiplicative noise.
    rng = np.random.default_rng(seed)
    c = np.array([12.0, 20.0, 32.0, 48.0, 65.0, 85.0, 110.0, 140.0, 175.0])
    j = 22.0 * LMH * np.log(240.0 / c) * (1.0 + rng.normal(0.0, 0.04, c.size))
    return c, j


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_fit_matches_scipy_linregress(seed: int) -> None:
    # Reference: scipy.stats.linregress of J on ln(Cb) (independent OLS implementation).
    c, j = _noisy_dataset(seed)
    ref = stats.linregress(np.log(c), j)
    fit = gel.fit_gel_model(c, j)
    assert fit.k_m_s == pytest.approx(-ref.slope, rel=1e-10)
    assert fit.k_se_m_s == pytest.approx(ref.stderr, rel=1e-8)
    assert fit.cg_kg_m3 == pytest.approx(math.exp(-ref.intercept / ref.slope), rel=1e-10)
    assert fit.r_squared == pytest.approx(ref.rvalue**2, rel=1e-10)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_cg_standard_error_matches_statsmodels_covariance_with_numerical_gradient(
    seed: int,
) -> None:
    # Reference: statsmodels OLS parameter covariance, propagated to Cg = exp(−a/b) with a
    # central-difference gradient (delta method computed independently of the analytic one).
    c, j = _noisy_dataset(seed)
    res = sm.OLS(j, sm.add_constant(np.log(c))).fit()
    a, b = (float(v) for v in res.params)
    cov = np.asarray(res.cov_params())

    def cg_of(p: NDArray[np.float64]) -> float:
        return math.exp(-p[0] / p[1])

    theta = np.array([a, b])
    grad = np.empty(2)
    for i in range(2):
        h = 1e-6 * abs(theta[i])
        up, dn = theta.copy(), theta.copy()
        up[i] += h
        dn[i] -= h
        grad[i] = (cg_of(up) - cg_of(dn)) / (2.0 * h)
    se_ref = math.sqrt(float(grad @ cov @ grad))

    fit = gel.fit_gel_model(c, j)
    assert fit.cg_se_kg_m3 == pytest.approx(se_ref, rel=1e-5)
    assert fit.k_se_m_s == pytest.approx(float(res.bse[1]), rel=1e-8)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_fit_matches_direct_nonlinear_least_squares_in_k_and_cg(seed: int) -> None:
    # Reference: scipy.optimize.curve_fit of J = k·ln(Cg/Cb) directly in (k, Cg). The model is
    # a reparametrization of the straight line, so the optimum is the same and the linearized
    # covariance at the optimum equals the delta-method covariance.
    c, j = _noisy_dataset(seed)

    def model(cb: NDArray[np.float64], k_lmh: float, cg: float) -> NDArray[np.float64]:
        return k_lmh * LMH * np.log(cg / cb)

    popt, pcov = curve_fit(model, c, j, p0=[15.0, 200.0], xtol=1e-14, ftol=1e-14, gtol=1e-14)
    fit = gel.fit_gel_model(c, j)
    assert fit.k_m_s == pytest.approx(popt[0] * LMH, rel=1e-7)
    assert fit.cg_kg_m3 == pytest.approx(popt[1], rel=1e-7)
    assert fit.k_se_m_s == pytest.approx(math.sqrt(pcov[0, 0]) * LMH, rel=1e-4)
    assert fit.cg_se_kg_m3 == pytest.approx(math.sqrt(pcov[1, 1]), rel=1e-4)


@pytest.mark.parametrize(("k_lmh", "cg"), [(22.0, 240.0), (8.0, 90.0), (45.0, 420.0)])
def test_optimum_matches_numerical_minimization_of_diafiltration_time(
    k_lmh: float, cg: float
) -> None:
    # Reference: scipy.optimize.minimize_scalar on t(Cb) = N·M/(A·Cb·k·ln(Cg/Cb)), written
    # here from the definitions (V = M/Cb, buffer N·V, t = buffer/(J·A)); Ng, Lundblad & Mitra,
    # Sep. Sci. 11 (1976) 499 give the closed form Cg/e.
    k = k_lmh * LMH
    mass, n_dv, area = 0.8, 7.0, 0.45

    def t_of(cb: float) -> float:
        return n_dv * mass / (area * cb * k * math.log(cg / cb))

    res = minimize_scalar(
        t_of, bounds=(1e-3 * cg, 0.999 * cg), method="bounded", options={"xatol": 1e-10 * cg}
    )
    assert res.success
    c_opt = gel.optimum_concentration((k, cg))
    assert c_opt == pytest.approx(res.x, rel=1e-6)

    plan = gel.diafiltration_at((k, cg), mass, c_opt, n_dv, area)
    assert plan.time_s == pytest.approx(res.fun, rel=1e-10)
    assert plan.flux_m_s == pytest.approx(k, rel=1e-12)  # J = k at the optimum (Ng et al.)


def test_code_time_curve_has_its_minimum_at_the_reported_optimum() -> None:
    # Reference: scipy.optimize.minimize_scalar on the module's own time function, to show the
    # planner and the optimum agree (the closed form is checked independently above).
    k, cg = 22.0 * LMH, 240.0
    res = minimize_scalar(
        lambda cb: gel.diafiltration_at((k, cg), 1.0, cb, 5.0, 1.0).time_s,
        bounds=(1.0, 239.0),
        method="bounded",
        options={"xatol": 1e-9},
    )
    assert res.x == pytest.approx(gel.optimum_concentration((k, cg)), rel=1e-6)
