"""Acceptance rules of a water-flux test: plain values in, a decision out (pure).

Fractions are ratios (0.10 = 10 %, 0.80 = 80 % of baseline), temperatures kelvin.

One edge convention for every limit here: a value exactly at a limit is on the passing side.
A recovery at the minimum passes (with an alert), at the alert level raises no alert; an NWP at
the damage ratio raises no suspicion; a pre-use NWP on the band edge is inside; an intercept at
10 % is not suspect; a spread of exactly 1 K is one temperature. "Exactly" allows a relative
EDGE_TOLERANCE, so that a ratio equal to a limit but for binary rounding (1.1 / 1.0 − 1 is
0.10000000000000009) counts as at the limit. A NaN never passes.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Literal

RecoveryClass = Literal["pass", "alert", "fail"]

# Relative; far below any measured difference, far above the rounding of one division.
EDGE_TOLERANCE = 1e-9
# Common practice, no single source: a least-squares line of flux against TMP whose intercept
# exceeds 10 % of the mean flux points at a pressure-zero or flow-reading problem.
INTERCEPT_RATIO_MAX = 0.10
# Common practice: one water temperature per test; points more than 1 K apart are not one test.
TEMPERATURE_SPREAD_MAX_K = 1.0


def at_most(value: float, limit: float) -> bool:
    """value ≤ limit, the edge (within EDGE_TOLERANCE of ``limit``) included; NaN is False."""
    return value <= limit + abs(limit) * EDGE_TOLERANCE


def at_least(value: float, limit: float) -> bool:
    """value ≥ limit, the edge (within EDGE_TOLERANCE of ``limit``) included; NaN is False."""
    return value >= limit - abs(limit) * EDGE_TOLERANCE


def intercept_suspect(intercept_ratio: float) -> bool:
    """True when |intercept| / mean flux exceeds INTERCEPT_RATIO_MAX (NaN is suspect)."""
    return not at_most(abs(intercept_ratio), INTERCEPT_RATIO_MAX)


def temperature_spread_ok(temperatures_k: Sequence[float]) -> bool:
    """True when the points' water temperatures lie within TEMPERATURE_SPREAD_MAX_K."""
    if not all(math.isfinite(t) for t in temperatures_k):
        return False  # max() and min() would pass over a NaN
    return at_most(max(temperatures_k) - min(temperatures_k), TEMPERATURE_SPREAD_MAX_K)


def recovery_meets_minimum(recovery: float, minimum: float) -> bool:
    """True when NWP / baseline NWP is at or above the module type's recovery minimum."""
    return at_least(recovery, minimum)


def recovery_class(recovery: float, minimum: float, alert: float) -> RecoveryClass:
    """A post-clean recovery (NWP / baseline NWP): "fail" below ``minimum``, "alert" below
    ``alert``, else "pass"."""
    if not recovery_meets_minimum(recovery, minimum):
        return "fail"
    return "pass" if at_least(recovery, alert) else "alert"


def damage_suspected(ratio: float, damage_ratio: float) -> bool:
    """True when NWP / baseline NWP is above ``damage_ratio``: a membrane that lets water
    through much faster than when new may be damaged (an integrity test must pass first)."""
    return not at_most(ratio, damage_ratio)


def preuse_in_band(ratio: float, band: float) -> bool:
    """True when a pre-use NWP / its reference NWP lies within 1 ± ``band`` (edge inside)."""
    return at_most(abs(ratio - 1.0), band)


def verdict(
    stage: str,
    *,
    recovery: float | None,
    preuse_ratio: float | None,
    recovery_min: float,
    recovery_alert: float,
    preuse_band: float,
) -> RecoveryClass | None:
    """The stored verdict of a water-flux test at ``stage`` (baseline, pre_use, post_use,
    post_clean).

    post_clean: :func:`recovery_class` of its recovery against baseline. pre_use: "pass" or
    "fail" of its NWP / the last post-clean NWP against the band; None without that reference.
    Other stages carry no verdict.
    """
    if stage == "post_clean":
        if recovery is None:
            raise ValueError("a post-clean test needs a recovery against the baseline")
        return recovery_class(recovery, recovery_min, recovery_alert)
    if stage == "pre_use":
        if preuse_ratio is None:
            return None
        return "pass" if preuse_in_band(preuse_ratio, preuse_band) else "fail"
    return None
