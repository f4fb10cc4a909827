"""Safe arithmetic expressions for master-record templates (never ``eval``).

An expression is parsed with :mod:`ast` and only numbers, names, ``+ - * / **``, unary
signs, parentheses and calls of the functions in :data:`FUNCTIONS` are accepted. It is
evaluated twice over its life: once at template load on pint quantities of unit size, so
that a unit mismatch (adding a volume to a flow) or a result of the wrong dimension is found
before any run uses the template, and then on SI floats when a run is planned.
:func:`evaluation_order` orders named expressions so that each comes after the names it reads.
"""

from __future__ import annotations

import ast
import heapq
import math
import operator
from collections.abc import Callable, Collection, Mapping
from dataclasses import dataclass
from typing import Any

from ledger.errors import InputError
from ledger.science import concentration, hydraulics, water


@dataclass(frozen=True)
class Function:
    """A function a template may call: SI floats in, SI float out, with the arguments'
    physical kinds (None: dimensionless) and the result's kind."""

    call: Callable[..., float]
    args: tuple[str | None, ...]
    result: str | None
    help: str


def _pressure_drop(
    feed_flow: float, fibers: float, lumen: float, length: float, mu: float
) -> float:
    per_fiber = hydraulics.per_fiber_flow(feed_flow, round(fibers))
    return hydraulics.pressure_drop(per_fiber, lumen, length, mu)


def _wall_shear(feed_flow: float, fibers: float, lumen: float) -> float:
    return hydraulics.wall_shear_rate(hydraulics.per_fiber_flow(feed_flow, round(fibers)), lumen)


FUNCTIONS: dict[str, Function] = {
    "feed_flow_for_shear": Function(
        lambda g, n, d: hydraulics.feed_flow_for_shear(g, round(n), d),
        ("shear_rate", None, "length"),
        "flow",
        "feed flow (m³/s) for a wall shear rate: N·γ·π·D³/32",
    ),
    "wall_shear": Function(
        _wall_shear, ("flow", None, "length"), "shear_rate", "wall shear rate (1/s)"
    ),
    "pressure_drop": Function(
        _pressure_drop,
        ("flow", None, "length", "length", "viscosity"),
        "pressure",
        "channel pressure drop (Pa), Hagen–Poiseuille",
    ),
    "water_viscosity": Function(
        water.viscosity, ("temperature",), "viscosity", "viscosity of water (IAPWS 2008)"
    ),
    "diavolumes_for_removal": Function(
        concentration.diavolumes_for_removal,
        (None, None),
        None,
        "diavolumes for a removal fraction at a sieving coefficient: −ln(1−r)/S",
    ),
    "exp": Function(math.exp, (None,), None, "e to the power x"),
    "ln": Function(math.log, (None,), None, "natural logarithm"),
}
# min and max take any number of arguments of one kind and return that kind.
_VARIADIC = {"min": min, "max": max}

_BINARY: dict[type[ast.operator], Callable[[Any, Any], Any]] = {
    ast.Add: operator.add,
    ast.Sub: operator.sub,
    ast.Mult: operator.mul,
    ast.Div: operator.truediv,
    ast.Pow: operator.pow,
}
_UNARY: dict[type[ast.unaryop], Callable[[Any], Any]] = {
    ast.USub: operator.neg,
    ast.UAdd: operator.pos,
}


class ExpressionError(InputError):
    """An expression that cannot be used: bad syntax, a forbidden construct, an unknown name."""


@dataclass(frozen=True)
class Expr:
    """A checked expression: its text, its tree, the names it reads and the functions it calls."""

    text: str
    tree: ast.Expression
    names: frozenset[str]
    functions: frozenset[str] = frozenset()

    def evaluate(self, env: Mapping[str, float]) -> float:
        """The value on SI floats. ``env`` must hold every name (see ``names``)."""
        value = _walk(self.tree.body, env, dimensions=False)
        return float(value)

    def dimension(self, env: Mapping[str, Any]) -> Any:
        """The value on pint quantities: raises pint's DimensionalityError on a mismatch."""
        return _walk(self.tree.body, env, dimensions=True)


def compile_expr(text: str, *, where: str) -> Expr:
    """Parse and check an expression; ``where`` names its file and key in error messages."""
    if not isinstance(text, str) or not text.strip():
        raise ExpressionError(
            f"{where}: an expression is needed, got {text!r}",
            field=where,
            value=text,
            expected="an arithmetic expression such as 'initial_volume / factor'",
        )
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        raise ExpressionError(
            f"{where}: {text!r} is not a valid expression ({exc.msg})",
            field=where,
            value=text,
            expected="an arithmetic expression of names, numbers, + - * / ** and functions",
        ) from None
    names: set[str] = set()
    for node in ast.walk(tree):
        _allow(node, text, where, names)
    called = {n.func.id for n in ast.walk(tree) if isinstance(n, ast.Call)}  # type: ignore[attr-defined]
    # A called name is a function, not a variable, unless it is also read as a value.
    values = {n.id for n in ast.walk(tree) if isinstance(n, ast.Name)} - called
    return Expr(text.strip(), tree, frozenset(values | (names - called)), frozenset(called))


def evaluation_order(uses: Mapping[str, Collection[str]]) -> tuple[list[str], list[list[str]]]:
    """An order in which each name comes after every name it uses, and the cycles that stop one.

    ``uses`` maps each name, in the order it was written, to the names its expression reads;
    names that are not keys of ``uses`` (inputs, constants) are ignored. Where several names
    are free to go next, the one written first goes first, so a list already in order keeps its
    order. Returns the order (without the names in or behind a cycle) and each cycle as its
    names in written order (a name that uses itself is a cycle of one).
    """
    position = {name: i for i, name in enumerate(uses)}
    needs = {name: {u for u in uses[name] if u in position} for name in uses}
    users: dict[str, list[str]] = {name: [] for name in uses}
    for name, used in needs.items():
        for u in used:
            users[u].append(name)
    waiting = {name: len(used) for name, used in needs.items()}
    ready = [position[name] for name, n in waiting.items() if n == 0]
    heapq.heapify(ready)
    names = list(uses)
    order: list[str] = []
    while ready:
        name = names[heapq.heappop(ready)]
        order.append(name)
        for user in users[name]:
            waiting[user] -= 1
            if waiting[user] == 0:
                heapq.heappush(ready, position[user])
    placed = set(order)
    left = [name for name in names if name not in placed]
    return order, _cycles(left, needs, position)


def _cycles(
    left: list[str], needs: Mapping[str, set[str]], position: Mapping[str, int]
) -> list[list[str]]:
    """The strongly connected groups of ``left`` that hold a cycle (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    inside = set(left)

    def visit(name: str) -> None:
        index[name] = low[name] = len(index)
        stack.append(name)
        on_stack.add(name)
        for u in sorted(needs[name] & inside, key=position.__getitem__):
            if u not in index:
                visit(u)
                low[name] = min(low[name], low[u])
            elif u in on_stack:
                low[name] = min(low[name], index[u])
        if low[name] == index[name]:
            group = []
            while True:
                top = stack.pop()
                on_stack.discard(top)
                group.append(top)
                if top == name:
                    break
            if len(group) > 1 or name in needs[name]:
                found.append(sorted(group, key=position.__getitem__))

    for name in left:
        if name not in index:
            visit(name)
    return sorted(found, key=lambda g: position[g[0]])


def _allow(node: ast.AST, text: str, where: str, names: set[str]) -> None:
    if isinstance(node, ast.Expression | ast.Load | ast.operator | ast.unaryop):
        if isinstance(node, ast.operator) and type(node) not in _BINARY:
            _refuse(where, text, f"the operator {type(node).__name__} is not allowed")
        if isinstance(node, ast.unaryop) and type(node) not in _UNARY:
            _refuse(where, text, f"the operator {type(node).__name__} is not allowed")
        return
    if isinstance(node, ast.BinOp | ast.UnaryOp):
        return
    if isinstance(node, ast.Constant):
        if isinstance(node.value, bool) or not isinstance(node.value, int | float):
            _refuse(where, text, f"the constant {node.value!r} is not a number")
        return
    if isinstance(node, ast.Name):
        names.add(node.id)
        return
    if isinstance(node, ast.Call):
        fn = node.func
        if not isinstance(fn, ast.Name) or (fn.id not in FUNCTIONS and fn.id not in _VARIADIC):
            known = ", ".join(sorted([*FUNCTIONS, *_VARIADIC]))
            shown = fn.id if isinstance(fn, ast.Name) else ast.unparse(fn)
            _refuse(where, text, f"unknown function {shown!r} (known: {known})")
        if node.keywords:
            _refuse(where, text, "functions take positional arguments only")
        assert isinstance(fn, ast.Name)
        if fn.id in FUNCTIONS and len(node.args) != len(FUNCTIONS[fn.id].args):
            want = len(FUNCTIONS[fn.id].args)
            _refuse(where, text, f"{fn.id}() takes {want} arguments, got {len(node.args)}")
        if fn.id in _VARIADIC and len(node.args) < 2:
            _refuse(where, text, f"{fn.id}() takes two or more arguments")
        return
    _refuse(where, text, f"{type(node).__name__} is not allowed in an expression")


def _refuse(where: str, text: str, why: str) -> None:
    raise ExpressionError(
        f"{where}: {text!r}: {why}",
        field=where,
        value=text,
        expected="an arithmetic expression of names, numbers, + - * / ** and known functions",
    )


def _walk(node: ast.expr, env: Mapping[str, Any], *, dimensions: bool) -> Any:
    if isinstance(node, ast.Constant):
        return float(node.value)  # type: ignore[arg-type]  # numbers only, checked at compile
    if isinstance(node, ast.Name):
        return env[node.id]
    if isinstance(node, ast.BinOp):
        left = _walk(node.left, env, dimensions=dimensions)
        right = _walk(node.right, env, dimensions=dimensions)
        if isinstance(node.op, ast.Div) and not dimensions and right == 0:
            raise ZeroDivisionError(f"division by zero in {ast.unparse(node)}")
        return _BINARY[type(node.op)](left, right)
    if isinstance(node, ast.UnaryOp):
        return _UNARY[type(node.op)](_walk(node.operand, env, dimensions=dimensions))
    assert isinstance(node, ast.Call) and isinstance(node.func, ast.Name)
    args = [_walk(a, env, dimensions=dimensions) for a in node.args]
    name = node.func.id
    if name in _VARIADIC:
        if dimensions:
            for other in args[1:]:
                args[0] + other
            return args[0]
        return _VARIADIC[name](args)
    fn = FUNCTIONS[name]
    if dimensions:
        return _dimension_call(name, fn, args)
    return fn.call(*args)


def _dimension_call(name: str, fn: Function, args: list[Any]) -> Any:
    import pint

    from ledger import units

    ureg = units.registry()
    for i, (arg, kind) in enumerate(zip(args, fn.args, strict=True), start=1):
        want = _unit_quantity(ureg, kind)
        have = arg if isinstance(arg, pint.Quantity) else ureg.Quantity(arg)
        if have.dimensionality != want.dimensionality:
            what = kind.replace("_", " ") if kind else "dimensionless number"
            raise pint.DimensionalityError(
                have.units, want.units, extra_msg=f" (argument {i} of {name}() is a {what})"
            )
    return _unit_quantity(ureg, fn.result)


def _unit_quantity(ureg: Any, kind: str | None) -> Any:
    from ledger import units

    si = units.KINDS[kind].si if kind else ""
    return ureg.Quantity(1.0, si) if si else ureg.Quantity(1.0)
