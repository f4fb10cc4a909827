"""The fleet overview's rules: the trend of a module's recent NWP recovery and the order in which
modules need attention.

Pure: no database, no clock. Recoveries are fractions of baseline NWP (0.85 = 85 %), cycles are
counts, slopes fractions per cycle.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Literal

from ledger.science.fit import fit_line

TrendWord = Literal["falling", "steady", "rising"]

TREND_POINTS = 5
"""How many of the latest recovery points the trend is taken from."""

STEADY_SLOPE = 0.005
"""A slope within ±0.5 %/cycle is "steady": a choice of this tool (no standard sets it),
about the scatter of repeated NWP measurements on one module."""


def trend_slope(cycles: Sequence[float], recovery: Sequence[float]) -> float | None:
    """Least-squares slope (fraction per cycle) of recovery on cycle over the last
    TREND_POINTS points (oldest first in, so the last ones are the latest).

    None when fewer than two points are left or they all share one cycle (no slope).
    """
    if len(cycles) != len(recovery):
        raise ValueError("cycles and recovery differ in length")
    xs, ys = cycles[-TREND_POINTS:], recovery[-TREND_POINTS:]
    if len(xs) < 2 or len(set(xs)) < 2:
        return None
    return fit_line(xs, ys, x_name="cycle", y_name="recovery").slope


def trend_word(slope: float) -> TrendWord:
    """ "falling" below −STEADY_SLOPE, "rising" above +STEADY_SLOPE, else "steady"
    (slope in fraction per cycle; the edges themselves are steady)."""
    if slope < -STEADY_SLOPE:
        return "falling"
    if slope > STEADY_SLOPE:
        return "rising"
    return "steady"


def urgency(
    status: str, fit: bool, cycles_left: float | None, serial: str
) -> tuple[int, int, float, str]:
    """Sort key, most urgent first: on hold, then NOT FIT, then fewest projected cycles left
    (None, no projection, after every number), then serial."""
    return (
        0 if status == "on_hold" else 1,
        1 if fit else 0,
        math.inf if cycles_left is None else cycles_left,
        serial,
    )
