"""The water-flux test rules (ledger.rules.water_test) at their edges and on either side.

The limits are the shipped defaults, common practice with no single source (DEVELOPERS.md,
README "Acceptance limits belong to your site"): recovery minimum 80 % with an alert below
90 %, damage suspected above 120 % of baseline, pre-use NWP within ±10 % of the last
post-clean NWP, a TMP-line intercept above 10 % of the mean flux is suspect, and one water
temperature per test within 1 K. The edge convention: a value exactly at a limit passes.
"""

from __future__ import annotations

import math
from fractions import Fraction

import pytest

from ledger.rules import water_test as wt

MIN, ALERT, DAMAGE, BAND = 0.80, 0.90, 1.20, 0.10
NAN = math.nan
# One step either side of an edge: far above the rounding tolerance, far below any measured
# difference that matters.
STEP = 1e-6


@pytest.mark.parametrize(
    ("recovery", "expected"),
    [
        (MIN - STEP, "fail"),
        (MIN, "alert"),  # exactly at the minimum passes, with an alert
        (MIN + STEP, "alert"),
        (ALERT - STEP, "alert"),
        (ALERT, "pass"),  # exactly at the alert level: no alert
        (ALERT + STEP, "pass"),
        (0.0, "fail"),
        (1.5, "pass"),  # high recovery is the damage rule's business, not this one's
        (NAN, "fail"),
    ],
)
def test_recovery_class_at_and_around_its_edges(recovery: float, expected: str) -> None:
    assert wt.recovery_class(recovery, MIN, ALERT) == expected
    assert wt.recovery_meets_minimum(recovery, MIN) is (expected != "fail")


def test_a_recovery_on_the_minimum_but_for_rounding_meets_it() -> None:
    # 80 % of a baseline NWP of 7.3e-10 m/(s·Pa), divided back by it, is not 0.8 in binary
    # floating point (checked exactly with fractions); it still counts as at the minimum.
    baseline = 7.3e-10
    recovery = (0.8 * baseline) / baseline
    assert Fraction(recovery) != Fraction(0.8)
    assert wt.recovery_class(recovery, MIN, ALERT) == "alert"
    assert wt.recovery_class(0.8 * (1 - STEP), MIN, ALERT) == "fail"


@pytest.mark.parametrize(
    ("ratio", "suspected"),
    [(DAMAGE - STEP, False), (DAMAGE, False), (DAMAGE + STEP, True), (1.0, False), (NAN, True)],
)
def test_damage_is_suspected_only_above_the_ratio(ratio: float, suspected: bool) -> None:
    assert wt.damage_suspected(ratio, DAMAGE) is suspected


@pytest.mark.parametrize(
    ("ratio", "inside"),
    [
        (1 + BAND - STEP, True),
        (1 + BAND, True),  # the upper edge is inside
        (1 + BAND + STEP, False),
        (1 - BAND + STEP, True),
        (1 - BAND, True),  # the lower edge is inside
        (1 - BAND - STEP, False),
        (1.0, True),
        (NAN, False),
    ],
)
def test_pre_use_band_edges_are_inside(ratio: float, inside: bool) -> None:
    assert wt.preuse_in_band(ratio, BAND) is inside


@pytest.mark.parametrize(("pre", "reference"), [(1.1, 1.0), (3.3e-10, 3.0e-10), (1.8e-10, 2e-10)])
def test_pre_use_on_the_band_edge_but_for_rounding_is_inside(pre: float, reference: float) -> None:
    # 110 % and 90 % of the reference NWP. In binary floating point |pre/ref - 1| comes out a
    # hair off 0.10 (checked exactly with fractions against the decimal edge 1/10).
    deviation = abs(pre / reference - 1.0)
    assert Fraction(deviation) != Fraction(1, 10)
    assert wt.preuse_in_band(pre / reference, BAND)


@pytest.mark.parametrize(
    ("ratio", "suspect"),
    [(0.10 - STEP, False), (0.10, False), (0.10 + STEP, True), (-0.10, False),
     (-0.10 - STEP, True), (0.0, False), (NAN, True)],
)  # fmt: skip
def test_intercept_is_suspect_above_ten_percent_of_the_mean_flux(
    ratio: float, suspect: bool
) -> None:
    assert wt.intercept_suspect(ratio) is suspect


@pytest.mark.parametrize(
    ("temperatures", "ok"),
    [
        ([293.15, 294.15 - STEP], True),
        ([293.15, 294.15], True),  # exactly 1 K apart (in floating point 1 K ± rounding)
        ([293.15, 294.15 + STEP], False),
        ([295.0], True),
        ([293.15, 293.65, 294.15], True),
        ([293.15, NAN], False),
    ],
)
def test_one_water_temperature_within_one_kelvin(temperatures: list[float], ok: bool) -> None:
    assert wt.temperature_spread_ok(temperatures) is ok


def test_the_one_kelvin_edge_survives_rounding() -> None:
    # 31.09 °C and 32.09 °C, converted to kelvin (+ 273.15) as the unit layer does, lie
    # 1.0000000000000568 K apart in binary floating point: still one temperature.
    low, high = 31.09 + 273.15, 32.09 + 273.15
    assert Fraction(high - low) > 1
    assert wt.temperature_spread_ok([low, high])


@pytest.mark.parametrize(
    ("stage", "recovery", "preuse_ratio", "expected"),
    [
        ("post_clean", MIN - STEP, None, "fail"),
        ("post_clean", MIN, None, "alert"),
        ("post_clean", ALERT, None, "pass"),
        ("pre_use", 0.95, 1 + BAND, "pass"),
        ("pre_use", 0.95, 1 + BAND + STEP, "fail"),
        ("pre_use", 0.95, 1 - BAND - STEP, "fail"),
        ("pre_use", 0.95, None, None),  # no post-clean reference yet: no verdict
        ("post_use", 0.5, None, None),
        ("baseline", None, None, None),
    ],
)
def test_the_stored_verdict_of_each_stage(
    stage: str, recovery: float | None, preuse_ratio: float | None, expected: str | None
) -> None:
    got = wt.verdict(
        stage,
        recovery=recovery,
        preuse_ratio=preuse_ratio,
        recovery_min=MIN,
        recovery_alert=ALERT,
        preuse_band=BAND,
    )
    assert got == expected


def test_a_post_clean_verdict_needs_a_recovery() -> None:
    with pytest.raises(ValueError, match="recovery"):
        wt.verdict(
            "post_clean",
            recovery=None,
            preuse_ratio=None,
            recovery_min=MIN,
            recovery_alert=ALERT,
            preuse_band=BAND,
        )


def test_the_tolerance_is_far_below_a_measured_difference() -> None:
    # The edge absorbs rounding (≈1e-16 relative) but not a real 1e-6 difference.
    assert 1e-15 < wt.EDGE_TOLERANCE < 1e-6
    assert not wt.at_least(MIN * (1 - 10 * wt.EDGE_TOLERANCE), MIN)
    assert wt.at_least(MIN * (1 - 0.5 * wt.EDGE_TOLERANCE), MIN)
    assert not wt.at_most(BAND * (1 + 10 * wt.EDGE_TOLERANCE), BAND)
    assert wt.at_most(BAND * (1 + 0.5 * wt.EDGE_TOLERANCE), BAND)
