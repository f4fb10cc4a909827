"""Behaviour of ledger.science.trending: limits, run rules, reuse-life projection."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st

from ledger.errors import DomainError
from ledger.science.trending import (
    ImrLimits,
    imr_limits,
    lower_bound,
    moving_range_check,
    project_life,
    run_rules,
)

# A baseline with centre 0 and MR̄ = 1.128 = d2, so sigma = 1: the series below are in sigma units.
UNIT_BASELINE = [0.564, -0.564] * 5


@pytest.fixture
def unit() -> ImrLimits:
    lim = imr_limits(UNIT_BASELINE)
    assert lim.centre == pytest.approx(0.0, abs=1e-12)
    assert lim.sigma == pytest.approx(1.0, rel=1e-12)
    return lim


def rules(values: list[float], lim: ImrLimits, rule_set: str) -> set[int]:
    return {v.rule for v in run_rules(values, lim, rule_set)}  # type: ignore[arg-type]


# --- limits ----------------------------------------------------------------------------------


def test_limits_from_hand_computed_baseline() -> None:
    # x̄ = 58/5 = 11.6; moving ranges 2, 1, 2, 1 -> MR̄ = 1.5 (worked by hand).
    lim = imr_limits([10.0, 12.0, 11.0, 13.0, 12.0])
    assert lim.n == 5
    assert lim.centre == pytest.approx(11.6)
    assert lim.mr_bar == pytest.approx(1.5)
    assert lim.sigma == pytest.approx(1.5 / 1.128)
    assert lim.ucl == pytest.approx(11.6 + 3 * 1.5 / 1.128)
    assert lim.lcl == pytest.approx(11.6 - 3 * 1.5 / 1.128)
    assert lim.upper_2sigma == pytest.approx(11.6 + 2 * 1.5 / 1.128)
    assert lim.lower_1sigma == pytest.approx(11.6 - 1.5 / 1.128)
    assert lim.mr_ucl == pytest.approx(3.267 * 1.5)
    assert lim.mr_lcl == 0.0


@pytest.mark.parametrize(
    ("baseline", "field"),
    [
        ([5.0], "baseline"),
        ([1.0, math.nan, 2.0], "baseline"),
        ([1.0, math.inf, 2.0], "baseline"),
        ([3.0, 3.0, 3.0], "baseline"),
    ],
)
def test_limits_refuse_bad_baseline(baseline: list[float], field: str) -> None:
    with pytest.raises(DomainError) as err:
        imr_limits(baseline)
    assert err.value.field == field
    assert field in str(err.value)


# --- run rules: each hand-built series trips exactly its rule ---------------------------------

CALM = [0.3, -0.2, 0.6, 0.1, -0.7, -0.3, 0.4, 1.2, 0.2, -0.5]
CALM += [-0.1, 0.5, -1.1, 0.3, 0.7, -0.4, 0.2, -0.6, 0.5, 0.1]
BEYOND_3 = [0.2, -0.4, 0.5, 3.5, -0.3, 0.1]
TWO_OF_THREE = [0.2, -0.4, 2.5, 0.3, 2.4, -0.2]
FOUR_OF_FIVE = [0.3, -0.5, 1.5, 1.3, 0.4, 1.6, 1.2, -0.6]
EIGHT_ABOVE = [-0.3, 0.4, 0.2, 0.6, 0.1, 0.5, 0.3, 0.7, 0.2, -0.4]
NINE_ABOVE = [-0.3, 0.4, 0.2, 0.6, 0.1, 0.5, 0.3, 0.7, 0.2, 0.4, -0.4]
SIX_RISING = [0.3, -0.8, -0.5, -0.1, 0.2, 0.5, 0.8, -0.2]
FOURTEEN_ALTERNATING = [0.4, -0.3, 0.6, -0.5, 0.2, -0.7, 0.5, -0.2, 0.8, -0.4, 0.3, -0.6, 0.7, -0.1]
FIFTEEN_INSIDE = [0.2, 0.5, -0.3, -0.6, 0.4, 0.1, -0.2, 0.6, 0.3, -0.5, -0.1, 0.7, 0.2, -0.4, 0.5]
EIGHT_OUTSIDE = [0.2, 1.5, -1.4, 1.3, -1.6, 1.2, -1.5, 1.4, -1.3, 0.1]


def test_calm_series_trips_nothing(unit: ImrLimits) -> None:
    assert run_rules(CALM, unit, "western_electric") == []
    assert run_rules(CALM, unit, "nelson") == []
    assert moving_range_check(CALM, unit) == []


@pytest.mark.parametrize(
    ("series", "rule", "index", "indices"),
    [
        (BEYOND_3, 1, 3, (3,)),
        (TWO_OF_THREE, 2, 4, (2, 4)),
        (FOUR_OF_FIVE, 3, 6, (2, 3, 5, 6)),
        (EIGHT_ABOVE, 4, 8, tuple(range(1, 9))),
    ],
)
def test_western_electric_rules(
    unit: ImrLimits, series: list[float], rule: int, index: int, indices: tuple[int, ...]
) -> None:
    found = run_rules(series, unit, "western_electric")
    assert [(v.rule_set, v.rule, v.index, v.indices) for v in found] == [
        ("western_electric", rule, index, indices)
    ]
    assert found[0].description


@pytest.mark.parametrize(
    ("series", "rule", "index", "indices"),
    [
        (BEYOND_3, 1, 3, (3,)),
        (NINE_ABOVE, 2, 9, tuple(range(1, 10))),
        (SIX_RISING, 3, 6, tuple(range(1, 7))),
        (FOURTEEN_ALTERNATING, 4, 13, tuple(range(14))),
        (TWO_OF_THREE, 5, 4, (2, 4)),
        (FOUR_OF_FIVE, 6, 6, (2, 3, 5, 6)),
        (FIFTEEN_INSIDE, 7, 14, tuple(range(15))),
        (EIGHT_OUTSIDE, 8, 8, tuple(range(1, 9))),
    ],
)
def test_nelson_rules(
    unit: ImrLimits, series: list[float], rule: int, index: int, indices: tuple[int, ...]
) -> None:
    found = run_rules(series, unit, "nelson")
    assert [(v.rule_set, v.rule, v.index, v.indices) for v in found] == [
        ("nelson", rule, index, indices)
    ]


def test_mirrored_series_trip_the_same_rules_on_the_other_side(unit: ImrLimits) -> None:
    falling = [-v for v in SIX_RISING]
    below = [-v for v in EIGHT_ABOVE]
    assert [(v.rule, v.indices) for v in run_rules(falling, unit, "nelson")] == [
        (3, tuple(range(1, 7)))
    ]
    assert "falling" in run_rules(falling, unit, "nelson")[0].description
    assert "below" in run_rules(below, unit, "western_electric")[0].description
    assert rules([-v for v in BEYOND_3], unit, "western_electric") == {1}


def test_one_point_short_of_each_run_trips_nothing(unit: ImrLimits) -> None:
    assert rules(EIGHT_ABOVE, unit, "nelson") == set()  # 8 above: Nelson needs 9
    assert rules(EIGHT_ABOVE[1:8], unit, "western_electric") == set()  # 7 above: WE needs 8
    assert rules(SIX_RISING[1:6], unit, "nelson") == set()
    assert rules(FOURTEEN_ALTERNATING[:13], unit, "nelson") == set()
    assert rules(FIFTEEN_INSIDE[:14], unit, "nelson") == set()
    assert rules(EIGHT_OUTSIDE[:8], unit, "nelson") == set()


def test_longer_run_is_reported_at_every_completing_point(unit: ImrLimits) -> None:
    found = run_rules(NINE_ABOVE, unit, "western_electric")
    assert [(v.rule, v.index) for v in found] == [(4, 8), (4, 9)]


def test_point_on_the_centre_line_breaks_a_run(unit: ImrLimits) -> None:
    broken = [*EIGHT_ABOVE[:4], 0.0, *EIGHT_ABOVE[5:]]
    assert rules(broken, unit, "western_electric") == set()


def test_cluster_at_the_start_is_caught(unit: ImrLimits) -> None:
    found = run_rules([2.5, 2.6, 0.1, -0.3], unit, "western_electric")
    assert [(v.rule, v.index, v.indices) for v in found] == [(2, 1, (0, 1))]


def test_moving_range_above_its_limit(unit: ImrLimits) -> None:
    # MR UCL = 3.267 * 1.128 = 3.685; the ranges are 0.5, 4.0, 0.3.
    found = moving_range_check([0.0, 0.5, 4.5, 4.2], unit)
    assert [(v.rule_set, v.rule, v.index, v.indices) for v in found] == [
        ("moving_range", 1, 2, (1, 2))
    ]


def test_rule_errors(unit: ImrLimits) -> None:
    with pytest.raises(DomainError) as err:
        run_rules([0.1, 0.2], unit, "shewhart")  # type: ignore[arg-type]
    assert err.value.field == "rule_set"
    with pytest.raises(DomainError) as err:
        run_rules([0.1, math.nan], unit, "nelson")
    assert err.value.field == "values"
    with pytest.raises(DomainError) as err:
        moving_range_check([0.1], unit)
    assert err.value.field == "values"


# --- reuse-life projection -------------------------------------------------------------------

CYCLES = [0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0]
RECOVERY = [100.0, 98.4, 97.9, 96.1, 95.6, 93.8, 93.5, 91.6, 90.9, 89.2]


def test_projection_on_declining_series() -> None:
    p = project_life(CYCLES, RECOVERY, 80.0)
    assert p.status == "projected"
    assert p.n == 10
    assert p.slope < 0
    assert p.fitted_crossing is not None and p.bound_crossing is not None
    assert max(CYCLES) < p.bound_crossing < p.fitted_crossing
    assert p.fitted_crossing == pytest.approx((80.0 - p.intercept) / p.slope)
    assert lower_bound(p, p.bound_crossing) == pytest.approx(80.0, abs=1e-8)
    # The bound is below the fit everywhere, and furthest below it far from the data.
    assert lower_bound(p, 4.5) < p.intercept + p.slope * 4.5
    gap_middle = p.intercept + p.slope * 4.5 - lower_bound(p, 4.5)
    gap_far = p.intercept + p.slope * 30 - lower_bound(p, 30)
    assert gap_far > gap_middle


def test_exponential_projection_works_in_log_space() -> None:
    p = project_life(CYCLES, RECOVERY, 80.0, model="exponential")
    assert p.status == "projected"
    assert p.fitted_crossing == pytest.approx((math.log(80.0) - p.intercept) / p.slope)
    assert p.bound_crossing is not None
    assert lower_bound(p, p.bound_crossing) == pytest.approx(80.0, abs=1e-8)


def test_higher_confidence_gives_an_earlier_end_of_life() -> None:
    p95 = project_life(CYCLES, RECOVERY, 80.0, confidence=0.95)
    p99 = project_life(CYCLES, RECOVERY, 80.0, confidence=0.99)
    assert p99.bound_crossing is not None and p95.bound_crossing is not None
    assert p99.bound_crossing < p95.bound_crossing
    assert p99.fitted_crossing == pytest.approx(p95.fitted_crossing)


def test_crossing_is_found_when_the_bound_starts_below_the_limit() -> None:
    # Nearly flat, noisy data: the bound is below 94 at cycle 0, above it around cycle 2, and
    # the end of life is where it falls back through 94.
    p = project_life([0, 1, 2, 3, 4, 5], [95.0, 97.0, 94.0, 96.5, 95.5, 94.8], 94.0)
    assert lower_bound(p, 0.0) < 94.0 < lower_bound(p, 2.0)
    assert p.status == "projected" and p.bound_crossing is not None
    assert 2.0 < p.bound_crossing < 10.0
    assert lower_bound(p, p.bound_crossing) == pytest.approx(94.0, abs=1e-8)


def test_rising_recovery_gets_no_crossing() -> None:
    p = project_life([0, 1, 2, 3, 4], [95.0, 96.2, 95.9, 97.0, 97.4], 80.0)
    assert p.status == "not_declining"
    assert p.fitted_crossing is None and p.bound_crossing is None
    assert "not declining" in p.note


def test_recovery_already_below_the_limit() -> None:
    p = project_life([0, 1, 2, 3, 4, 5], [75.0, 76.1, 74.2, 75.3, 73.9, 74.8], 80.0)
    assert p.status == "bound_below_limit"
    assert p.bound_crossing is None


def test_fraction_and_percent_give_the_same_cycles() -> None:
    pct = project_life(CYCLES, RECOVERY, 80.0)
    frac = project_life(CYCLES, [r / 100 for r in RECOVERY], 0.80)
    assert frac.bound_crossing == pytest.approx(pct.bound_crossing, rel=1e-9)
    assert frac.fitted_crossing == pytest.approx(pct.fitted_crossing, rel=1e-9)


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"cycles": [0, 1], "recovery": [100.0, 99.0]}, "cycles"),
        (
            {"recovery": [100.0, math.nan, 98.0, 97.0, 96.0, 95.0, 94.0, 93.0, 92.0, 91.0]},
            "recovery",
        ),
        ({"recovery": [100.0, 99.0, 98.0]}, "recovery"),
        ({"cycles": [-1.0, *CYCLES[1:]]}, "cycles"),
        ({"cycles": [3.0] * 10}, "cycles"),
        ({"limit": math.nan}, "limit"),
        ({"confidence": 1.0}, "confidence"),
        ({"confidence": 0.4}, "confidence"),
        ({"model": "quadratic"}, "model"),
        (
            {"model": "exponential", "recovery": [100.0, 90.0, 0.0, 70.0, 60, 50, 40, 30, 20, 10]},
            "recovery",
        ),
        ({"model": "exponential", "recovery": [-5.0, *RECOVERY[1:]]}, "recovery"),
        ({"model": "exponential", "limit": 0.0}, "limit"),
    ],
)
def test_projection_errors_name_the_parameter(kwargs: dict[str, object], field: str) -> None:
    args: dict[str, object] = {"cycles": CYCLES, "recovery": RECOVERY, "limit": 80.0} | kwargs
    with pytest.raises(DomainError) as err:
        project_life(**args)  # type: ignore[arg-type]
    assert err.value.field == field
    assert field in str(err.value)


# --- properties ------------------------------------------------------------------------------

moderate = st.floats(-1e3, 1e3, allow_nan=False, allow_infinity=False)
baselines = st.lists(moderate, min_size=2, max_size=30)
LIMIT_FIELDS = (
    "centre",
    "ucl",
    "lcl",
    "upper_2sigma",
    "lower_2sigma",
    "upper_1sigma",
    "lower_1sigma",
)
SPREAD_FIELDS = ("mr_bar", "sigma", "mr_ucl", "mr_lcl")


def _spread(values: list[float]) -> float:
    return float(np.mean(np.abs(np.diff(values))))


@given(baselines, st.floats(-1e4, 1e4))
def test_limits_shift_with_the_data(baseline: list[float], c: float) -> None:
    assume(_spread(baseline) > 1e-3)
    a = imr_limits(baseline)
    b = imr_limits([v + c for v in baseline])
    tol = 1e-9 * (1e4 + abs(c))
    for name in LIMIT_FIELDS:
        assert getattr(b, name) == pytest.approx(getattr(a, name) + c, abs=tol)
    for name in SPREAD_FIELDS:
        assert getattr(b, name) == pytest.approx(getattr(a, name), abs=tol)


@given(baselines, st.floats(1e-3, 1e3))
def test_limits_scale_with_the_data(baseline: list[float], k: float) -> None:
    assume(_spread(baseline) > 1e-3)
    a = imr_limits(baseline)
    b = imr_limits([v * k for v in baseline])
    for name in LIMIT_FIELDS + SPREAD_FIELDS:
        assert getattr(b, name) == pytest.approx(getattr(a, name) * k, rel=1e-9, abs=1e-9 * k)


@given(baselines, st.lists(moderate, min_size=1, max_size=40))
def test_mirrored_data_trip_the_same_rules(baseline: list[float], values: list[float]) -> None:
    # Negation is exact in floating point, so every comparison mirrors exactly.
    assume(_spread(baseline) > 1e-3)
    a = imr_limits(baseline)
    b = imr_limits([-v for v in baseline])
    for rule_set in ("western_electric", "nelson"):
        plain = run_rules(values, a, rule_set)
        mirrored = run_rules([-v for v in values], b, rule_set)
        assert [(v.rule, v.indices) for v in plain] == [(v.rule, v.indices) for v in mirrored]


@given(
    st.floats(50.0, 120.0),
    st.floats(-5.0, -0.01),
    st.integers(3, 20),
    st.floats(0.5, 500.0),
)
def test_perfect_line_crosses_where_it_should(
    intercept: float, slope: float, n: int, cycle_at_limit: float
) -> None:
    cycles = np.arange(n, dtype=float)
    recovery = intercept + slope * cycles
    limit = intercept + slope * cycle_at_limit
    p = project_life(cycles, recovery, limit)
    assert p.status == "projected"
    assert p.fitted_crossing == pytest.approx(cycle_at_limit, rel=1e-9, abs=1e-9)
    assert p.bound_crossing == pytest.approx(cycle_at_limit, rel=1e-6, abs=1e-6)


@given(st.floats(0.8, 1.2), st.floats(0.001, 0.05), st.integers(3, 20), st.floats(0.5, 300.0))
def test_perfect_exponential_crosses_where_it_should(
    start: float, rate: float, n: int, cycle_at_limit: float
) -> None:
    cycles = np.arange(n, dtype=float)
    p = project_life(
        cycles,
        start * np.exp(-rate * cycles),
        start * math.exp(-rate * cycle_at_limit),
        "exponential",
    )
    assert p.fitted_crossing == pytest.approx(cycle_at_limit, rel=1e-8, abs=1e-8)
    assert p.bound_crossing == pytest.approx(cycle_at_limit, rel=1e-6, abs=1e-6)


@given(st.lists(st.floats(-2.0, 2.0), min_size=8, max_size=8), st.floats(-3.0, -0.2))
def test_noisy_bound_crossing_is_before_the_fitted_one(noise: list[float], slope: float) -> None:
    cycles = np.arange(8, dtype=float)
    recovery = 100.0 + slope * cycles + np.asarray(noise)
    p = project_life(cycles, recovery, 60.0)
    assume(p.status == "projected")
    assert p.bound_crossing is not None and p.fitted_crossing is not None
    assert p.bound_crossing <= p.fitted_crossing
    assert lower_bound(p, p.bound_crossing) == pytest.approx(60.0, abs=1e-7)
    # Past the crossing the bound stays below the limit (it is concave and falling there).
    assert lower_bound(p, p.bound_crossing + 1.0) < 60.0
