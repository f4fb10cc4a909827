"""The template expression evaluator: arithmetic as Python does it, nothing else allowed."""

from __future__ import annotations

import math

import pint
import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger import units
from ledger.runs.expr import ExpressionError, compile_expr, evaluation_order

finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False).filter(lambda x: abs(x) > 1e-6)


@given(finite, finite, finite)
def test_arithmetic_agrees_with_python(a: float, b: float, c: float) -> None:
    # Reference: Python's own float arithmetic on the same expression.
    expr = compile_expr("(a + b) * c - a / b + -c", where="t")
    assert expr.evaluate({"a": a, "b": b, "c": c}) == pytest.approx((a + b) * c - a / b + -c)


def test_powers_functions_and_names() -> None:
    e = compile_expr("max(a, b) ** 2 + ln(exp(3))", where="t")
    assert e.names == {"a", "b"}
    assert e.evaluate({"a": 2.0, "b": 5.0}) == pytest.approx(28.0)


def test_feed_flow_for_shear_matches_the_laminar_formula() -> None:
    # DEVELOPERS.md: γ = 4·Q_fiber/(π r³), so Q_feed = N·γ·π·r³/4 (r = D/2).
    e = compile_expr("feed_flow_for_shear(g, n, d)", where="t")
    got = e.evaluate({"g": 4000.0, "n": 120.0, "d": 0.5e-3})
    assert got == pytest.approx(120 * 4000.0 * math.pi * (0.25e-3) ** 3 / 4, rel=1e-12)


@pytest.mark.parametrize(
    "text",
    [
        "__import__('os')",
        "a.real",
        "a[0]",
        "lambda: 1",
        "a if b else c",
        "a < b",
        "open('x')",
        "'text'",
        "True + 1",
        "a; b",
        "exp(a, b)",
        "min(a)",
        "exp(x=a)",
        "a // b",
        "",
    ],
)
def test_forbidden_constructs_are_refused(text: str) -> None:
    with pytest.raises(ExpressionError) as err:
        compile_expr(text, where="parameters.x.expr")
    assert "parameters.x.expr" in str(err.value)


def test_dimension_pass_finds_a_unit_mismatch() -> None:
    ureg = units.registry()
    e = compile_expr("v + q", where="t")
    with pytest.raises(pint.DimensionalityError):
        e.dimension({"v": ureg.Quantity(1.0, "m**3"), "q": ureg.Quantity(1.0, "m**3/s")})
    f = compile_expr("feed_flow_for_shear(v, 1, v)", where="t")
    with pytest.raises(pint.DimensionalityError):
        f.dimension({"v": ureg.Quantity(1.0, "m**3")})
    ok = compile_expr("v / q", where="t").dimension(
        {"v": ureg.Quantity(1.0, "m**3"), "q": ureg.Quantity(1.0, "m**3/s")}
    )
    assert ok.dimensionality == ureg.Quantity(1.0, "s").dimensionality


def test_evaluation_order_puts_each_name_after_what_it_uses() -> None:
    # Written order c, b, a; a uses nothing, b uses a, c uses b and an input x (ignored).
    order, cycles = evaluation_order({"c": {"b", "x"}, "b": {"a"}, "a": set()})
    assert order == ["a", "b", "c"] and cycles == []
    # Already in order: kept as written, also where several names are free to go next.
    uses = {"p": set(), "q": {"p"}, "r": set(), "s": {"q", "r"}, "t": set()}
    assert evaluation_order(uses) == (["p", "q", "r", "s", "t"], [])


def test_evaluation_order_reports_each_cycle_and_nothing_behind_it() -> None:
    uses = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}, "e": {"e"}, "f": set()}
    order, cycles = evaluation_order(uses)
    assert order == ["f"]
    assert cycles == [["a", "b", "c"], ["e"]]  # d depends on the cycle but is no part of it


@given(st.lists(st.sets(st.integers(0, 7), max_size=3), min_size=1, max_size=8))
def test_evaluation_order_agrees_with_graphlib(edges: list[set[int]]) -> None:
    # Reference: the standard library's graphlib.TopologicalSorter on the same graph.
    import graphlib

    uses = {f"n{i}": {f"n{j}" for j in used if j < len(edges)} for i, used in enumerate(edges)}
    order, cycles = evaluation_order(uses)
    try:
        list(graphlib.TopologicalSorter(uses).static_order())
    except graphlib.CycleError as exc:
        assert cycles, uses
        reported = exc.args[1]  # a cycle graphlib found, as [x, ..., x]
        assert any(set(reported) <= set(c) for c in cycles), (reported, cycles)
        assert not set(reported) & set(order)
    else:
        assert cycles == [] and sorted(order) == sorted(uses)
    placed = {name: i for i, name in enumerate(order)}
    for name in order:
        assert all(placed[u] < placed[name] for u in uses[name]), (name, uses)
