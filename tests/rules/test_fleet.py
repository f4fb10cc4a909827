"""The fleet overview's rules: the recovery trend slope and word, and the urgency order.

Reference for the slope: numpy.polyfit (degree 1, ordinary least squares), a PyPI library
independent of the project's own line fit (ledger.science.fit) that ledger.rules.fleet uses.
The ±0.5 %/cycle steady band is this tool's own choice (no standard sets it).
"""

from __future__ import annotations

import random

import numpy as np
import pytest

from ledger.rules.fleet import STEADY_SLOPE, TREND_POINTS, trend_slope, trend_word, urgency


@pytest.mark.parametrize("seed", range(5))
def test_slope_matches_numpy_polyfit_on_the_latest_points(seed: int) -> None:
    rng = random.Random(seed)
    n = rng.randint(2, 9)
    cycles = sorted(rng.sample(range(0, 30), n))
    recovery = [1.0 - 0.01 * c + rng.uniform(-0.02, 0.02) for c in cycles]
    window = slice(-TREND_POINTS, None)
    reference = float(np.polyfit(cycles[window], recovery[window], 1)[0])  # numpy.polyfit
    slope = trend_slope(cycles, recovery)
    assert slope == pytest.approx(reference, rel=1e-9, abs=1e-12)


def test_slope_uses_only_the_latest_points() -> None:
    # Old points far off the line must not move the slope of the latest TREND_POINTS.
    latest = list(range(10, 10 + TREND_POINTS))
    values = [0.95 - 0.02 * (c - 10) for c in latest]
    slope = trend_slope([0, 1, *latest], [5.0, -5.0, *values])
    assert slope == pytest.approx(float(np.polyfit(latest, values, 1)[0]))


def test_no_slope_from_one_point_or_one_cycle() -> None:
    assert trend_slope([], []) is None
    assert trend_slope([3], [0.9]) is None
    assert trend_slope([2, 2, 2], [0.9, 0.88, 0.91]) is None


def test_trend_word_edges() -> None:
    step = 1e-9
    assert trend_word(-STEADY_SLOPE - step) == "falling"
    assert trend_word(-STEADY_SLOPE) == "steady"
    assert trend_word(0.0) == "steady"
    assert trend_word(STEADY_SLOPE) == "steady"
    assert trend_word(STEADY_SLOPE + step) == "rising"


def test_urgency_order() -> None:
    # (status, fit, cycles_left, serial), in the order the overview must give them.
    expected = [
        ("on_hold", False, None, "B-2"),
        ("on_hold", False, None, "C-3"),
        ("available", False, 4.0, "Z-9"),
        ("commissioning", False, None, "A-1"),
        ("available", True, 0.5, "Y-8"),
        ("available", True, 2.0, "D-4"),
        ("available", True, 2.0, "E-5"),
        ("available", True, None, "A-0"),
    ]
    for seed in range(5):
        shuffled = expected[:]
        random.Random(seed).shuffle(shuffled)
        assert sorted(shuffled, key=lambda r: urgency(*r)) == expected
