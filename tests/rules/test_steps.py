"""The step-order rule and the late-entry rule (ledger.rules.steps).

The expectations are the written rule of a paper batch record (each significant step
performed and then checked by a second person, in order; an entry written more than the
allowance after the work is late). The 15-minute allowance is common practice, not a
published value; a site sets its own.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.rules.steps import LATE_AFTER_S, StepSigned, is_late, sign_problem

BOTH = ("performed", "verified")
THREE_STEPS = (BOTH, BOTH, ("performed",))


def _signed(*items: tuple[int, str, str]) -> list[StepSigned]:
    return [StepSigned(step, meaning, login) for step, meaning, login in items]


def test_the_first_step_may_be_performed_at_once() -> None:
    assert sign_problem(1, "performed", "op.kim", THREE_STEPS, []) is None


def test_a_step_out_of_order_names_the_step_and_what_it_lacks() -> None:
    problem = sign_problem(2, "performed", "op.kim", THREE_STEPS, [])
    assert problem == "step 2 comes after step 1, which is not yet performed and verified"
    half = _signed((1, "performed", "op.kim"))
    assert sign_problem(2, "performed", "op.kim", THREE_STEPS, half) == (
        "step 2 comes after step 1, which is not yet verified"
    )
    done = _signed((1, "performed", "op.kim"), (1, "verified", "eng.ray"))
    assert sign_problem(2, "performed", "op.kim", THREE_STEPS, done) is None


def test_verification_needs_the_step_performed_and_another_person() -> None:
    assert sign_problem(1, "verified", "eng.ray", THREE_STEPS, []) == (
        "step 1 is not yet performed; it is verified after it is performed"
    )
    done = _signed((1, "performed", "op.kim"))
    assert sign_problem(1, "verified", "op.kim", THREE_STEPS, done) == (
        "op.kim performed step 1; another person verifies it"
    )
    # Logins are compared without regard to case: OP.KIM is the same person.
    assert sign_problem(1, "verified", "OP.KIM", THREE_STEPS, done) is not None
    assert sign_problem(1, "verified", "eng.ray", THREE_STEPS, done) is None


def test_each_meaning_once_and_only_the_meanings_the_step_lists() -> None:
    done = _signed((1, "performed", "op.kim"))
    assert sign_problem(1, "performed", "eng.ray", THREE_STEPS, done) == (
        "step 1 is already performed by op.kim"
    )
    assert sign_problem(3, "verified", "eng.ray", THREE_STEPS, []) == (
        "step 3 is signed as performed only, not verified"
    )


@pytest.mark.parametrize(
    ("step", "meaning", "expected"),
    [
        (0, "performed", "there is no step 0: the record has steps 1 to 3"),
        (4, "performed", "there is no step 4: the record has steps 1 to 3"),
        (1, "approved", "'approved' is not a step signature; one of performed, verified"),
    ],
)
def test_unknown_steps_and_meanings_are_named(step: int, meaning: str, expected: str) -> None:
    assert sign_problem(step, meaning, "op.kim", THREE_STEPS, []) == expected


@given(st.integers(min_value=1, max_value=6), st.data())
def test_in_order_exactly_when_every_earlier_step_is_complete(n: int, data: st.DataObject) -> None:
    """Law: step k may be performed iff steps 1..k-1 each carry every meaning they list."""
    required = [BOTH] * n
    signed: list[StepSigned] = []
    for step in range(1, n + 1):
        for meaning in BOTH:
            if data.draw(st.booleans()):
                who = "op.kim" if meaning == "performed" else "eng.ray"
                signed.append(StepSigned(step, meaning, who))
    step = data.draw(st.integers(min_value=1, max_value=n))
    if any(s.step == step and s.meaning == "performed" for s in signed):
        return  # already performed: another rule answers
    complete = all({s.meaning for s in signed if s.step == k} >= set(BOTH) for k in range(1, step))
    problem = sign_problem(step, "performed", "op.kim", required, signed)
    assert (problem is None) == complete, problem


T0 = datetime(2026, 11, 30, 14, 0, tzinfo=UTC)


def test_late_after_fifteen_minutes_exactly() -> None:
    assert LATE_AFTER_S == 900.0
    assert not is_late(T0, T0 + timedelta(minutes=15))
    assert is_late(T0, T0 + timedelta(minutes=15, microseconds=1))
    assert not is_late(T0, T0)
    # Work "done" after its entry (a clock ahead) is not late.
    assert not is_late(T0 + timedelta(hours=1), T0)
    assert is_late(T0, T0 + timedelta(seconds=61), allowance_s=60)


@given(st.integers(min_value=-(10**7), max_value=10**7), st.integers(min_value=0, max_value=10**6))
def test_late_is_the_gap_beyond_the_allowance(gap_s: int, allowance: int) -> None:
    """Law: late iff entered - done > allowance, whatever the offsets of the two times."""
    done = T0.astimezone(datetime.now().astimezone().tzinfo)
    entered = T0 + timedelta(seconds=gap_s)
    assert is_late(done, entered, float(allowance)) == (gap_s > allowance)
