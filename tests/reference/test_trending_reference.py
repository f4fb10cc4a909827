"""ledger.science.trending checked against outside sources (each check names its source)."""

from __future__ import annotations

import math
from collections import Counter
from typing import Any

import numpy as np
import pytest
import statsmodels.api as sm  # type: ignore[import-untyped]
from numpy.typing import NDArray
from scipy import stats

from ledger.science import trending
from ledger.science.trending import (
    LifeProjection,
    imr_limits,
    lower_bound,
    moving_range_check,
    project_life,
    run_rules,
)

# --- control-chart constants for subgroups (moving ranges) of two ------------------------------


def test_constants_match_the_table() -> None:
    # Montgomery, Introduction to Statistical Quality Control, appendix table of factors for
    # control charts, n = 2: d2 = 1.128, D3 = 0, D4 = 3.267 (values recalled from memory).
    assert trending.D2 == 1.128
    assert trending.D3 == 0.0
    assert trending.D4 == 3.267


def test_constants_agree_with_their_closed_forms() -> None:
    # Range of two independent N(0, 1): R = |Z1 - Z2| with Z1 - Z2 ~ N(0, 2), so R is half-normal
    # with scale sqrt(2) (standard result): E[R] = sqrt(2)·sqrt(2/pi) = 2/sqrt(pi), E[R²] = 2,
    # sd(R) = sqrt(2 - 4/pi). Shewhart range-chart factors (Montgomery): D4 = 1 + 3·d3/d2,
    # D3 = max(0, 1 - 3·d3/d2).
    d2 = 2.0 / math.sqrt(math.pi)
    d3 = math.sqrt(2.0 - 4.0 / math.pi)
    assert round(d2, 3) == trending.D2
    assert round(d3, 3) == 0.853  # Montgomery appendix, n = 2 (recalled from memory)
    assert round(1.0 + 3.0 * d3 / d2, 3) == trending.D4
    assert max(0.0, 1.0 - 3.0 * d3 / d2) == trending.D3
    # Individuals-chart factor 3/d2, tabulated as E2 = 2.66 (Montgomery, individuals chart).
    assert round(3.0 / d2, 2) == 2.66


def test_constants_agree_with_a_monte_carlo_of_ranges() -> None:
    # Independent check: simulate ranges of two standard normals (seeded).
    n = 4_000_000
    z = np.random.default_rng(20240611).standard_normal((n, 2))
    r = np.abs(z[:, 0] - z[:, 1])
    mean, sd = float(r.mean()), float(r.std(ddof=1))
    # 5 standard errors of the mean, plus the table's rounding to three decimals.
    assert abs(mean - trending.D2) < 5 * sd / math.sqrt(n) + 5e-4
    assert abs((1.0 + 3.0 * sd / mean) - trending.D4) < 5e-3


def test_individuals_limits_follow_the_textbook_formulas() -> None:
    # Montgomery, individuals chart: UCL/LCL = x̄ ± 2.66·MR̄, MR chart UCL = 3.267·MR̄, LCL = 0.
    # Hand arithmetic: x̄ = 58/5 = 11.6, MR̄ = (2 + 1 + 2 + 1)/4 = 1.5.
    lim = imr_limits([10.0, 12.0, 11.0, 13.0, 12.0])
    assert lim.ucl == pytest.approx(11.6 + 2.66 * 1.5, abs=1e-3)  # 2.66 is 3/d2 rounded
    assert lim.lcl == pytest.approx(11.6 - 2.66 * 1.5, abs=1e-3)
    assert lim.mr_ucl == pytest.approx(4.9005, abs=1e-12)  # 3.267 × 1.5
    assert lim.mr_lcl == 0.0


def test_sigma_estimate_recovers_the_true_sigma() -> None:
    # MR̄/d2 is an estimate of the process standard deviation for independent normal data
    # (Montgomery, individuals chart). Seeded Monte Carlo: N(50, 2²), one million points.
    x = np.random.default_rng(7).normal(50.0, 2.0, 1_000_000)
    lim = imr_limits(x)
    assert lim.centre == pytest.approx(50.0, abs=0.02)
    assert lim.sigma == pytest.approx(2.0, rel=5e-3)


# --- run rules: signal rates on in-control data against their probabilities ------------------


def _zigzag(n: int) -> int:
    # Number of alternating permutations of n items (Euler zigzag number, OEIS A000111),
    # computed with the Seidel-Entringer boustrophedon triangle.
    row = [1]
    for _ in range(n):
        nxt = [0]
        for v in reversed(row):
            nxt.append(nxt[-1] + v)
        row = nxt
    return row[-1]


N_POINTS = 2_000_000  # the tolerances below widen as 1/sqrt(n)
UNIT = imr_limits([0.564, -0.564] * 5)  # centre 0, sigma = 1.128/1.128 = 1


def _rates(x: NDArray[np.float64], rule_set: str) -> Counter[int]:
    return Counter(v.rule for v in run_rules(x, UNIT, rule_set))  # type: ignore[arg-type]


def _tolerance(p: float, length: int, n: int = N_POINTS) -> float:
    # Four conservative standard errors: signals from windows less than `length` apart are
    # correlated, so Var(count) <= n·p·(2·length - 1).
    return 4.0 * math.sqrt((2 * length - 1) / (p * n))


@pytest.fixture(scope="module")
def in_control() -> NDArray[np.float64]:
    return np.random.default_rng(1984).standard_normal(N_POINTS)


@pytest.mark.slow
def test_rule_rates_on_in_control_data(in_control: NDArray[np.float64]) -> None:
    # Probabilities that a window of independent N(0, 1) points meets each rule, from the rule's
    # definition by elementary probability; tail areas from scipy.stats.norm.
    p1 = float(stats.norm.sf(1.0))
    p2 = float(stats.norm.sf(2.0))
    expected = {
        ("western_electric", 1): (2 * float(stats.norm.sf(3.0)), 1),
        ("western_electric", 2): (2 * p2 * (1 - (1 - p2) ** 2), 3),
        ("western_electric", 3): (2 * p1 * (4 * p1**3 * (1 - p1) + p1**4), 5),
        ("western_electric", 4): (2 * 0.5**8, 8),
        ("nelson", 1): (2 * float(stats.norm.sf(3.0)), 1),
        ("nelson", 2): (2 * 0.5**9, 9),
        ("nelson", 3): (2 / math.factorial(6), 6),  # all 6! orders equally likely
        ("nelson", 4): (2 * _zigzag(14) / math.factorial(14), 14),  # André: alternating orders
        ("nelson", 5): (2 * p2 * (1 - (1 - p2) ** 2), 3),
        ("nelson", 6): (2 * p1 * (4 * p1**3 * (1 - p1) + p1**4), 5),
        ("nelson", 7): ((1 - 2 * p1) ** 15, 15),
    }
    seen = {rs: _rates(in_control, rs) for rs in ("western_electric", "nelson")}
    for (rule_set, rule), (p, length) in expected.items():
        rate = seen[rule_set][rule] / (N_POINTS - length + 1)
        assert rate == pytest.approx(p, rel=_tolerance(p, length)), (rule_set, rule)


@pytest.mark.slow
def test_rule_8_rate_on_widely_spread_data() -> None:
    # Nelson rule 8 is rare in control (~1e-4), so test it where it is common: points from
    # N(0, 3²) against unit limits, P(|X| > 1) = 2·Phi(-1/3) for each point, independently.
    n = 250_000
    x = np.random.default_rng(5).normal(0.0, 3.0, n)
    p = (2 * float(stats.norm.sf(1.0 / 3.0))) ** 8
    rate = _rates(x, "nelson")[8] / (n - 7)
    assert rate == pytest.approx(p, rel=_tolerance(p, 8, n))


def test_moving_range_rate_on_in_control_data(in_control: NDArray[np.float64]) -> None:
    # With sigma = 1 and MR̄ = d2, a moving range |Z1 - Z2| ~ |N(0, 2)| exceeds D4·d2 with
    # probability 2·Phi(-D4·d2/sqrt(2)) (half-normal tail; scipy.stats.norm).
    p = 2 * float(stats.norm.sf(UNIT.mr_ucl / math.sqrt(2.0)))
    rate = len(moving_range_check(in_control, UNIT)) / (N_POINTS - 1)
    assert rate == pytest.approx(p, rel=_tolerance(p, 2))


# --- reuse-life projection against statsmodels OLS -------------------------------------------

# Invented NWP recovery (% of baseline) against cycle number.
CYCLES = np.arange(12, dtype=float)
RECOVERY = np.array([100.0, 98.6, 98.1, 96.0, 95.9, 94.2, 93.1, 92.8, 90.7, 90.5, 88.6, 88.1])
# Few, noisy points: the bound rises to a maximum after the first cycle before it falls.
FEW_CYCLES = np.array([0.0, 1.0, 2.0, 3.0, 4.0])
FEW_RECOVERY = np.array([99.0, 97.0, 98.5, 95.0, 96.5])
# Nearly flat: the bound starts below the limit of 94 %, rises above it, then falls through it.
FLAT_CYCLES = np.arange(6, dtype=float)
FLAT_RECOVERY = np.array([95.0, 97.0, 94.0, 96.5, 95.5, 94.8])


def _ols(x: NDArray[np.float64], y: NDArray[np.float64]) -> Any:
    return sm.OLS(y, sm.add_constant(x)).fit()


def _sm_lower(res: Any, grid: NDArray[Any], confidence: float) -> NDArray[np.float64]:
    # statsmodels two-sided interval at alpha = 2·(1 - confidence): its lower column is the
    # one-sided lower bound at `confidence`.
    exog = np.column_stack([np.ones_like(grid), grid])
    ci = res.get_prediction(exog).conf_int(alpha=2 * (1 - confidence))
    return np.asarray(ci[:, 0])


CASES = [
    (CYCLES, RECOVERY, 80.0, "linear", 0.95),
    (CYCLES, RECOVERY, 80.0, "exponential", 0.95),
    (CYCLES, RECOVERY, 80.0, "linear", 0.99),
    (CYCLES / 100, RECOVERY / 100, 0.80, "linear", 0.95),
    (FEW_CYCLES, FEW_RECOVERY, 90.0, "linear", 0.95),
    (FEW_CYCLES, FEW_RECOVERY, 90.0, "exponential", 0.95),
    (FLAT_CYCLES, FLAT_RECOVERY, 94.0, "linear", 0.95),
]


def _project(
    case: tuple[NDArray[np.float64], NDArray[np.float64], float, str, float],
) -> tuple[LifeProjection, Any, float]:
    x, y, limit, model, confidence = case
    p = project_life(x, y, limit, model=model, confidence=confidence)  # type: ignore[arg-type]
    log = model == "exponential"
    res = _ols(x, np.log(y) if log else y)
    return p, res, math.log(limit) if log else limit


@pytest.mark.parametrize("case", CASES)
def test_fit_matches_statsmodels(
    case: tuple[NDArray[np.float64], NDArray[np.float64], float, str, float],
) -> None:
    # statsmodels OLS (general-purpose reference implementation).
    p, res, _ = _project(case)
    intercept, slope = res.params
    assert p.slope == pytest.approx(slope, rel=1e-10)
    assert p.intercept == pytest.approx(intercept, rel=1e-10)
    assert p.r_squared == pytest.approx(res.rsquared, rel=1e-10)
    assert p.residual_sd == pytest.approx(math.sqrt(res.scale), rel=1e-10)


@pytest.mark.parametrize("case", CASES)
def test_lower_bound_matches_statsmodels(
    case: tuple[NDArray[np.float64], NDArray[np.float64], float, str, float],
) -> None:
    # statsmodels get_prediction(...).conf_int(alpha=0.10) lower column = one-sided 95 % bound.
    p, res, _ = _project(case)
    grid = np.linspace(-5.0, 60.0, 131) * (case[0].max() / 11.0)
    ours = np.array([lower_bound(p, float(g)) for g in grid])
    theirs = _sm_lower(res, grid, case[4])
    if case[3] == "exponential":
        theirs = np.exp(theirs)
    np.testing.assert_allclose(ours, theirs, rtol=1e-10)


@pytest.mark.parametrize("case", CASES)
def test_crossing_matches_a_scan_of_the_statsmodels_bound(
    case: tuple[NDArray[np.float64], NDArray[np.float64], float, str, float],
) -> None:
    # Brute force: the last cycle, from the first one on, where the statsmodels lower bound is
    # still at or above the limit; the crossing lies within one grid step after it.
    p, res, target = _project(case)
    assert p.status == "projected" and p.bound_crossing is not None
    x0 = float(case[0].min())
    step = 1e-4 * float(case[0].max())
    grid = x0 + step * np.arange(int(3 * (p.bound_crossing - x0) / step))
    above = np.flatnonzero(_sm_lower(res, grid, case[4]) >= target)
    last = float(grid[above[-1]])
    assert last <= p.bound_crossing <= last + step
    # The fitted crossing: statsmodels line solved for the limit.
    intercept, slope = res.params
    assert p.fitted_crossing == pytest.approx((target - intercept) / slope, rel=1e-10)


def test_bound_below_limit_matches_statsmodels() -> None:
    # When the statsmodels bound (alpha = 0.10) is below the limit over the whole scan, no
    # crossing is reported.
    x = np.arange(6, dtype=float)
    y = np.array([75.0, 76.1, 74.2, 75.3, 73.9, 74.8])
    p = project_life(x, y, 80.0)
    grid = np.linspace(0.0, 200.0, 20001)
    assert float(_sm_lower(_ols(x, y), grid, 0.95).max()) < 80.0
    assert p.status == "bound_below_limit" and p.bound_crossing is None
