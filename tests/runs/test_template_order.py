"""Parameters are computed in the order their expressions need, not in the file's order, and a
range bound is a quantity or an expression by what it reads, not by how it is spelt.

The plans compared here are of the shipped templates, whose values
tests/reference/test_plan_reference.py checks against independent computations; these tests
check that the order of the file and the spelling of a bound change none of them.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from ledger.errors import InputError
from ledger.runs import plan, template

SHIPPED = {p.name: p for p in template.shipped_dir().glob("*.toml")}
# Every module fact is given, so that every planned value and every range is computed.
MODULE = plan.ModuleFacts(
    serial="M-1", type_code="T", area_m2=0.0565, fibers=120, lumen_diameter_m=0.5e-3,
    fiber_length_m=0.30, max_volume_loading_m=0.2, max_mass_loading_kg_m2=0.05,
)  # fmt: skip
INPUTS = {
    "qb_lnp_buffer_exchange.toml": {
        "initial_volume": "1.2 L",
        "initial_concentration": "0.5 g/L",
        "df_concentration": "2 g/L",
        "target_concentration": "6 g/L",
    },
    "qb_protein_ufdf.toml": {"initial_volume": "2 L", "initial_concentration": "5 g/L"},
}
_HEADER = re.compile(r"^\[")


def reverse_parameters(text: str) -> str:
    """The same TOML with its [parameters.*] tables in reverse order (each table runs from its
    header to the next header of any kind)."""
    lines = text.splitlines(keepends=True)
    headers = [i for i, line in enumerate(lines) if _HEADER.match(line)]
    starts = [i for i in headers if lines[i].startswith("[parameters.")]
    end = next(i for i in headers if i > starts[-1])
    assert all(lines[i].startswith("[parameters.") for i in headers if starts[0] <= i < end)
    blocks = ["".join(lines[a:b]) for a, b in zip(starts, [*starts[1:], end], strict=True)]
    blocks = [b if b.endswith("\n\n") else b + "\n" for b in blocks]
    return "".join(lines[: starts[0]]) + "".join(reversed(blocks)) + "".join(lines[end:])


def uses_a_later_parameter(t: template.Template) -> bool:
    names = [p.name for p in t.parameters]
    return any(names.index(n) > i for i, p in enumerate(t.parameters)
               for n in p.expr.names if n in names)  # fmt: skip


@pytest.mark.parametrize("name", sorted(INPUTS))
def test_parameters_in_reverse_order_plan_the_same_values(name: str) -> None:
    text = SHIPPED[name].read_text(encoding="utf-8")
    reversed_text = reverse_parameters(text)
    forward = template.parse(text.encode(), name)
    backward = template.parse(reversed_text.encode(), f"reversed {name}")
    names = [p.name for p in forward.parameters]
    assert [p.name for p in backward.parameters] == names[::-1]
    # The reversed file could not be computed top to bottom; the shipped one can, and keeps
    # its order (among the parameters free to go next, the one written first goes first).
    assert uses_a_later_parameter(backward) and not uses_a_later_parameter(forward)
    assert list(forward.order) == names
    assert list(backward.order) != names[::-1]

    a = plan.make_plan(forward, MODULE, INPUTS[name], product="P", lot="L")
    b = plan.make_plan(backward, MODULE, INPUTS[name], product="P", lot="L")
    assert [v.name for v in b.values] == names[::-1]  # shown as the file lists them
    assert all(v.value is not None for v in a.values)
    assert any(v.low is not None or v.high is not None for v in a.values)
    for v in a.values:
        w = b.value(v.name)
        assert (w.value, w.low, w.high, w.rule, w.missing) == (
            v.value, v.low, v.high, v.rule, v.missing
        ), v.name  # fmt: skip
        assert (w.unit, w.kind, w.phase, w.actual, w.title) == (
            v.unit, v.kind, v.phase, v.actual, v.title
        )  # fmt: skip
    assert b.checks == a.checks[::-1]  # in the order of the values, as the file lists them
    assert b.steps == a.steps


FORWARD = """
[template]
id = "T-ORDER"
version = "1"
title = "order"
signatures = ["performed"]

[inputs]
v = { kind = "volume", title = "volume" }

[parameters.a]
title = "a"
expr = "b * 2"
unit = "mL"
range = { high = "c" }

[parameters.b]
title = "b"
expr = "v"
unit = "mL"

[parameters.c]
title = "c"
expr = "b * 3"
unit = "mL"

[[steps]]
operation = "op"
phase = "run"
title = "Run"
signatures = ["performed"]
text = "{{ a }} {{ b }} {{ c }}"
"""


def test_a_parameter_and_its_range_may_use_parameters_written_below() -> None:
    t = template.parse(FORWARD.encode(), "order.toml")
    # a needs b and (in its range) c; c needs b.
    assert t.order == ("b", "c", "a")
    p = plan.make_plan(t, MODULE, {"v": "1 L"})
    assert [v.name for v in p.values] == ["a", "b", "c"]
    # 1 L = 1e-3 m³ exactly (SI definition of the litre).
    assert p.value("b").value == pytest.approx(1e-3, rel=1e-12)
    assert p.value("a").value == pytest.approx(2e-3, rel=1e-12)
    assert p.value("a").high == pytest.approx(3e-3, rel=1e-12)
    assert p.checks[0].verdict == "PASS"  # a = 2 L ≤ c = 3 L


def line_of(text: str, needle: str) -> int:
    """The 1-based line of the first line holding ``needle``, found independently of the
    template reader."""
    return next(i for i, line in enumerate(text.splitlines(), 1) if needle in line)


def test_a_cycle_names_its_parameters_and_their_lines() -> None:
    # b uses a and a uses b; c uses b, so it cannot be computed either, but it is no part of
    # the cycle.
    text = FORWARD.replace('expr = "v"', 'expr = "a / 2"').replace('range = { high = "c" }', "")
    with pytest.raises(InputError) as err:
        template.parse(text.encode(), "cycle.toml")
    assert isinstance(err.value, template.TemplateError)
    assert len(err.value.problems) == 1, str(err.value)  # c, behind the cycle, is not blamed
    message = str(err.value)
    line_a, line_b = line_of(text, 'expr = "b * 2"'), line_of(text, 'expr = "a / 2"')
    assert message.startswith(f"cycle.toml:{line_a}: parameters.a.expr: "), message
    assert f"a (line {line_a}), b (line {line_b})" in message
    assert "a uses b; b uses a" in message
    assert " c " not in message and "c (line" not in message


def test_a_cycle_through_a_range_and_a_parameter_using_itself() -> None:
    # c's range reads a, and a's range reads c: neither range can be computed first.
    text = FORWARD.replace('unit = "mL"\n\n[[steps]]', 'unit = "mL"\nrange = { low = "a" }\n\n'
                           "[[steps]]")  # fmt: skip
    with pytest.raises(InputError, match=r"a uses c; c uses a"):
        template.parse(text.encode(), "cycle.toml")
    text = FORWARD.replace('expr = "v"', 'expr = "b + v"')
    with pytest.raises(InputError) as err:
        template.parse(text.encode(), "self.toml")
    line = line_of(text, 'expr = "b + v"')
    assert str(err.value).startswith(f"self.toml:{line}: parameters.b.expr: b uses itself")


LNP = SHIPPED["qb_lnp_buffer_exchange.toml"].read_text(encoding="utf-8")
UFDF = SHIPPED["qb_protein_ufdf.toml"].read_text(encoding="utf-8")


@pytest.mark.parametrize(
    ("text", "written", "name", "end", "factor"),
    [
        (UFDF, 'range = { high = "plan * 3" }', "pressure_drop", "high", 3.0),
        (LNP, 'range = { low = "plan", high = "plan * 1.25" }', "diavolumes", "high", 1.25),
        (LNP, 'range = { low = "plan * 0.6" }', "mean_flux", "low", 0.6),
    ],
)
def test_a_bound_reads_the_same_either_way_round(
    text: str, written: str, name: str, end: str, factor: float
) -> None:
    assert written in text
    swapped = re.sub(r'"plan \* ([0-9.]+)"', r'"\1 * plan"', written)
    assert swapped != written
    inputs = INPUTS["qb_protein_ufdf.toml" if text is UFDF else "qb_lnp_buffer_exchange.toml"]
    got = []
    for spelling in (written, swapped):
        t = template.parse(text.replace(written, spelling).encode(), "t.toml")
        bound = getattr(t.parameter(name).range, end)
        assert bound.expr is not None and bound.expr.names == {"plan"}
        got.append(plan.make_plan(t, MODULE, inputs).value(name))
    a, b = got
    assert a.value is not None and a.value == b.value
    assert getattr(a, end) == getattr(b, end)
    assert getattr(a, end) == pytest.approx(factor * a.value, rel=1e-12)
    assert a.rule == b.rule


def test_a_bound_without_names_is_a_quantity_of_the_parameters_kind() -> None:
    t = template.parse(UFDF.encode(), "t.toml")
    low = t.parameter("tmp").range.low  # type: ignore[union-attr]
    assert low is not None and low.expr is None
    assert low.value == pytest.approx(0.2e5)  # 0.2 bar; 1 bar = 10⁵ Pa by definition
    high = t.parameter("tmp").range.high  # type: ignore[union-attr]
    assert high is not None and high.expr is not None and high.expr.names == {"tmp_max"}


@pytest.mark.parametrize(
    ("bound", "why"),
    [
        ('"3 wibbles"', "'3 wibbles' is neither a quantity in bar (unknown unit 'wibbles'"),
        ('"tmp_mx"', "nor an expression (unknown name 'tmp_mx')"),
        ('"3"', "'3' is neither a quantity in bar ('3' has no unit)"),
        ('"3 * plann"', "unknown name 'plann'"),
        ('"pressure_drop * 3"', "'pressure_drop' is this parameter itself"),
        ('"2 * feed_flow"', "'2 * feed_flow' gives [length] ** 3 / [time], but the unit 'bar'"),
        ('"feed_flow + plan"', "unit mismatch"),
        ("3", "3 has no unit"),
    ],
)
def test_a_bound_that_is_neither_says_why(bound: str, why: str) -> None:
    text = UFDF.replace('range = { high = "plan * 3" }', f"range = {{ high = {bound} }}")
    with pytest.raises(InputError) as err:
        template.parse(text.encode(), "t.toml")
    line = line_of(UFDF, 'range = { high = "plan * 3" }')
    key = "parameters.pressure_drop.range.high"
    assert str(err.value).startswith(f"t.toml:{line}: {key}: "), str(err.value)
    assert why in str(err.value), str(err.value)


def test_plan_is_not_a_name_for_an_input_or_a_parameter(tmp_path: Path) -> None:
    text = FORWARD.replace("v = {", "plan = {").replace('expr = "v"', 'expr = "plan"')
    with pytest.raises(InputError) as err:
        template.parse(text.encode(), "t.toml")
    assert "inputs.plan: the name 'plan' is kept" in str(err.value)
