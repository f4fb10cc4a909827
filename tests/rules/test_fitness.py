"""Behaviour of ledger.rules.fitness against the acceptance rules of DEVELOPERS.md.

All data are invented (module QMB-0142, products QB-117 / QB-204). The limits are the common
practice defaults of DEVELOPERS.md, not any site's validated values.
"""

from __future__ import annotations

import dataclasses
from datetime import UTC, datetime, timedelta
from typing import Any

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.rules.fitness import (
    FIT,
    NOT_FIT,
    CleaningResult,
    Facts,
    IntegrityResult,
    Limits,
    Reason,
    Verdict,
    WaterResult,
    verdict,
)
from ledger.store.tables import STATUSES

DAY = timedelta(days=1)
NOW = datetime(2025, 3, 3, 8, 0, tzinfo=UTC)
CHECK_ORDER = [
    "status",
    "cycles",
    "recovery",
    "damage",
    "integrity",
    "cleaning",
    "storage",
    "pre-use",
    "product",
]

# common practice (DEVELOPERS.md): recovery ≥ 80 % of baseline, alert below 90 %, damage suspected
# above 120 %, pre-use within ±10 % of the last post-clean NWP. Cycle and storage limits invented.
LIMITS = Limits(
    recovery_min=0.80,
    recovery_alert=0.90,
    damage_ratio=1.20,
    preuse_band=0.10,
    reuse_limit_cycles=50,
    storage_limit_s=30 * 86_400.0,
)

BASE_NWP = 2.5e-10  # m/(s·Pa), invented


def water(
    stage: str, at: datetime, ratio: float | None, *, nwp: float | None = None, test_id: int = 1
) -> WaterResult:
    """A water-flux result; NWP follows the ratio to the invented baseline unless given."""
    if nwp is None:
        nwp = BASE_NWP * (ratio if ratio is not None else 1.0)
    return WaterResult(test_id=test_id, at=at, stage=stage, nwp=nwp, ratio=ratio)


def integrity(
    when: datetime, *, passed: bool = True, kind: str = "pressure_decay"
) -> IntegrityResult:
    return IntegrityResult(test_id=900, at=when, passed=passed, kind=kind)


BASELINE = water("baseline", NOW - 60 * DAY, 1.0, test_id=1)
LAST_USE = NOW - 6 * DAY
POST_CLEAN = water("post_clean", NOW - 5 * DAY, 0.95, test_id=7)
INTEGRITY_PASS = integrity(NOW - 5 * DAY + timedelta(hours=2))
PRE_USE = water("pre_use", NOW - timedelta(hours=1), 0.95 * 0.97, test_id=8)
CLEANING = CleaningResult(5, LAST_USE + timedelta(hours=4), "CP-NAOH-05", ())


def fit_facts(**changes: object) -> Facts:
    """A module that passes every check; ``changes`` alter one fact at a time."""
    facts = Facts(
        serial="QMB-0142",
        status="available",
        cycles=12,
        limits=LIMITS,
        now=NOW,
        baseline=BASELINE,
        last_use_at=LAST_USE,
        post_clean=POST_CLEAN,
        pre_use=PRE_USE,
        latest_water=PRE_USE,
        integrity=INTEGRITY_PASS,
        cleaning=CLEANING,
        storage_start=NOW - 4 * DAY,
        storage_solution="0.1 M NaOH",
        hold_reason=None,
        dedicated_product="QB-117",
        product="QB-117",
    )
    return dataclasses.replace(facts, **changes)  # type: ignore[arg-type]


def reason(v: Verdict, check: str) -> Reason:
    (found,) = [r for r in v.reasons if r.check == check]
    return found


def others_ok(v: Verdict, check: str) -> bool:
    """True when every check other than ``check`` is ok/info: the change touched one check only."""
    return all(r.outcome in ("ok", "info") for r in v.reasons if r.check != check)


# --- the reference scenario -------------------------------------------------------------------


def test_reference_module_is_fit_with_every_check_ok() -> None:
    v = verdict(fit_facts())
    assert [r.check for r in v.reasons] == CHECK_ORDER
    assert [r.outcome for r in v.reasons] == ["ok"] * len(CHECK_ORDER)
    assert v.fit
    assert v.word == FIT
    assert v.serial == "QMB-0142"


def test_a_failing_check_makes_the_verdict_not_fit_and_keeps_every_reason() -> None:
    v = verdict(fit_facts(cycles=50))
    assert not v.fit
    assert v.word == NOT_FIT
    assert [r.check for r in v.reasons] == CHECK_ORDER
    assert [r.check for r in v.reasons if r.outcome == "fail"] == ["cycles"]


def test_alert_and_info_do_not_stop_a_fit_verdict() -> None:
    v = verdict(
        fit_facts(
            post_clean=water("post_clean", NOW - 5 * DAY, 0.85),
            pre_use=None,
            latest_water=None,
            storage_start=None,
            product=None,
        )
    )
    outcomes = {r.check: r.outcome for r in v.reasons}
    assert outcomes["recovery"] == "alert"
    assert outcomes["damage"] == outcomes["storage"] == outcomes["pre-use"] == "info"
    assert outcomes["product"] == "info"
    assert v.fit


# --- status -----------------------------------------------------------------------------------


@pytest.mark.parametrize("status", [s for s in STATUSES if s != "available"])
def test_every_status_but_available_fails(status: str) -> None:
    v = verdict(fit_facts(status=status))
    assert reason(v, "status").outcome == "fail"
    assert others_ok(v, "status")
    assert not v.fit


def test_on_hold_names_the_hold_reason() -> None:
    r = reason(verdict(fit_facts(status="on_hold", hold_reason="integrity test failed")), "status")
    assert r.outcome == "fail"
    assert "integrity test failed" in r.message
    assert "disposition" in r.message


def test_unknown_status_fails_and_is_named() -> None:
    r = reason(verdict(fit_facts(status="quarantined")), "status")
    assert r.outcome == "fail"
    assert "quarantined" in r.message


# --- cycles -----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("cycles", "outcome"), [(0, "ok"), (48, "ok"), (49, "ok"), (50, "fail"), (51, "fail")]
)
def test_cycles_below_the_validated_limit(cycles: int, outcome: str) -> None:
    v = verdict(fit_facts(cycles=cycles))
    r = reason(v, "cycles")
    assert r.outcome == outcome
    assert f"{cycles} of 50" in r.message
    assert v.fit is (outcome == "ok")


# --- recovery ---------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("ratio", "outcome"),
    [
        (0.5, "fail"),
        (0.799, "fail"),  # just below the 80 % minimum, common practice (DEVELOPERS.md)
        (0.80, "alert"),  # exactly at the minimum passes, with an alert
        (0.85, "alert"),
        (0.899, "alert"),  # just below the 90 % alert level
        (0.90, "ok"),
        (1.0, "ok"),
    ],
)
def test_post_clean_recovery_limits(ratio: float, outcome: str) -> None:
    v = verdict(fit_facts(post_clean=water("post_clean", NOW - 5 * DAY, ratio), pre_use=None))
    r = reason(v, "recovery")
    assert r.outcome == outcome
    assert f"{100 * ratio:.1f} %" in r.message
    assert v.fit is (outcome != "fail")


def test_recovery_message_names_the_numbers() -> None:
    v = verdict(fit_facts(post_clean=water("post_clean", NOW - 5 * DAY, 0.799), pre_use=None))
    message = reason(v, "recovery").message
    assert "79.9 %" in message
    assert "80.0 %" in message  # the minimum
    assert "90.0 %" in message  # the alert level


def test_no_baseline_fails_recovery() -> None:
    r = reason(verdict(fit_facts(baseline=None)), "recovery")
    assert r.outcome == "fail"
    assert "baseline" in r.message


def test_a_module_never_used_keeps_its_baseline() -> None:
    v = verdict(fit_facts(last_use_at=None, post_clean=None, pre_use=None, cycles=0))
    assert reason(v, "recovery").outcome == "ok"
    assert v.fit


def test_post_clean_older_than_the_last_use_fails() -> None:
    stale = water("post_clean", LAST_USE - DAY, 0.98)
    r = reason(verdict(fit_facts(post_clean=stale, pre_use=None)), "recovery")
    assert r.outcome == "fail"
    assert "since the last use" in r.message


def test_used_module_without_post_clean_fails() -> None:
    r = reason(verdict(fit_facts(post_clean=None, pre_use=None)), "recovery")
    assert r.outcome == "fail"


def test_post_clean_without_ratio_fails() -> None:
    pc = water("post_clean", NOW - 5 * DAY, None)
    r = reason(verdict(fit_facts(post_clean=pc, pre_use=None)), "recovery")
    assert r.outcome == "fail"


# --- damage -----------------------------------------------------------------------------------


def test_damage_exactly_at_the_limit_is_ok() -> None:
    # 120 %: damage is suspected only *above* it, common practice (DEVELOPERS.md).
    latest = water("post_clean", NOW - 5 * DAY, 1.20)
    r = reason(verdict(fit_facts(latest_water=latest)), "damage")
    assert r.outcome == "ok"
    assert "120.0 %" in r.message


def test_damage_above_the_limit_without_a_later_integrity_test_fails() -> None:
    latest = water("pre_use", NOW - timedelta(hours=1), 1.25)
    v = verdict(fit_facts(latest_water=latest))  # the integrity pass is 5 days older
    r = reason(v, "damage")
    assert r.outcome == "fail"
    assert "125.0 %" in r.message
    assert "120.0 %" in r.message
    assert "pre-use" in r.message
    assert not v.fit


def test_damage_above_the_limit_with_a_later_integrity_pass_is_an_alert() -> None:
    latest = water("post_clean", NOW - 5 * DAY, 1.25)
    later_pass = integrity(NOW - 5 * DAY + timedelta(hours=3))
    v = verdict(fit_facts(latest_water=latest, integrity=later_pass))
    assert reason(v, "damage").outcome == "alert"
    assert v.fit


def test_damage_with_a_later_but_failed_integrity_test_fails() -> None:
    latest = water("post_clean", NOW - 5 * DAY, 1.25)
    later_fail = integrity(NOW - 5 * DAY + timedelta(hours=3), passed=False)
    v = verdict(fit_facts(latest_water=latest, integrity=later_fail))
    assert reason(v, "damage").outcome == "fail"
    assert reason(v, "integrity").outcome == "fail"


def test_damage_without_a_water_test_is_info() -> None:
    assert reason(verdict(fit_facts(latest_water=None)), "damage").outcome == "info"


def test_a_high_post_clean_recovery_is_stopped_by_the_damage_check() -> None:
    # Recovery 130 % passes the recovery check but suggests damage (DEVELOPERS.md).
    pc = water("post_clean", NOW - 5 * DAY, 1.30)
    early_pass = integrity(NOW - 5 * DAY - timedelta(hours=1))
    v = verdict(fit_facts(post_clean=pc, latest_water=pc, pre_use=None, integrity=early_pass))
    assert reason(v, "recovery").outcome == "ok"
    assert reason(v, "damage").outcome == "fail"
    assert not v.fit


# --- integrity --------------------------------------------------------------------------------


def test_no_integrity_test_fails() -> None:
    v = verdict(fit_facts(integrity=None))
    assert reason(v, "integrity").outcome == "fail"
    assert not v.fit


def test_failed_last_integrity_test_fails() -> None:
    v = verdict(fit_facts(integrity=integrity(NOW - DAY, passed=False)))
    r = reason(v, "integrity")
    assert r.outcome == "fail"
    assert "failed" in r.message
    assert "pressure-decay" in r.message
    assert not v.fit


def test_passed_integrity_names_kind_and_time() -> None:
    r = reason(verdict(fit_facts(integrity=integrity(NOW - DAY, kind="bubble_point"))), "integrity")
    assert r.outcome == "ok"
    assert "bubble-point" in r.message
    assert "2025-03-02T08:00" in r.message


# --- storage ----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("held", "outcome"),
    [
        (29 * DAY, "ok"),
        (30 * DAY, "ok"),  # equal to the limit is still within it
        (30 * DAY + timedelta(seconds=1), "fail"),
        (45 * DAY, "fail"),
    ],
)
def test_storage_time_limit(held: timedelta, outcome: str) -> None:
    v = verdict(fit_facts(storage_start=NOW - held))
    assert reason(v, "storage").outcome == outcome
    assert v.fit is (outcome == "ok")


def test_storage_message_names_the_days_and_solution() -> None:
    r = reason(verdict(fit_facts(storage_start=NOW - 31 * DAY)), "storage")
    assert "31.0 d" in r.message
    assert "30.0 d" in r.message
    assert "0.1 M NaOH" in r.message


def test_not_in_storage_is_info() -> None:
    assert reason(verdict(fit_facts(storage_start=None)), "storage").outcome == "info"


# --- pre-use ----------------------------------------------------------------------------------


def pre_use_of(pre_nwp: float, pc_nwp: float = BASE_NWP) -> Facts:
    """Facts with a post-clean NWP ``pc_nwp`` and a later pre-use NWP ``pre_nwp``."""
    pc = water("post_clean", NOW - 5 * DAY, 0.95, nwp=pc_nwp)
    pre = water("pre_use", NOW - timedelta(hours=1), None, nwp=pre_nwp)
    return fit_facts(post_clean=pc, pre_use=pre, latest_water=pc)


@pytest.mark.parametrize(
    ("fraction", "outcome"),
    [
        (0.85, "fail"),
        (0.89, "fail"),
        (0.91, "ok"),
        (1.0, "ok"),
        (1.09, "ok"),
        (1.11, "fail"),
        (1.3, "fail"),
    ],
)
def test_pre_use_band_of_the_last_post_clean(fraction: float, outcome: str) -> None:
    # ±10 % band, common practice (DEVELOPERS.md).
    v = verdict(pre_use_of(fraction * BASE_NWP))
    assert reason(v, "pre-use").outcome == outcome
    assert v.fit is (outcome == "ok")


def test_pre_use_band_edge_counts_as_inside() -> None:
    # With a band and NWPs that binary floating point holds exactly, the edge is inside.
    facts = dataclasses.replace(
        pre_use_of(1.125, 1.0), limits=dataclasses.replace(LIMITS, preuse_band=0.125)
    )
    assert reason(verdict(facts), "pre-use").outcome == "ok"


# Regression: the edge used to fail or pass depending on how the ratio rounded.
@pytest.mark.parametrize(("pre_nwp", "pc_nwp"), [(3.3e-10, 3.0e-10), (1.8e-10, 2.0e-10)])
def test_pre_use_exactly_at_the_band_edge_is_inside(pre_nwp: float, pc_nwp: float) -> None:
    # 110 % and 90 % of post-clean: on the ±10 % edge, like the other limits that include the
    # edge (recovery minimum, damage ratio, storage limit). The message itself says "110.0 %".
    v = verdict(pre_use_of(pre_nwp, pc_nwp))
    assert reason(v, "pre-use").outcome == "ok"


def test_pre_use_message_names_the_numbers() -> None:
    r = reason(verdict(pre_use_of(0.85 * BASE_NWP)), "pre-use")
    assert "85.0 %" in r.message
    assert "±10.0 %" in r.message


def test_pre_use_older_than_the_post_clean_is_info() -> None:
    old_pre = water("pre_use", POST_CLEAN.at - DAY, None, nwp=0.5 * POST_CLEAN.nwp)
    v = verdict(fit_facts(pre_use=old_pre))
    assert reason(v, "pre-use").outcome == "info"
    assert v.fit


def test_no_pre_use_is_info() -> None:
    assert reason(verdict(fit_facts(pre_use=None)), "pre-use").outcome == "info"


# --- product ----------------------------------------------------------------------------------


def test_dedicated_to_another_product_fails() -> None:
    v = verdict(fit_facts(dedicated_product="QB-117", product="QB-204"))
    r = reason(v, "product")
    assert r.outcome == "fail"
    assert "QB-117" in r.message
    assert "QB-204" in r.message
    assert "override" in r.message
    assert not v.fit


def test_not_dedicated_is_ok_and_first_use_dedicates() -> None:
    r = reason(verdict(fit_facts(dedicated_product=None, product="QB-204")), "product")
    assert r.outcome == "ok"
    assert "QB-204" in r.message


def test_not_dedicated_and_no_product_is_ok() -> None:
    assert reason(verdict(fit_facts(dedicated_product=None, product=None)), "product").outcome == (
        "ok"
    )


def test_no_product_given_is_info() -> None:
    r = reason(verdict(fit_facts(product=None)), "product")
    assert r.outcome == "info"
    assert "QB-117" in r.message


# --- properties -------------------------------------------------------------------------------

hours = st.integers(min_value=0, max_value=24 * 120)
ratios = st.floats(min_value=0.3, max_value=1.6, allow_nan=False)


def at(hour: int) -> datetime:
    return NOW - timedelta(days=120) + timedelta(hours=hour)


@st.composite
def limits_st(draw: st.DrawFn) -> Limits:
    recovery_min = draw(st.floats(min_value=0.5, max_value=0.95))
    return Limits(
        recovery_min=recovery_min,
        recovery_alert=recovery_min + draw(st.floats(min_value=0.0, max_value=0.15)),
        damage_ratio=draw(st.floats(min_value=1.05, max_value=1.5)),
        preuse_band=draw(st.floats(min_value=0.02, max_value=0.3)),
        reuse_limit_cycles=draw(st.integers(min_value=1, max_value=200)),
        storage_limit_s=draw(st.floats(min_value=86_400.0, max_value=90 * 86_400.0)),
    )


@st.composite
def water_st(draw: st.DrawFn, stage: str) -> WaterResult:
    ratio = draw(st.none() | ratios)
    nwp = BASE_NWP * draw(st.floats(min_value=0.3, max_value=1.6))
    return WaterResult(draw(st.integers(1, 10_000)), at(draw(hours)), stage, nwp, ratio)


def keep_or(default: object, other: st.SearchStrategy[Any]) -> st.SearchStrategy[Any]:
    """Mostly the reference scenario's value, so that fit modules are drawn often enough."""
    return st.one_of(st.just(default), st.just(default), st.just(default), other)


integrity_st = st.builds(
    IntegrityResult,
    test_id=st.just(900),
    at=hours.map(at),
    passed=st.booleans(),
    kind=st.sampled_from(["pressure_decay", "bubble_point"]),
)


cleaning_st = st.builds(
    CleaningResult,
    cleaning_id=st.just(5),
    at=hours.map(at),
    procedure=st.none() | st.just("CP-NAOH-05"),
    deviations=st.none() | st.just(()) | st.just(("contact time 45 min is shorter",)),
)


@st.composite
def facts_st(draw: st.DrawFn) -> Facts:
    ref = fit_facts()
    post_clean = draw(keep_or(ref.post_clean, st.none() | water_st("post_clean")))
    pre_use = draw(keep_or(ref.pre_use, st.none() | water_st("pre_use")))
    latest = draw(st.sampled_from([None, post_clean, pre_use]) | water_st("post_use"))
    products = st.none() | st.sampled_from(["QB-117", "QB-204"])
    return Facts(
        serial=draw(st.sampled_from(["QMB-0142", "QMB-0007", "QMB-1930"])),
        status=draw(keep_or(ref.status, st.sampled_from(STATUSES))),
        cycles=draw(keep_or(ref.cycles, st.integers(min_value=0, max_value=250))),
        limits=draw(keep_or(ref.limits, limits_st())),
        now=NOW,
        baseline=draw(keep_or(ref.baseline, st.none())),
        last_use_at=draw(keep_or(ref.last_use_at, st.none() | hours.map(at))),
        post_clean=post_clean,
        pre_use=pre_use,
        latest_water=latest,
        integrity=draw(keep_or(ref.integrity, st.none() | integrity_st)),
        cleaning=draw(keep_or(ref.cleaning, st.none() | cleaning_st)),
        storage_start=draw(keep_or(ref.storage_start, st.none() | hours.map(at))),
        storage_solution=draw(st.none() | st.just("20 % ethanol")),
        hold_reason=draw(st.none() | st.just("recovery")),
        dedicated_product=draw(keep_or(ref.dedicated_product, products)),
        product=draw(keep_or(ref.product, products)),
    )


@given(facts_st())
def test_every_check_is_listed_in_order_and_fit_means_no_fail(f: Facts) -> None:
    v = verdict(f)
    assert v.serial == f.serial
    assert [r.check for r in v.reasons] == CHECK_ORDER
    assert all(r.outcome in ("ok", "alert", "fail", "info") and r.message for r in v.reasons)
    assert v.fit == all(r.outcome != "fail" for r in v.reasons)
    assert v.word == (FIT if v.fit else NOT_FIT)


@given(facts_st())
def test_a_fit_verdict_meets_the_hard_rules(f: Facts) -> None:
    # Independent of the reason list: what DEVELOPERS.md says a reusable module must be.
    v = verdict(f)
    if v.fit:
        assert f.status == "available"
        assert f.cycles < f.limits.reuse_limit_cycles
        assert f.baseline is not None
        assert f.integrity is not None and f.integrity.passed
        assert f.dedicated_product in (None, f.product) or f.product is None
        if f.storage_start is not None:
            assert (f.now - f.storage_start).total_seconds() <= f.limits.storage_limit_s
        pc = f.post_clean
        if pc is not None and pc.ratio is not None:
            assert pc.ratio >= f.limits.recovery_min or (
                f.last_use_at is not None and pc.at < f.last_use_at
            )


@given(
    facts_st(),
    st.floats(min_value=0.3, max_value=1.6),
    st.floats(min_value=0.0, max_value=1.0),
    st.booleans(),
)
def test_lower_post_clean_recovery_never_makes_a_module_fit(
    f: Facts, ratio: float, factor: float, latest_is_pc: bool
) -> None:
    # Lower the recovery figure of the post-clean test (and of the latest test when it is that
    # test). Kept at or below the damage limit: above it, a lower recovery can rightly clear the
    # damage suspicion (see test_a_high_post_clean_recovery_is_stopped_by_the_damage_check).
    pc = f.post_clean or POST_CLEAN
    high = min(ratio, f.limits.damage_ratio)

    def with_ratio(r: float) -> Facts:
        new = dataclasses.replace(pc, ratio=r)
        return dataclasses.replace(
            f, post_clean=new, latest_water=new if latest_is_pc else f.latest_water
        )

    before, after = verdict(with_ratio(high)), verdict(with_ratio(high * factor))
    if not before.fit:
        assert not after.fit
    severity = {"ok": 0, "alert": 1, "fail": 2}
    assert (
        severity[reason(after, "recovery").outcome] >= severity[reason(before, "recovery").outcome]
    )


@given(facts_st(), st.integers(min_value=0, max_value=100))
def test_more_cycles_never_makes_a_module_fit(f: Facts, extra: int) -> None:
    before = verdict(f)
    after = verdict(dataclasses.replace(f, cycles=f.cycles + extra))
    if not before.fit:
        assert not after.fit
    if f.cycles + extra >= f.limits.reuse_limit_cycles:
        assert not after.fit


@given(facts_st())
def test_the_verdict_is_deterministic_for_equal_facts(f: Facts) -> None:
    twin = dataclasses.replace(f)  # a distinct object with equal fields
    assert twin is not f and twin == f
    assert verdict(twin) == verdict(f)
    assert verdict(f) == verdict(f)


# --- cleaning against its procedure -------------------------------------------------------------


def test_a_conforming_cleaning_is_ok_and_names_its_procedure() -> None:
    r = reason(verdict(fit_facts()), "cleaning")
    assert r.outcome == "ok" and "CP-NAOH-05" in r.message


def test_a_cleaning_outside_its_procedure_is_not_fit() -> None:
    short = "contact time 45 min is shorter than the procedure's 60 min"
    bad = CleaningResult(5, LAST_USE + timedelta(hours=4), "CP-NAOH-05", (short,))
    v = verdict(fit_facts(cleaning=bad))
    r = reason(v, "cleaning")
    assert r.outcome == "fail" and "45 min" in r.message
    assert not v.fit and others_ok(v, "cleaning")


def test_an_unchecked_cleaning_is_information_only() -> None:
    unchecked = CleaningResult(5, LAST_USE + timedelta(hours=4), None, None)
    v = verdict(fit_facts(cleaning=unchecked))
    assert reason(v, "cleaning").outcome == "info" and v.fit


def test_a_cleaning_older_than_the_last_use_does_not_count() -> None:
    old = CleaningResult(5, LAST_USE - timedelta(hours=1), "CP-NAOH-05", ())
    v = verdict(fit_facts(cleaning=old))
    assert reason(v, "cleaning").outcome == "fail" and not v.fit
