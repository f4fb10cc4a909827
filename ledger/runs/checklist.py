"""A run's acceptance checks: each planned parameter against its skid-log actual, each QC
attribute against its specification (verdicts from ledger.rules.acceptance)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from ledger.rules.acceptance import MISSING, Check, judge, judge_trace
from ledger.runs.plan import Plan, Planned, show
from ledger.runs.template import CHANNELS, Template


def run_checks(
    plan: Plan,
    template: Template,
    actuals: Mapping[str, Any] | None,
    qc: Mapping[str, float],
) -> list[Check]:
    """Checks in template order: parameters with a metric, then QC attributes."""
    summary = None
    if actuals is not None:
        from ledger.runs.actuals import Summary

        summary = Summary.from_record(actuals)
    out = [_parameter(v, summary) for v in plan.values if v.actual]
    for a in template.qc:
        unit_kind = a.kind
        value = qc.get(a.name)
        rule = _spec(a.low, a.high, a.unit, unit_kind)
        out.append(
            Check(
                name=a.name,
                source="qc",
                title=a.title,
                phase=None,
                planned=rule,
                actual=show(value, a.unit, unit_kind) if value is not None else "—",
                rule=rule,
                verdict=judge(value, a.low, a.high),
                note="" if value is not None else "no result entered",
            )
        )
    return out


def _spec(low: float | None, high: float | None, unit: str, kind: str | None) -> str:
    if low is not None and high is not None:
        return f"{show(low, unit, kind).split(' ', 1)[0]}–{show(high, unit, kind)}"
    if high is not None:
        return f"≤ {show(high, unit, kind)}"
    return f"≥ {show(low, unit, kind)}"


def _parameter(v: Planned, summary: Any) -> Check:
    planned = show(v.value, v.unit, v.kind)
    base: dict[str, Any] = {"name": v.name, "source": "parameter", "title": v.title,
                            "phase": v.phase, "planned": planned, "rule": v.rule}  # fmt: skip
    if summary is None:
        return Check(**base, actual="—", verdict=MISSING, note="no skid log imported")
    metric = v.actual or ""
    if v.phase is not None and not any(p.phase == v.phase for p in summary.phases):
        return Check(**base, actual="—", verdict=MISSING, note=f"no phase {v.phase!r} in the log")
    if metric in CHANNELS:
        scope = _scope(summary, v.phase)
        stats = scope.stats.get(metric) if scope is not None else None
        found = [e for e in summary.excursions if e.name == v.name]
        verdict = judge_trace(stats is not None, len(found))
        if stats is None:
            return Check(**base, actual="—", verdict=verdict, note=_why(summary, metric))
        span = f"{show(stats.min, v.unit, v.kind)} to {show(stats.max, v.unit, v.kind)}"
        note = ""
        if found:
            longest = max(e.duration_s for e in found)
            note = f"{len(found)} excursion(s), longest {longest:g} s"
        return Check(**base, actual=span, verdict=verdict, note=note)
    value = summary.metric(metric, v.phase)
    verdict = judge(value, v.low, v.high)
    if value is None:
        return Check(**base, actual="—", verdict=MISSING, note=_why(summary, metric))
    return Check(**base, actual=show(value, v.unit, v.kind), verdict=verdict)


def _scope(summary: Any, phase: str | None) -> Any:
    if phase is None:
        return summary.run
    return next((p for p in summary.phases if p.phase == phase), None)


def _why(summary: Any, metric: str) -> str:
    channel = metric.split(".")[0]
    for n in summary.not_computed:
        if n.what in (channel, metric):
            return f"not computed: {n.why}"
    return "not in the skid log"
