"""Executing a run's master record step by step: the values entered at each step, who
performed it and who verified it, and when (one transaction per signature, through the audit
journal).

A step is performed with every value its template lists (``[[steps.entries]]``), each parsed
into SI and kept as typed; a value outside its acceptance range needs a deviation of the run
that explains it. The order, the second person and the late-entry rule are in
:mod:`ledger.rules.steps`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlmodel import Session, col, select

from ledger import units
from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import require_role
from ledger.logbook.required import required
from ledger.logbook.times import activity_time
from ledger.rules import steps as rules
from ledger.rules.acceptance import PASS, judge
from ledger.runs import plan as planning
from ledger.runs.plan import Plan, show
from ledger.runs.service import _allow, deviations, get_run, label, run_plan, run_template
from ledger.runs.template import DEFAULT_SIGNERS, EntrySpec, Step, Template
from ledger.store.audit import Journal
from ledger.store.tables import Run, StepEntry, UserAccount


class StepValuesError(InputError):
    """Every missing, unknown or malformed ``--value`` of one step at once; ``problems``
    holds each (``field`` is ``value``) and the message lists one per line."""

    def __init__(self, step: int, problems: Sequence[InputError]) -> None:
        first = problems[0]
        if len(problems) == 1:
            message = str(first)
        else:
            lines = "\n".join(f"  {p}" for p in problems)
            message = f"{len(problems)} values of step {step} are missing or wrong:\n{lines}"
        super().__init__(message, field=first.field, value=first.value)
        self.problems = tuple(problems)


@dataclass(frozen=True)
class Limits:
    """An entry's acceptance range against the run's plan (SI; None: that end is open)."""

    low: float | None
    high: float | None
    absent: str = ""  # the names a bound needs that the plan does not have

    def text(self, entry: EntrySpec) -> str:
        """The range in the entry's display unit: "45.6–50.4 mL", "≤ 0.45 bar", or ""."""
        kind = _kind(entry)
        if self.low is not None and self.high is not None:
            low = show(self.low, entry.unit, kind).split(" ", 1)[0]
            return f"{low}–{show(self.high, entry.unit, kind)}"
        if self.high is not None:
            return f"≤ {show(self.high, entry.unit, kind)}"
        if self.low is not None:
            return f"≥ {show(self.low, entry.unit, kind)}"
        return "no limit set" if self.absent else ""


@dataclass(frozen=True)
class Recorded:
    """What ``record_step`` wrote, and the lines to print at once for values out of range."""

    entry: StepEntry
    out_of_range: tuple[str, ...]


def _kind(entry: EntrySpec) -> str | None:
    return entry.kind if entry.kind in units.KINDS else None


def limits(entry: EntrySpec, plan: Plan, where: str) -> Limits:
    """The entry's range evaluated, as a parameter's range is, against the plan's inputs,
    module facts and planned values (SI)."""
    env: dict[str, float | None] = {**plan.module.names(), **plan.inputs}
    env.update({v.name: v.value for v in plan.values})
    low, why_low = planning._bound(entry.low, env, where)
    high, why_high = planning._bound(entry.high, env, where)
    return Limits(low, high, ", ".join(w for w in (why_low, why_high) if w))


def _roles(template: Template, meaning: str) -> frozenset[str]:
    return frozenset(template.signers.get(meaning) or DEFAULT_SIGNERS[meaning])


def signed_entries(session: Session, run_id: int, as_of: datetime | None = None) -> list[StepEntry]:
    """The run's step signatures in the order given; with ``as_of``, as they stood then."""
    rows = session.exec(
        select(StepEntry).where(StepEntry.run_id == run_id).order_by(col(StepEntry.id))
    ).all()
    out = []
    for r in rows:
        if as_of is not None and r.created_at > as_of:
            continue
        if r.voided_at is not None and (as_of is None or r.voided_at <= as_of):
            continue
        out.append(r)
    return out


def _value(entry: EntrySpec, text: str, lim: Limits) -> dict[str, Any]:
    """One typed value parsed: as typed (text and unit), in SI, with its range and verdict."""
    where = f"--value {entry.name}"
    if entry.kind == "text":
        clean = required("value", text, f"{entry.title} ({where})", kind="name")
        return {"name": entry.name, "text": clean, "unit": "", "si": None, "low": None,
                "high": None, "in_range": None}  # fmt: skip
    try:
        number, unit = units.split_number(text, field=where, expected="a number")
        if entry.kind == "number":
            if unit:
                raise InputError(
                    f"{where}: {text!r} should be a plain number",
                    field="value",
                    value=text,
                    expected=f"{entry.title} as a plain number",
                )
            si = number
        else:
            si = units.parse(text, entry.kind, field=where)
    except InputError as exc:
        exc.field = "value"  # the option; the message names which value
        raise
    verdict = None
    if lim.low is not None or lim.high is not None:
        verdict = judge(si, lim.low, lim.high) == PASS
    return {"name": entry.name, "text": text.strip(), "unit": unit, "si": si, "low": lim.low,
            "high": lim.high, "in_range": verdict}  # fmt: skip


def _values(
    step: int, spec: Step, plan: Plan, given: Mapping[str, str], source: str
) -> list[dict[str, Any]]:
    problems: list[InputError] = []
    known = {e.name for e in spec.entries}
    for name in sorted(set(given) - known):
        problems.append(InputError(
            f"--value {name}: step {step} has no entry {name!r}", field="value", value=name,
            expected=f"one of {', '.join(sorted(known))}" if known else "no --value at all",
        ))  # fmt: skip
    out: list[dict[str, Any]] = []
    for e in spec.entries:
        text = given.get(e.name)
        if text is None or not text.strip():
            unit = f" in {e.unit}" if e.unit else ""
            problems.append(InputError(
                f"--value {e.name}=...: {e.title} is entered when step {step} is performed",
                field="value", value=e.name, expected=f"--value {e.name}=<{e.kind}{unit}>",
            ))  # fmt: skip
            continue
        try:
            where = f"{source}: steps[{step}].entries.{e.name}"
            out.append(_value(e, text, limits(e, plan, where)))
        except InputError as exc:
            problems.append(exc)
    if problems:
        raise StepValuesError(step, problems)
    return out


def record_step(
    session: Session,
    actor: UserAccount,
    run_id: int,
    step: int,
    meaning: str,
    values: Mapping[str, str],
    done_at: datetime | None = None,
    *,
    deviation: int | None = None,
) -> Recorded:
    """Sign step ``step`` (from 1) of the run as ``meaning`` (performed: with every value the
    step lists, typed with their units; verified: by another person, no values). ``done_at``
    (aware UTC) is when the work was done, for a late entry."""
    run = get_run(session, run_id, lock=True)
    _allow(run, "step")
    template = run_template(run)
    if meaning not in rules.STEP_MEANINGS:
        raise InputError(f"--meaning {meaning}: not a step signature", field="meaning",
                         value=meaning, expected=" or ".join(rules.STEP_MEANINGS))  # fmt: skip
    if not 1 <= step <= len(template.steps):
        raise InputError(
            f"{label(run)} has no step {step}", field="step", value=step,
            expected=f"a step number from 1 to {len(template.steps)} (fluxledger run steps "
            f"{run.id})",
        )  # fmt: skip
    spec = template.steps[step - 1]
    if meaning not in spec.signatures:
        raise InputError(
            f"--meaning {meaning}: step {step} is signed as {', '.join(spec.signatures)} only",
            field="meaning", value=meaning, expected=" or ".join(spec.signatures),
        )  # fmt: skip
    require_role(actor, _roles(template, meaning), f"sign a step as {meaning}")
    done = signed_entries(session, run_id)
    problem = rules.sign_problem(
        step, meaning, actor.login, [s.signatures for s in template.steps],
        [rules.StepSigned(r.step, r.meaning, r.login) for r in done],
    )  # fmt: skip
    if problem:
        raise RefusedError(f"{label(run)}: {problem}", field="step", value=step)
    if meaning == "verified" and (values or deviation is not None):
        raise InputError(
            f"step {step}: values and a deviation are given when it is performed; "
            "verifying confirms them", field="value" if values else "deviation",
            value=", ".join(values) if values else deviation, expected="no --value or --deviation",
        )  # fmt: skip
    plan = run_plan(run)
    entered = _values(step, spec, plan, values, template.source) if meaning == "performed" else []
    journal = Journal(session, actor.login)
    at, _ = activity_time(done_at, journal.at)
    _check_time(run, step, at, done)
    outside = [v for v in entered if v["in_range"] is False]
    lines = tuple(_out_line(step, spec, v) for v in outside)
    if outside and deviation is None:
        raise RefusedError(
            f"{label(run)} step {step}: " + "; ".join(lines) + ". A value out of range needs "
            f"a deviation: record it first with `fluxledger run deviation {run.id} "
            '--description "..."`, then sign the step again with --deviation N',
            field="deviation", value=[v["name"] for v in outside],
        )  # fmt: skip
    if deviation is not None and deviation not in {d.number for d in deviations(session, run_id)}:
        raise InputError(
            f"--deviation {deviation}: {label(run)} has no deviation {deviation}",
            field="deviation", value=deviation,
            expected=f"the number of a deviation of {label(run)} (fluxledger run show {run.id})",
        )  # fmt: skip
    record = journal.create(
        StepEntry(run_id=run_id, step=step, meaning=meaning, login=actor.login,
                  full_name=actor.full_name, values=entered or None, done_at=at,
                  late=rules.is_late(at, journal.at), deviation_number=deviation),
        module_id=run.module_id,
    )  # fmt: skip
    return Recorded(record, lines)


def _check_time(run: Run, step: int, at: datetime, done: Sequence[StepEntry]) -> None:
    """A step's time lies after the run started and after the signatures it follows."""
    if run.started_at is not None and at < run.started_at:
        raise InputError(
            f"step {step} cannot be done at {at.isoformat()}, before {label(run)} started "
            f"({run.started_at.isoformat()})", field="activity_time", value=at.isoformat(),
            expected=f"a time at or after {run.started_at.isoformat()}",
        )  # fmt: skip
    before = [r for r in done if r.step < step or (r.step == step and r.meaning == "performed")]
    if before:
        last = max(before, key=lambda r: r.done_at)
        if at < last.done_at:
            raise InputError(
                f"step {step} cannot be done at {at.isoformat()}, before step {last.step} was "
                f"{last.meaning} ({last.done_at.isoformat()})", field="activity_time",
                value=at.isoformat(), expected=f"a time at or after {last.done_at.isoformat()}",
            )  # fmt: skip


def _out_line(step: int, spec: Step, v: dict[str, Any]) -> str:
    entry = next(e for e in spec.entries if e.name == v["name"])
    rng = Limits(v["low"], v["high"]).text(entry)
    return f"OUT OF RANGE: {entry.title} {v['text']} (range {rng})"


# -- what a step shows ---------------------------------------------------------------------


@dataclass(frozen=True)
class ValueView:
    """One entry of a step: as typed (None before it is entered), its range and verdict."""

    name: str
    title: str
    kind: str
    unit: str  # the display unit
    phase: str
    text: str | None  # as typed, with its unit
    si: float | None
    range: str  # "45.6–50.4 mL", "" without one
    in_range: bool | None


@dataclass(frozen=True)
class StepView:
    """One step of the run's record: its entries and the signatures it has."""

    number: int
    operation: str
    phase: str
    title: str
    signatures: tuple[str, ...]  # the meanings it needs, in order
    values: tuple[ValueView, ...]
    signed: tuple[StepEntry, ...]

    @property
    def complete(self) -> bool:
        return {s.meaning for s in self.signed} >= set(self.signatures)


def step_views(session: Session, run: Run, as_of: datetime | None = None) -> list[StepView]:
    """Every step of the run's template with its values and signatures (as of ``as_of``)."""
    template = run_template(run)
    plan = run_plan(run)
    done = signed_entries(session, run.id or 0, as_of)
    out = []
    for i, s in enumerate(template.steps, start=1):
        signed = tuple(r for r in done if r.step == i)
        performed = next((r for r in signed if r.meaning == "performed"), None)
        typed = {v["name"]: v for v in (performed.values or [])} if performed else {}
        views = []
        for e in s.entries:
            v = typed.get(e.name)
            rng = (
                Limits(v["low"], v["high"]).text(e)
                if v
                else limits(e, plan, f"{template.source}: steps[{i}].entries.{e.name}").text(e)
            )
            views.append(ValueView(e.name, e.title, e.kind, e.unit, e.phase,
                                   v["text"] if v else None, v["si"] if v else None, rng,
                                   v["in_range"] if v else None))  # fmt: skip
        out.append(StepView(i, s.operation, s.phase, s.title, s.signatures, tuple(views), signed))
    return out


def steps_of(session: Session, run_id: int) -> list[StepView]:
    """The steps of run ``run_id`` now (``fluxledger run steps``)."""
    return step_views(session, get_run(session, run_id))
