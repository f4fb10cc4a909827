"""Trending of a module's history: I-MR control limits, run rules and reuse-life projection.

Control charts (individuals and moving range, limits fixed from a baseline period):
Montgomery, *Introduction to Statistical Quality Control*, the individuals chart and the
appendix table of control-chart constants (d2, D3, D4 for subgroups of two). Run rules:
Western Electric, *Statistical Quality Control Handbook* (1956), and L. S. Nelson, "The Shewhart
control chart - tests for special causes", J. Quality Technology 16 (1984) 237.

Reuse-life projection: the shelf-life approach of ICH Q1E (2003), "Evaluation for Stability
Data", applied to normalized water permeability (NWP) recovery against cycle number: regress,
and take the end of life where the one-sided lower confidence bound of the mean crosses the limit.

Every value here is in the unit of the data it came from (the functions are unit-agnostic).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import NDArray

from ledger.errors import DomainError, out_of_range
from ledger.science.fit import LineFit, fit_line
from ledger.science.guards import finite, non_negative, series

# Control-chart constants for moving ranges of two consecutive points (Montgomery, appendix).
D2 = 1.128
D3 = 0.0
D4 = 3.267

RuleSet = Literal["western_electric", "nelson"]
Model = Literal["linear", "exponential"]
Values = Sequence[float] | NDArray[np.float64]
Found = list[tuple[str, tuple[int, ...]]]  # (description, indices of the pattern)


@dataclass(frozen=True)
class ImrLimits:
    """Individuals and moving-range chart limits, all in the unit of the baseline values."""

    n: int  # number of baseline points
    centre: float  # x̄
    mr_bar: float  # mean moving range of consecutive points
    sigma: float  # MR̄ / d2
    ucl: float  # centre + 3·sigma (= centre + 2.66·MR̄)
    lcl: float
    upper_2sigma: float
    lower_2sigma: float
    upper_1sigma: float
    lower_1sigma: float
    mr_ucl: float  # D4·MR̄
    mr_lcl: float  # D3·MR̄ (zero for ranges of two)


Check = Callable[[NDArray[np.float64], ImrLimits], Found]


@dataclass(frozen=True)
class Violation:
    """One run-rule signal.

    ``rule_set`` is "western_electric", "nelson" or "moving_range"; ``index`` is the position
    (in the values checked) of the point that completed the pattern; ``indices`` are the points
    that make up the pattern.
    """

    rule_set: str
    rule: int
    description: str
    index: int
    indices: tuple[int, ...]


@dataclass(frozen=True)
class LifeProjection:
    """Projected end of reuse life from recovery against cycle number.

    For ``model="linear"`` slope (recovery unit per cycle) and intercept (recovery unit) are
    those of recovery = intercept + slope·cycle. For ``"exponential"`` they are those of
    ln(recovery) = intercept + slope·cycle (slope in 1/cycle). Crossings are in cycles, or None
    when there is none; ``status`` is "projected", "not_declining" or "bound_below_limit" and
    ``note`` says the same in a sentence.
    """

    model: str
    confidence: float
    limit: float
    n: int
    slope: float
    intercept: float
    r_squared: float
    residual_sd: float
    t_quantile: float
    fitted_crossing: float | None
    bound_crossing: float | None
    status: str
    note: str
    fit: LineFit


def imr_limits(baseline: Values) -> ImrLimits:
    """Individuals / moving-range limits from a baseline period (unit of the baseline values).

    sigma = MR̄/d2 with d2 = 1.128; individuals limits x̄ ± 3·sigma (3/d2 ≈ 2.66); zone edges at
    1 and 2 sigma; MR chart limits D3·MR̄ = 0 and D4·MR̄ = 3.267·MR̄ (Montgomery, individuals
    chart). Needs at least two points that are not all equal.
    """
    x = series("baseline", baseline, 2)
    mr_bar = float(np.mean(np.abs(np.diff(x))))
    if mr_bar <= 0.0:
        raise DomainError(
            "baseline values are all equal; control limits cannot be set",
            field="baseline",
            value=float(x[0]),
            expected="values that vary from point to point",
        )
    centre = float(np.mean(x))
    sigma = mr_bar / D2
    return ImrLimits(
        n=int(x.size),
        centre=centre,
        mr_bar=mr_bar,
        sigma=sigma,
        ucl=centre + 3.0 * sigma,
        lcl=centre - 3.0 * sigma,
        upper_2sigma=centre + 2.0 * sigma,
        lower_2sigma=centre - 2.0 * sigma,
        upper_1sigma=centre + sigma,
        lower_1sigma=centre - sigma,
        mr_ucl=D4 * mr_bar,
        mr_lcl=D3 * mr_bar,
    )


def run_rules(values: Values, limits: ImrLimits, rule_set: RuleSet) -> list[Violation]:
    """Western Electric or Nelson run rules on new values against fixed limits.

    "western_electric" (Western Electric handbook, 1956): 1 one point beyond 3 sigma; 2 two of
    three consecutive beyond 2 sigma on one side; 3 four of five consecutive beyond 1 sigma on one
    side; 4 eight in a row on one side of the centre. "nelson" (Nelson 1984): 1 beyond 3 sigma;
    2 nine in a row on one side; 3 six in a row steadily rising or falling; 4 fourteen in a row
    alternating up and down; 5 two of three beyond 2 sigma on one side; 6 four of five beyond 1
    sigma on one side; 7 fifteen in a row within 1 sigma; 8 eight in a row none within 1 sigma
    (on either side). "Beyond" and "within" are strict; a point on the centre line belongs to
    neither side. Every point that completes a pattern is reported, so a long run gives one
    violation per point after the first completion. Sorted by index, then rule.
    """
    x = series("values", values, 1)
    checks: list[tuple[int, Check]]
    if rule_set == "western_electric":
        checks = [
            (1, _beyond_3sigma),
            (2, _two_of_three),
            (3, _four_of_five),
            (4, _run_one_side(8)),
        ]
    elif rule_set == "nelson":
        checks = [
            (1, _beyond_3sigma),
            (2, _run_one_side(9)),
            (3, _trend),
            (4, _alternating),
            (5, _two_of_three),
            (6, _four_of_five),
            (7, _within_1sigma),
            (8, _outside_1sigma),
        ]
    else:
        raise out_of_range("rule_set", rule_set, '"western_electric" or "nelson"')
    found = [
        Violation(rule_set, rule, text, idx[-1], idx)
        for rule, check in checks
        for text, idx in check(x, limits)
    ]
    return sorted(found, key=lambda v: (v.index, v.rule))


def moving_range_check(values: Values, limits: ImrLimits) -> list[Violation]:
    """Moving ranges |x[i] − x[i−1]| of the new values above the MR upper limit D4·MR̄.

    Reported with rule_set "moving_range", rule 1, index i and indices (i−1, i) (Montgomery,
    moving-range chart).
    """
    x = series("values", values, 2)
    mr = np.abs(np.diff(x))
    return [
        Violation(
            "moving_range",
            1,
            f"moving range {mr[i - 1]:.4g} above the MR upper limit {limits.mr_ucl:.4g}",
            i,
            (i - 1, i),
        )
        for i in range(1, x.size)
        if mr[i - 1] > limits.mr_ucl
    ]


def _beyond_3sigma(x: NDArray[np.float64], lim: ImrLimits) -> Found:
    above = [(i, "point above the upper 3-sigma limit") for i in np.flatnonzero(x > lim.ucl)]
    below = [(i, "point below the lower 3-sigma limit") for i in np.flatnonzero(x < lim.lcl)]
    return [(text, (int(i),)) for i, text in above + below]


def _m_of_w(x: NDArray[np.float64], upper: float, lower: float, m: int, w: int, k: int) -> Found:
    # The window is truncated at the start of the series, and the completing point must itself
    # be beyond the edge, so one cluster is reported once, where it first becomes complete.
    out: Found = []
    for side, flags in (("above", x > upper), ("below", x < lower)):
        text = f"{m} of {w} consecutive points more than {k} sigma {side} the centre"
        for i in np.flatnonzero(flags).tolist():
            hits = tuple(j for j in range(max(0, i - w + 1), i + 1) if flags[j])
            if len(hits) >= m:
                out.append((text, hits))
    return out


def _two_of_three(x: NDArray[np.float64], lim: ImrLimits) -> Found:
    return _m_of_w(x, lim.upper_2sigma, lim.lower_2sigma, 2, 3, 2)


def _four_of_five(x: NDArray[np.float64], lim: ImrLimits) -> Found:
    return _m_of_w(x, lim.upper_1sigma, lim.lower_1sigma, 4, 5, 1)


def _runs(flags: NDArray[np.bool_], length: int, text: str) -> Found:
    if flags.size < length:
        return []
    full = np.lib.stride_tricks.sliding_window_view(flags, length).all(axis=1)
    return [(text, tuple(range(s, s + length))) for s in np.flatnonzero(full).tolist()]


def _run_one_side(length: int) -> Check:
    def check(x: NDArray[np.float64], lim: ImrLimits) -> Found:
        return _runs(x > lim.centre, length, f"{length} points in a row above the centre") + _runs(
            x < lim.centre, length, f"{length} points in a row below the centre"
        )

    return check


def _trend(x: NDArray[np.float64], lim: ImrLimits) -> Found:
    # Six points make five successive differences; a tie breaks the trend.
    d = np.diff(x)
    out: Found = []
    for flags, word in ((d > 0, "rising"), (d < 0, "falling")):
        for text, idx in _runs(flags, 5, f"6 points in a row steadily {word}"):
            out.append((text, (*idx, idx[-1] + 1)))
    return out


def _alternating(x: NDArray[np.float64], lim: ImrLimits) -> Found:
    # Fourteen points make thirteen differences, each of opposite sign to the one before.
    d = np.diff(x)
    flips = d[1:] * d[:-1] < 0
    return [
        ("14 points in a row alternating up and down", (*idx, idx[-1] + 1, idx[-1] + 2))
        for _, idx in _runs(flips, 12, "")
    ]


def _within_1sigma(x: NDArray[np.float64], lim: ImrLimits) -> Found:
    inside = (x > lim.lower_1sigma) & (x < lim.upper_1sigma)
    return _runs(inside, 15, "15 points in a row within 1 sigma of the centre")


def _outside_1sigma(x: NDArray[np.float64], lim: ImrLimits) -> Found:
    outside = (x > lim.upper_1sigma) | (x < lim.lower_1sigma)
    return _runs(outside, 8, "8 points in a row more than 1 sigma from the centre")


def project_life(
    cycles: Values,
    recovery: Values,
    limit: float,
    model: Model = "linear",
    confidence: float = 0.95,
) -> LifeProjection:
    """Project the cycle at which NWP recovery reaches ``limit`` (ICH Q1E approach).

    Fits recovery (any unit, e.g. % of baseline or a fraction; ``limit`` in the same unit) on
    cycle number by least squares, or ln(recovery) for ``model="exponential"``. Returns the
    cycle where the fitted line meets the limit and the cycle where the one-sided lower
    ``confidence`` bound of the mean, ŷ − t(confidence, n−2)·s·sqrt(1/n + (x − x̄)²/Sxx), meets
    it (the later of its two crossings, searched from the first cycle on). A fit that is not
    declining gets no crossing. Needs at least three points.
    """
    x = series("cycles", cycles, 3)
    for c in x:
        non_negative("cycles", float(c))
    y = series("recovery", recovery, 3)
    lim = finite("limit", limit)
    conf = finite("confidence", confidence)
    if not 0.5 < conf < 1.0:
        raise out_of_range("confidence", confidence, "a probability between 0.5 and 1 (exclusive)")
    if model == "exponential":
        if np.any(y <= 0.0):
            raise out_of_range("recovery", float(y[y <= 0.0][0]), "values greater than zero")
        if lim <= 0.0:
            raise out_of_range(
                "limit", limit, "a value greater than zero for the exponential model"
            )
        y, target = np.log(y), math.log(lim)
    elif model == "linear":
        target = lim
    else:
        raise out_of_range("model", model, '"linear" or "exponential"')

    from scipy import stats

    fit = fit_line(x, y, x_name="cycles", y_name="recovery")
    t = float(stats.t.ppf(conf, fit.n - 2))
    fitted: float | None = None
    bound: float | None = None
    if fit.slope >= 0.0:
        status = "not_declining"
        note = "recovery is not declining with cycle number; no end of life is projected"
    else:
        fitted = (target - fit.intercept) / fit.slope
        bound = _bound_crossing(fit, t, target, float(x.min()), fitted)
        if bound is None:
            status = "bound_below_limit"
            note = (
                f"the lower {conf:.0%} confidence bound is below the limit at every cycle "
                "from the first one on"
            )
        else:
            status = "projected"
            note = f"the lower {conf:.0%} confidence bound reaches the limit at cycle {bound:.4g}"
    return LifeProjection(
        model=model,
        confidence=conf,
        limit=lim,
        n=fit.n,
        slope=fit.slope,
        intercept=fit.intercept,
        r_squared=fit.r_squared,
        residual_sd=fit.residual_sd,
        t_quantile=t,
        fitted_crossing=fitted,
        bound_crossing=bound,
        status=status,
        note=note,
        fit=fit,
    )


def lower_bound(projection: LifeProjection, cycle: float) -> float:
    """One-sided lower confidence bound of the mean recovery at ``cycle`` (recovery unit).

    ŷ − t·s·sqrt(1/n + (x − x̄)²/Sxx) from the projection's fit, transformed back with exp for
    the exponential model (ICH Q1E approach).
    """
    c = finite("cycle", cycle)
    value = _bound(projection.fit, projection.t_quantile, c)
    return math.exp(value) if projection.model == "exponential" else value


def _bound(fit: LineFit, t: float, x: float) -> float:
    return fit.predict(x) - t * fit.mean_se(x)


def _bound_crossing(
    fit: LineFit, t: float, target: float, x_first: float, fitted: float
) -> float | None:
    # The bound is concave in x, so on [x_first, inf) it rises to one maximum and then falls; the
    # crossing wanted is on the falling side. The bound lies below the fitted line, so the fitted
    # crossing closes the bracket on the right.
    # Far to the left the bound's slope tends to slope + t·se(slope), which is positive only when
    # |slope| < t·se(slope); only then does it peak, at x_mean + u, where its slope is zero.
    x_top = x_first
    se_b = fit.slope_se
    q = (fit.slope / (t * se_b)) ** 2 if se_b > 0 else math.inf
    if q < 1.0:
        u = -abs(fit.slope) * fit.sxx / (t * fit.residual_sd * math.sqrt(fit.n * (1.0 - q)))
        x_top = max(x_first, fit.x_mean + u)

    def gap(x: float) -> float:
        return _bound(fit, t, x) - target

    if gap(x_top) <= 0.0:
        return None
    if gap(fitted) >= 0.0:
        return fitted
    from scipy.optimize import brentq

    return float(brentq(gap, x_top, fitted, xtol=1e-12, rtol=1e-12))
