"""Acceptance checks of a run: each planned parameter and QC attribute is PASS, FAIL or MISSING.

Values and limits are SI floats. A value exactly on a limit passes. A trace check (a skid
channel that must stay inside its range for a whole phase) fails on any excursion. A run can
go to review only when every FAIL has a recorded deviation that names it.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

PASS, FAIL, MISSING = "PASS", "FAIL", "MISSING"
VERDICTS = (PASS, FAIL, MISSING)


def judge(value: float | None, low: float | None, high: float | None) -> str:
    """PASS when low <= value <= high (either end may be open); MISSING without a value."""
    if value is None or not math.isfinite(value):
        return MISSING
    if low is not None and value < low:
        return FAIL
    if high is not None and value > high:
        return FAIL
    return PASS


def judge_trace(computed: bool, excursions: int) -> str:
    """A channel that must stay in range: MISSING if not logged, FAIL on any excursion."""
    if not computed:
        return MISSING
    return FAIL if excursions > 0 else PASS


@dataclass(frozen=True)
class Check:
    """One line of the record's acceptance table (values SI; texts already formatted)."""

    name: str
    source: str  # parameter, qc
    title: str
    phase: str | None
    planned: str  # the planned value or the specification, in words
    actual: str  # the measured value in words, "—" when missing
    rule: str
    verdict: str
    note: str = ""


def unexplained_failures(
    checks: Iterable[Check], deviation_checks: Iterable[str | None]
) -> list[Check]:
    """The FAIL checks that no recorded deviation names (they block review)."""
    named = {c for c in deviation_checks if c}
    return [c for c in checks if c.verdict == FAIL and c.name not in named]


def missing(checks: Iterable[Check]) -> list[Check]:
    return [c for c in checks if c.verdict == MISSING]
