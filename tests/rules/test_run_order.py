"""The order of a run's times: a skid log within its run's start and finish, give or take
the tolerance, and never in the future; each edge exactly, and one second past it."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest

from ledger.rules.runs import (
    ALLOWED,
    LOG_TOLERANCE_S,
    log_outside_run,
    plan_approval_problem,
    planned_time,
    refusal,
)

START = datetime(2026, 12, 3, 8, 0, tzinfo=UTC)
FINISH = START + timedelta(hours=2)
NOW = FINISH + timedelta(hours=1)
SLACK = timedelta(seconds=LOG_TOLERANCE_S)
SECOND = timedelta(seconds=1)


def test_a_log_inside_the_run_is_accepted() -> None:
    assert log_outside_run(START, FINISH, START, FINISH, NOW) is None


@pytest.mark.parametrize(
    ("log_start", "log_end", "finished", "now", "words"),
    [
        (START - SLACK - SECOND, FINISH, FINISH, NOW, "before the run started"),
        (START, FINISH + SLACK + SECOND, FINISH, NOW, "after the run finished"),
        (START, NOW + SLACK + SECOND, None, NOW, "in the future"),
    ],
)
def test_one_second_past_each_edge_is_refused(
    log_start: datetime, log_end: datetime, finished: datetime | None, now: datetime, words: str
) -> None:
    why = log_outside_run(log_start, log_end, START, finished, now)
    assert why is not None and words in why


def test_each_edge_itself_is_inside() -> None:
    assert log_outside_run(START - SLACK, FINISH + SLACK, START, FINISH, NOW) is None
    assert log_outside_run(START, NOW + SLACK, START, None, NOW) is None


def test_a_run_in_progress_has_no_end_bound_but_now() -> None:
    assert log_outside_run(START, NOW, START, None, NOW) is None


def test_a_wider_site_tolerance_admits_more() -> None:
    early = START - timedelta(hours=2)
    assert log_outside_run(early, FINISH, START, FINISH, NOW) is not None
    assert log_outside_run(early, FINISH, START, FINISH, NOW, tolerance_s=3 * 3600) is None


def test_aborting_and_voiding_a_log_follow_the_run_status() -> None:
    assert ALLOWED["abort"] == {"planned", "in_progress", "finished"}
    assert refusal("abort", "in_review", "run 1") is not None
    assert refusal("void_log", "approved", "run 1") is not None
    assert refusal("void_log", "finished", "run 1") is None
    assert "aborted" in (refusal("start", "aborted", "run 1") or "")


def test_a_late_plan_keeps_its_time() -> None:
    assert planned_time(None, START) == START
    assert planned_time(START - timedelta(hours=1), START) == START - timedelta(hours=1)


def test_a_plan_is_approved_once_and_not_by_its_planner() -> None:
    assert plan_approval_problem("eng.ray", "qa.lin", None) is None
    assert "second" in (plan_approval_problem("eng.ray", "eng.ray", None) or "")
    assert "already" in (plan_approval_problem("eng.ray", "qa.lin", START) or "")
