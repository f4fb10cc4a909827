"""Timing shared by the benchmark scripts."""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable


def alternate(fns: dict[str, Callable[[], object]], repeats: int) -> dict[str, tuple[float, float]]:
    """(median, minimum) seconds of each function, called in turn ``repeats`` times after a
    warm-up, so load on the machine falls on all of them alike."""
    for fn in fns.values():
        fn()
    times: dict[str, list[float]] = {name: [] for name in fns}
    for _ in range(repeats):
        for name, fn in fns.items():
            start = time.perf_counter()
            fn()
            times[name].append(time.perf_counter() - start)
    return {name: (statistics.median(ts), min(ts)) for name, ts in times.items()}
