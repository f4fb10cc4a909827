"""Ordinary least-squares straight line y = intercept + slope·x, with its statistics.

Shared by every computation that fits a line (multi-point NWP, pressure-decay rate,
gel-polarization model, reuse-life projection). Formulas: any regression text, e.g.
Montgomery & Runger, *Applied Statistics and Probability for Engineers*, ch. 11.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ledger.errors import DomainError
from ledger.science.guards import paired


@dataclass(frozen=True)
class LineFit:
    """Result of a straight-line least-squares fit (units are those of x and y)."""

    slope: float
    intercept: float
    r_squared: float
    n: int
    residual_sd: float  # s = sqrt(SSE / (n - 2)); NaN when n == 2
    slope_se: float
    intercept_se: float
    covariance: float  # cov(intercept, slope)
    x_mean: float
    sxx: float

    def predict(self, x: float) -> float:
        """Fitted y at ``x``."""
        return self.intercept + self.slope * x

    def mean_se(self, x: float) -> float:
        """Standard error of the fitted mean response at ``x``."""
        return self.residual_sd * math.sqrt(1.0 / self.n + (x - self.x_mean) ** 2 / self.sxx)


def fit_line(
    x: Sequence[float] | NDArray[np.float64],
    y: Sequence[float] | NDArray[np.float64],
    *,
    x_name: str = "x",
    y_name: str = "y",
) -> LineFit:
    """Fit y = a + b·x by least squares. Needs >= 2 points and at least two distinct x."""
    xa, ya = paired(x_name, x, y_name, y, 2)
    n = int(xa.size)
    x_mean = float(xa.mean())
    y_mean = float(ya.mean())
    dx = xa - x_mean
    dy = ya - y_mean
    sxx = float(dx @ dx)
    if sxx <= 0.0 or sxx <= 1e-24 * max(1.0, float(xa @ xa)):
        raise DomainError(
            f"all {x_name} values are equal; a line cannot be fitted",
            field=x_name,
            value=float(xa[0]),
            expected="at least two different values",
        )
    sxy = float(dx @ dy)
    syy = float(dy @ dy)
    slope = sxy / sxx
    intercept = y_mean - slope * x_mean
    resid = ya - (intercept + slope * xa)
    sse = float(resid @ resid)
    r_squared = 1.0 - sse / syy if syy > 0 else 1.0
    if n > 2:
        s = math.sqrt(sse / (n - 2))
        slope_se = s / math.sqrt(sxx)
        intercept_se = s * math.sqrt(1.0 / n + x_mean**2 / sxx)
        cov = -x_mean * s**2 / sxx
    else:
        s = slope_se = intercept_se = cov = math.nan
    return LineFit(
        slope=slope,
        intercept=intercept,
        r_squared=r_squared,
        n=n,
        residual_sd=s,
        slope_se=slope_se,
        intercept_se=intercept_se,
        covariance=cov,
        x_mean=x_mean,
        sxx=sxx,
    )
