"""Acceptance verdicts and the run's sequence rules."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.rules import runs
from ledger.rules.acceptance import (
    FAIL,
    MISSING,
    PASS,
    Check,
    judge,
    judge_trace,
    unexplained_failures,
)

x = st.floats(min_value=-1e9, max_value=1e9, allow_nan=False)


@given(x, x, x)
def test_judge_is_the_closed_interval(v: float, a: float, b: float) -> None:
    low, high = min(a, b), max(a, b)
    assert judge(v, low, high) == (PASS if low <= v <= high else FAIL)
    assert judge(v, None, high) == (PASS if v <= high else FAIL)
    assert judge(v, low, None) == (PASS if v >= low else FAIL)


def test_missing_and_edges() -> None:
    assert judge(None, 0, 1) == MISSING
    assert judge(float("nan"), 0, 1) == MISSING
    assert judge(1.0, 0.0, 1.0) == PASS  # a value on its limit passes
    assert judge_trace(False, 0) == MISSING
    assert judge_trace(True, 0) == PASS
    assert judge_trace(True, 2) == FAIL


def _check(name: str, verdict: str) -> Check:
    return Check(name, "parameter", name, None, "1", "2", "≤ 1", verdict)


def test_a_fail_needs_a_deviation_naming_it() -> None:
    checks = [_check("tmp", FAIL), _check("feed_flow", PASS), _check("diavolumes", FAIL)]
    assert [c.name for c in unexplained_failures(checks, [])] == ["tmp", "diavolumes"]
    assert [c.name for c in unexplained_failures(checks, ["tmp", None])] == ["diavolumes"]
    assert unexplained_failures(checks, ["tmp", "diavolumes"]) == []


@pytest.mark.parametrize(
    ("action", "allowed"),
    [("start", {"planned"}), ("import", {"in_progress", "finished"}),
     ("finish", {"in_progress"}), ("submit", {"finished"})],
)  # fmt: skip
def test_each_action_is_allowed_only_in_its_statuses(action: str, allowed: set[str]) -> None:
    for status in runs.RUN_STATUSES:
        message = runs.refusal(action, status, "run 7")
        assert (message is None) == (status in allowed), (action, status)
        if message:
            assert "run 7" in message and "next:" in message


def test_start_needs_recent_passing_pre_use_tests() -> None:
    now = datetime(2026, 11, 30, 12, tzinfo=UTC)
    cleaned = now - timedelta(hours=30)
    hold = 72 * 3600.0
    fresh = now - timedelta(hours=2)
    assert runs.start_problems(now, hold, cleaned, fresh, True, fresh, True) == []
    assert runs.start_problems(now, hold, cleaned, None, False, fresh, True) == [
        "no pre-use water-flux test since the last cleaning"
    ]
    before = cleaned - timedelta(hours=1)
    assert "no integrity test since the last cleaning" in runs.start_problems(
        now, hold, cleaned, fresh, True, before, True
    )
    assert "did not pass" in runs.start_problems(now, hold, cleaned, fresh, True, fresh, False)[0]
    old = now - timedelta(hours=80)
    problems = runs.start_problems(now, hold, None, old, True, fresh, True)
    assert problems and "beyond the clean-hold window of 72 h" in problems[0]
