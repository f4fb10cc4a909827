"""Verdicts of flow-type integrity tests (diffusion, water intrusion) against a module type's
limit (pure: plain values in, a verdict out).

A limit is a maximum flow at a stated test pressure. A flow says nothing about integrity at
another pressure (diffusion grows with the pressure difference, intrusion more steeply), so a
test run at a pressure other than the limit's is refused rather than judged. The pass rule
(at or below the limit) is common practice; the limit itself, its test pressure and any
pressure tolerance come from the site's validated procedure.

Edge convention as in :mod:`ledger.rules.water_test`: a flow exactly at the limit passes, and
"exactly" allows the relative EDGE_TOLERANCE for binary rounding; the same tolerance applies
to the test pressure on top of the limit's own pressure tolerance.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

from ledger.errors import InputError
from ledger.rules.water_test import EDGE_TOLERANCE, at_most

FlowTest = Literal["diffusion", "water_intrusion"]
FLOW_TESTS: tuple[FlowTest, ...] = ("diffusion", "water_intrusion")
_WORDS = {"diffusion": "diffusion flow", "water_intrusion": "water intrusion flow"}


@dataclass(frozen=True)
class FlowLimit:
    """A module type's limit for one flow-type integrity test.

    ``max_flow_m3_s`` the largest passing flow (m³/s, at the reference conditions the site
    states for it); ``test_pressure_pa`` the gauge test pressure the limit holds for (Pa);
    ``pressure_tolerance_pa`` how far (Pa) the recorded test pressure may lie from it.
    """

    test: FlowTest
    max_flow_m3_s: float
    test_pressure_pa: float
    pressure_tolerance_pa: float = 0.0


@dataclass(frozen=True)
class FlowVerdict:
    """The outcome: ``passed``, the numbers compared, and the reason in words.

    ``margin_m3_s`` = limit − measured (positive: headroom); ``fraction_of_limit`` =
    measured / limit.
    """

    passed: bool
    test: FlowTest
    measured_flow_m3_s: float
    max_flow_m3_s: float
    test_pressure_pa: float
    margin_m3_s: float
    fraction_of_limit: float
    reason: str


def _finite(field: str, value: float, expected: str, *, positive: bool) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        x = math.nan
    if not math.isfinite(x) or x < 0.0 or (positive and x == 0.0):
        raise InputError(
            f"{field} = {value!r} is out of range; expected {expected}",
            field=field,
            value=value,
            expected=expected,
        )
    return x


def check_limit(limit: FlowLimit) -> FlowLimit:
    """Return ``limit`` if its test, flow, pressure and tolerance make sense, else raise."""
    if limit.test not in FLOW_TESTS:
        raise InputError(
            f"test = {limit.test!r} is not a flow-type integrity test",
            field="limit.test",
            value=limit.test,
            expected="diffusion or water_intrusion",
        )
    _finite("limit.max_flow_m3_s", limit.max_flow_m3_s, "a flow greater than zero", positive=True)
    _finite(
        "limit.test_pressure_pa",
        limit.test_pressure_pa,
        "a gauge pressure greater than zero",
        positive=True,
    )
    _finite(
        "limit.pressure_tolerance_pa",
        limit.pressure_tolerance_pa,
        "a tolerance of zero or more",
        positive=False,
    )
    return limit


def judge_flow(measured_flow_m3_s: float, test_pressure_pa: float, limit: FlowLimit) -> FlowVerdict:
    """Judge a diffusion or water-intrusion flow (m³/s) measured at ``test_pressure_pa`` (Pa
    gauge) against ``limit``.

    Refused (InputError naming ``test_pressure_pa``) when the test pressure differs from the
    limit's by more than its tolerance; refused when the flow is negative or not a number.
    Otherwise passed when measured ≤ limit (the edge passes).
    """
    check_limit(limit)
    flow = _finite(
        "measured_flow_m3_s", measured_flow_m3_s, "a flow of zero or more", positive=False
    )
    pressure = _finite(
        "test_pressure_pa", test_pressure_pa, "a gauge pressure greater than zero", positive=True
    )
    allowed = limit.pressure_tolerance_pa + limit.test_pressure_pa * EDGE_TOLERANCE
    if abs(pressure - limit.test_pressure_pa) > allowed:
        expected = f"{limit.test_pressure_pa:g} Pa"
        if limit.pressure_tolerance_pa > 0.0:
            expected += f" ± {limit.pressure_tolerance_pa:g} Pa"
        raise InputError(
            f"test_pressure_pa = {pressure:g} Pa differs from the pressure the "
            f"{_WORDS[limit.test]} limit is stated for; a flow is only judged at that pressure",
            field="test_pressure_pa",
            value=test_pressure_pa,
            expected=f"the limit's test pressure, {expected}",
        )
    passed = at_most(flow, limit.max_flow_m3_s)
    word = "at or below" if passed else "above"
    return FlowVerdict(
        passed=passed,
        test=limit.test,
        measured_flow_m3_s=flow,
        max_flow_m3_s=limit.max_flow_m3_s,
        test_pressure_pa=pressure,
        margin_m3_s=limit.max_flow_m3_s - flow,
        fraction_of_limit=flow / limit.max_flow_m3_s,
        reason=(
            f"{_WORDS[limit.test]} {flow:.4g} m³/s is {word} the limit "
            f"{limit.max_flow_m3_s:.4g} m³/s at {limit.test_pressure_pa:g} Pa"
        ),
    )
