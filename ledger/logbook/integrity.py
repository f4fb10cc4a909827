"""Integrity tests: pressure decay (readings, or start and end), bubble point, diffusion or
water intrusion, judged against the module type's limit at its stated test pressure."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

from sqlmodel import Session

from ledger import __version__
from ledger.errors import InputError, RefusedError
from ledger.logbook import latest
from ledger.logbook.context import Work, apply, begin, phase_start
from ledger.logbook.required import optional, positive
from ledger.rules.integrity_limits import FlowLimit, FlowTest, FlowVerdict, judge_flow
from ledger.rules.sequence import after_integrity_test
from ledger.rules.water_test import recovery_meets_minimum
from ledger.science import diffusion as flow_sci
from ledger.science import integrity as sci
from ledger.science import water
from ledger.store.tables import IntegrityTest, UserAccount

# Common practice (no single source): the test pressure should match the validated one.
PRESSURE_TOLERANCE = 0.05


@dataclass(frozen=True)
class DecayInput:
    """Pressure-decay inputs in SI. Either ``readings`` [(t_s, p_pa), ...] or start/end/hold."""

    test_pressure_pa: float | None = None
    readings: list[tuple[float, float]] | None = None
    start_pa: float | None = None
    end_pa: float | None = None
    hold_time_s: float | None = None
    upstream_volume_m3: float | None = None
    temperature_k: float | None = None


def _check_pressure(work: Work, test_pressure: float) -> None:
    stated = work.mtype.integrity_test_pressure_pa
    if abs(test_pressure / stated - 1.0) > PRESSURE_TOLERANCE:
        raise InputError(
            f"test pressure {test_pressure / 1e5:.3g} bar differs from the module type's "
            f"stated {stated / 1e5:.3g} bar by more than {PRESSURE_TOLERANCE:.0%}",
            field="test_pressure",
            value=test_pressure,
            expected=f"{stated / 1e5:.3g} bar ± {PRESSURE_TOLERANCE:.0%}, the pressure its "
            "limit was validated at",
        )


def _decay(d: DecayInput) -> tuple[float, float | None, float, float, list[list[float]] | None]:
    """(rate Pa/s, r², test pressure, hold time, stored readings)."""
    if d.readings is not None:
        if d.start_pa is not None or d.end_pa is not None:
            raise InputError(
                "give readings or start and end pressures, not both",
                field="readings",
                value=len(d.readings),
                expected="one of the two",
            )
        fit = sci.decay_rate([t for t, _ in d.readings], [p for _, p in d.readings])
        start = d.test_pressure_pa if d.test_pressure_pa is not None else fit.start_pressure_pa
        return fit.rate_pa_s, fit.r_squared, start, fit.duration_s, [list(r) for r in d.readings]
    if d.start_pa is None or d.end_pa is None or d.hold_time_s is None:
        raise InputError(
            "a pressure-decay test needs readings, or start, end and hold time",
            field="start",
            value=None,
            expected="--readings FILE, or --start, --end and --hold-time",
        )
    positive("hold_time", d.hold_time_s, "a time above zero")
    positive("start", d.start_pa, "a gauge pressure above zero", label="start pressure")
    rate = (d.start_pa - d.end_pa) / d.hold_time_s
    start = d.test_pressure_pa if d.test_pressure_pa is not None else d.start_pa
    return rate, None, start, d.hold_time_s, None


def record_decay_test(
    session: Session,
    actor: UserAccount,
    serial: str,
    d: DecayInput,
    *,
    activity_at: datetime | None = None,
    note: str | None = None,
    entered: dict[str, str] | None = None,
) -> tuple[IntegrityTest, str | None]:
    """Record the test; ``entered``: the quantities as typed (field -> "30 psi"), kept beside
    the SI values so that they are shown as typed."""
    work = begin(session, actor, serial, "integrity", activity_at)
    rate, r2, test_pressure, hold, readings = _decay(d)
    _check_pressure(work, test_pressure)
    if d.temperature_k is not None:
        water.check_temperature(d.temperature_k)
    flow = None
    if d.upstream_volume_m3 is not None:
        flow = sci.gas_flow_from_decay(max(rate, 0.0), d.upstream_volume_m3)
    judged = sci.judge_decay(max(rate, 0.0), work.mtype.decay_limit_pa_s)
    test = IntegrityTest(
        module_id=work.module_id,
        activity_at=work.at,
        late=work.late,
        limits_version_id=work.limits_version_id,
        note=optional("note", note, "a remark"),
        kind="pressure_decay",
        test_pressure_pa=test_pressure,
        hold_time_s=hold,
        upstream_volume_m3=d.upstream_volume_m3,
        temperature_k=d.temperature_k,
        readings=readings,
        decay_rate_pa_s=rate,
        r_squared=r2,
        gas_flow_m3_s=flow,
        limit_value=work.mtype.decay_limit_pa_s,
        passed=judged.passed,
        method="pressure decay: least-squares slope of the readings"
        if readings
        else "pressure decay: (start − end) / hold time",
        method_version=f"fluxledger {__version__}",
        entered=entered or None,
    )
    work.journal.create(test)
    return test, _advance(work, test)


def record_bubble_point(
    session: Session,
    actor: UserAccount,
    serial: str,
    bubble_point_pa: float,
    *,
    temperature_k: float | None = None,
    activity_at: datetime | None = None,
    note: str | None = None,
    entered: dict[str, str] | None = None,
) -> tuple[IntegrityTest, str | None]:
    """Record the test; ``entered``: the quantities as typed (field -> "30 psi"), kept beside
    the SI values so that they are shown as typed."""
    work = begin(session, actor, serial, "integrity", activity_at)
    minimum = work.mtype.bubble_point_min_pa
    if minimum is None:
        raise RefusedError(
            f"module type {work.mtype.code} has no bubble-point limit; record a pressure-decay "
            "test or give the type a bubble-point minimum",
            field="bubble_point",
            value=bubble_point_pa,
        )
    positive("bubble_point", bubble_point_pa, "a gauge pressure above zero")
    if temperature_k is not None:
        water.check_temperature(temperature_k)
    test = IntegrityTest(
        module_id=work.module_id,
        activity_at=work.at,
        late=work.late,
        limits_version_id=work.limits_version_id,
        note=optional("note", note, "a remark"),
        kind="bubble_point",
        bubble_point_pa=bubble_point_pa,
        temperature_k=temperature_k,
        limit_value=minimum,
        passed=bubble_point_pa >= minimum,
        method="bubble point: pass at or above the type's minimum",
        method_version=f"fluxledger {__version__}",
        entered=entered or None,
    )
    work.journal.create(test)
    return test, _advance(work, test)


@dataclass(frozen=True)
class FlowInput:
    """A diffusion or water-intrusion test in SI: a measured ``flow_m3_s`` (m³/s) at
    ``test_pressure_pa`` (Pa gauge), or a ``decay`` whose ``upstream_volume_m3`` is the gas
    volume upstream (diffusion) or over the water (intrusion)."""

    test: FlowTest
    flow_m3_s: float | None = None
    test_pressure_pa: float | None = None
    decay: DecayInput | None = None
    temperature_k: float | None = None


_FLOW_WORDS = {"diffusion": "diffusion", "water_intrusion": "water-intrusion"}
# Where a module type states each limit, as (max flow, test pressure) columns.
_FLOW_LIMITS = {
    "diffusion": ("diffusion_max_flow_m3_s", "diffusion_test_pressure_pa"),
    "water_intrusion": ("intrusion_max_flow_m3_s", "intrusion_test_pressure_pa"),
}
# The diffusion flow at the test temperature does not depend on it (Q = V·(dP/dt)/P_atm); the
# science takes one to check, so an untyped temperature is taken as 20 °C (common practice).
_ROOM_K = 293.15


def flow_limit(work: Work, test: FlowTest) -> FlowLimit:
    """The module type's limit for ``test``; InputError naming the missing limit if it states
    none. The test pressure may lie within PRESSURE_TOLERANCE of the limit's, as for a decay."""
    flow_col, pressure_col = _FLOW_LIMITS[test]
    max_flow = getattr(work.mtype, flow_col)
    pressure = getattr(work.mtype, pressure_col)
    if max_flow is None or pressure is None:
        field = flow_col.removesuffix("_m3_s")
        raise InputError(
            f"module type {work.mtype.code} has no {_FLOW_WORDS[test]} limit "
            f"({field}); a {_FLOW_WORDS[test]} test cannot be judged without it",
            field=field,
            value=None,
            expected=f"a module type stating --{field.replace('_', '-')} and "
            f"--{pressure_col.removesuffix('_pa').replace('_', '-')}",
        )
    return FlowLimit(test, max_flow, pressure, pressure_tolerance_pa=PRESSURE_TOLERANCE * pressure)


def _judge(flow: float, test_pressure: float, limit: FlowLimit) -> FlowVerdict:
    try:
        return judge_flow(flow, test_pressure, limit)
    except InputError as err:
        if err.field != "test_pressure_pa":
            raise
        raise InputError(
            f"test pressure {test_pressure / 1e5:.4g} bar differs from the "
            f"{limit.test_pressure_pa / 1e5:.4g} bar the module type's "
            f"{_FLOW_WORDS[limit.test]} limit is stated for by more than "
            f"{PRESSURE_TOLERANCE:.0%}; a flow is only judged at that pressure",
            field="test_pressure",
            value=test_pressure,
            expected=f"{limit.test_pressure_pa / 1e5:.4g} bar ± {PRESSURE_TOLERANCE:.0%}, the "
            "pressure the limit was validated at",
        ) from None


def record_flow_test(
    session: Session,
    actor: UserAccount,
    serial: str,
    f: FlowInput,
    *,
    activity_at: datetime | None = None,
    note: str | None = None,
    entered: dict[str, str] | None = None,
) -> tuple[IntegrityTest, str | None]:
    """Record a diffusion or water-intrusion test judged by ``rules.integrity_limits`` against
    the module type's limit; a failure holds the module as a failed decay does. ``entered``:
    the quantities as typed (field -> "8 mL/min")."""
    work = begin(session, actor, serial, "integrity", activity_at)
    limit = flow_limit(work, f.test)
    if f.temperature_k is not None:
        water.check_temperature(f.temperature_k)
    words = _FLOW_WORDS[f.test]
    rate: float | None = None
    r2: float | None = None
    hold: float | None = None
    volume: float | None = None
    readings: list[list[float]] | None = None
    if f.decay is None:
        if f.flow_m3_s is None or f.test_pressure_pa is None:
            raise InputError(
                f"a {words} test needs a measured flow at its test pressure, or a decay",
                field="flow" if f.flow_m3_s is None else "test_pressure",
                value=None,
                expected="--flow and --test-pressure, or decay values and --upstream-volume",
            )
        if not f.flow_m3_s >= 0.0:  # also refuses NaN
            raise InputError(
                f"the {words} flow must not be negative",
                field="flow",
                value=f.flow_m3_s,
                expected="a flow of zero or more",
            )
        flow, test_pressure = f.flow_m3_s, f.test_pressure_pa
        method = f"{words}: flow as measured"
    else:
        if f.flow_m3_s is not None:
            raise InputError(
                "give a measured flow or decay values, not both",
                field="flow",
                value=f.flow_m3_s,
                expected="one of the two",
            )
        rate, r2, test_pressure, hold, readings = _decay(f.decay)
        volume = f.decay.upstream_volume_m3
        if volume is None:
            raise InputError(
                f"the {words} flow from a pressure decay needs the upstream gas volume",
                field="upstream_volume",
                value=None,
                expected="the gas volume, e.g. '120 mL'",
            )
        positive("upstream_volume", volume, "a volume above zero")
        slope = "least-squares slope of the readings" if readings else "(start − end) / hold time"
        if f.test == "diffusion":
            temperature = f.temperature_k if f.temperature_k is not None else _ROOM_K
            flow = flow_sci.diffusion_flow_from_decay(max(rate, 0.0), volume, temperature)
            method = f"diffusion: Q = V·(dP/dt)/P_atm (EPA 815-R-06-009, ch. 4), dP/dt the {slope}"
        else:
            flow = flow_sci.water_intrusion_flow(max(rate, 0.0), volume, test_pressure)
            method = f"water intrusion: Q = V_gas·(dP/dt)/p_abs (Boyle's law), dP/dt the {slope}"
    verdict = _judge(flow, test_pressure, limit)
    test = IntegrityTest(
        module_id=work.module_id,
        activity_at=work.at,
        late=work.late,
        limits_version_id=work.limits_version_id,
        note=optional("note", note, "a remark"),
        kind=f.test,
        test_pressure_pa=test_pressure,
        hold_time_s=hold,
        upstream_volume_m3=volume,
        temperature_k=f.temperature_k,
        readings=readings,
        decay_rate_pa_s=rate,
        r_squared=r2,
        gas_flow_m3_s=flow if f.test == "diffusion" else None,
        intrusion_flow_m3_s=flow if f.test == "water_intrusion" else None,
        limit_value=limit.max_flow_m3_s,
        passed=verdict.passed,
        method=method,
        method_version=f"fluxledger {__version__}",
        entered=entered or None,
    )
    work.journal.create(test)
    return test, _advance(work, test)


def _advance(work: Work, test: IntegrityTest) -> str | None:
    status = work.module.status
    baseline = latest.water(work.session, work.module_id, "baseline")
    post_ok = False
    if status in ("cleaned", "awaiting_retest"):
        post = latest.water(work.session, work.module_id, "post_clean", after=phase_start(work))
        post_ok = (
            post is not None
            and post.recovery is not None
            and recovery_meets_minimum(post.recovery, work.mtype.recovery_min)
        )
    step = after_integrity_test(
        status, test.passed, has_baseline=baseline is not None, post_clean_passed=post_ok
    )
    return apply(work, step, ("integrity_test", test.id))
