"""Chart downsampling (ledger.records.downsample.min_max) against a plain-Python bucketing."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ledger.records.downsample import min_max


def reference(t: list[float], y: list[float], buckets: int) -> list[tuple[float, float, float]]:
    """Bucket by bucket with a loop: (start, min, max) of the buckets that hold a sample."""
    pairs = [(a, b) for a, b in zip(t, y, strict=True) if math.isfinite(a) and math.isfinite(b)]
    if len(pairs) <= buckets:
        return [(a, b, b) for a, b in pairs]
    start, end = min(a for a, _ in pairs), max(a for a, _ in pairs)
    width = (end - start) / buckets or 1.0
    found: dict[int, list[float]] = {}
    for a, b in pairs:
        found.setdefault(min(int((a - start) / width), buckets - 1), []).append(b)
    return [(start + width * k, min(v), max(v)) for k, v in sorted(found.items())]


def test_a_day_at_1_hz_keeps_the_spike() -> None:
    t = np.arange(86400, dtype=float)
    y = 0.3 + 0.05 * np.sin(t / 600)
    y[3000:3024] += 0.15  # a 24 s excursion
    starts, low, high = min_max(t, y, buckets=400)
    assert len(starts) == len(low) == len(high) == 400
    assert max(high) == pytest.approx(float(y.max()))
    assert min(low) == pytest.approx(float(y.min()))
    spike = next(i for i, s in enumerate(starts) if s <= 3000 < s + 216)
    assert high[spike] == pytest.approx(float(y[3000:3024].max()))
    assert starts[0] == 0 and starts[1] == pytest.approx(86399 / 400)


def test_gaps_and_nan_are_left_out() -> None:
    t = [0.0, 1.0, 2.0, 3.0, 100.0, 101.0, 102.0, 103.0]
    y = [1.0, 2.0, math.nan, 4.0, 5.0, 6.0, 7.0, 8.0]
    starts, low, high = min_max(t, y, buckets=4)
    # Buckets of 103 / 4 = 25.75 s: the first and last hold samples, the middle two none.
    assert starts == pytest.approx([0.0, 77.25])
    assert (low, high) == ([1.0, 5.0], [4.0, 8.0])
    assert list(zip(starts, low, high, strict=True)) == reference(t, y, 4)


def test_fewer_samples_than_buckets_are_their_own_buckets() -> None:
    assert min_max([0, 5, 9], [3, 1, 2], buckets=10) == ([0, 5, 9], [3, 1, 2], [3, 1, 2])
    assert min_max([], [], buckets=10) == ([], [], [])
    assert min_max([math.nan], [1.0]) == ([], [], [])


def test_bucket_count_must_be_positive() -> None:
    with pytest.raises(ValueError, match="buckets"):
        min_max([0, 1, 2], [1, 2, 3], buckets=0)


def test_all_samples_at_one_time() -> None:
    starts, low, high = min_max([5.0] * 10, list(range(10)), buckets=3)
    assert (starts, low, high) == ([5.0], [0.0], [9.0])


@settings(max_examples=150, deadline=None)
@given(
    st.lists(st.tuples(st.floats(0, 1e5), st.floats(-1e6, 1e6)), min_size=1, max_size=300),
    st.integers(1, 50),
)
def test_matches_the_plain_bucketing(rows: list[tuple[float, float]], buckets: int) -> None:
    t = [a for a, _ in rows]
    y = [b for _, b in rows]
    starts, low, high = min_max(t, y, buckets=buckets)
    expected = reference(t, y, buckets)
    if len(rows) <= buckets:
        assert list(zip(starts, low, high, strict=True)) == expected  # samples as given
        return
    assert len(starts) == len(expected) <= buckets
    for got, want in zip(zip(starts, low, high, strict=True), expected, strict=True):
        assert got == pytest.approx(want)
    assert min(low) == min(y) and max(high) == max(y)
