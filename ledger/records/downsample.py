"""Downsampling for charts (DEVELOPERS.md): the min and max of each time bucket.

A 24 h, 1 Hz log has 86,400 samples per channel; drawing them all costs seconds and
megabytes, and a printed chart a few centimetres wide cannot show them. Keeping each
bucket's extremes keeps every spike visible, which plain decimation would lose.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np


def min_max(
    t: Sequence[float] | np.ndarray, y: Sequence[float] | np.ndarray, buckets: int = 400
) -> tuple[list[float], list[float], list[float]]:
    """Bucket start times and the smallest and largest finite ``y`` in each bucket.

    Buckets split the time span ``[t[0], t[-1]]`` evenly; empty buckets (gaps in the log)
    and NaN samples are left out. With no more samples than buckets, each sample is its
    own bucket (low == high).
    """
    ta = np.asarray(t, dtype=float)
    ya = np.asarray(y, dtype=float)
    ok = np.isfinite(ta) & np.isfinite(ya)
    ta, ya = ta[ok], ya[ok]
    if ta.size == 0:
        return [], [], []
    if buckets < 1:
        raise ValueError("buckets must be at least 1")
    if ta.size <= buckets:
        return ta.tolist(), ya.tolist(), ya.tolist()
    start, end = float(ta.min()), float(ta.max())
    width = (end - start) / buckets or 1.0
    index = np.minimum(((ta - start) / width).astype(np.int64), buckets - 1)
    low = np.full(buckets, np.inf)
    high = np.full(buckets, -np.inf)
    np.minimum.at(low, index, ya)
    np.maximum.at(high, index, ya)
    used = np.isfinite(low)
    starts = start + width * np.arange(buckets)
    return starts[used].tolist(), low[used].tolist(), high[used].tolist()
