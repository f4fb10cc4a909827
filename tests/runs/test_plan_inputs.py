"""Planning reports every missing, unknown or malformed input at once, each naming the input,
the value typed and what was expected (one InputsError, exit 2 through the CLI)."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import InputError
from ledger.runs import plan, template
from tests.reference.test_plan_reference import INPUTS, MODULE

LNP = "QB-MR-LNP-101"


def _problems(given_inputs: dict[str, str]) -> tuple[InputError, ...]:
    with pytest.raises(plan.InputsError) as err:
        plan.make_plan(template.find(LNP), MODULE, given_inputs)
    assert err.value.field == "input"
    return err.value.problems


def test_three_wrong_inputs_are_named_together() -> None:
    bad = {**INPUTS, "initial_volume": "1.2 bar", "tmp_max": "high", "volume": "1 L"}
    problems = _problems(bad)
    assert len(problems) == 3
    text = "\n".join(str(p) for p in problems)
    assert "--input initial_volume: '1.2 bar'" in text and "expected a volume" in text
    assert "--input tmp_max: 'high'" in text and "expected a pressure" in text
    assert "has no input 'volume'" in text and "expected one of initial_volume" in text
    assert {p.value for p in problems} == {"1.2 bar", "high", "volume"}
    with pytest.raises(plan.InputsError, match=r"^3 inputs of QB-MR-LNP-101 are missing or wrong"):
        plan.make_plan(template.find(LNP), MODULE, bad)


def test_missing_and_wrong_inputs_together() -> None:
    given_inputs = {"initial_volume": "1.2 L", "initial_concentration": "0.5"}
    problems = _problems(given_inputs)
    named = sorted(str(p.value) for p in problems)
    assert named == ["0.5", "df_concentration", "target_concentration"]
    assert all(p.field == "input" for p in problems)


def test_one_problem_reads_as_before() -> None:
    with pytest.raises(plan.InputsError) as err:
        plan.make_plan(template.find(LNP), MODULE, {**INPUTS, "initial_volume": "1.2 bar"})
    assert str(err.value).startswith("--input initial_volume: '1.2 bar' is a pressure")
    assert len(err.value.problems) == 1


REQUIRED = sorted(INPUTS)


@given(st.sets(st.sampled_from(REQUIRED), min_size=1), st.sets(st.sampled_from(REQUIRED)))
def test_every_left_out_and_every_garbled_input_is_listed(
    left_out: set[str], garbled: set[str]
) -> None:
    garbled -= left_out
    given_inputs = {k: ("12 psi" if k in garbled else v) for k, v in INPUTS.items()
                    if k not in left_out}  # fmt: skip
    problems = _problems(given_inputs)
    assert len(problems) == len(left_out) + len(garbled)
    assert {p.value for p in problems} == left_out | ({"12 psi"} if garbled else set())
    for name in left_out | garbled:
        assert any(f"--input {name}" in str(p) for p in problems)
