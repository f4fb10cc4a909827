"""What a run's report holds, for every front end (``run show``, ``run checks``, the run
page): the run's facts, its plan, the skid log and what was found in it, the acceptance
checks, excursions and deviations, and which actions the run's state allows.

Values stay SI inside; a quantity comes as an :class:`Amount`, which also carries its value
in the display unit, so a front end shows it without converting units itself. Times are
aware UTC, except the run's own times, which are given as the site's local time (text).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from sqlmodel import Session

from ledger import units
from ledger.rules import runs as sequence
from ledger.rules.acceptance import Check
from ledger.runs import service
from ledger.runs.plan import PlanCheck, Planned
from ledger.store.tables import Deviation, Run, SkidLogFile

# The actions a run page offers, in the order it shows them (ledger.rules.runs.ALLOWED).
ACTIONS = ("approve_plan", "start", "step", "import", "qc", "deviation", "close_deviation",
           "finish", "submit")  # fmt: skip


@dataclass(frozen=True)
class Amount:
    """A quantity: ``si`` (SI) of ``kind``, and ``value`` in ``unit`` (the display unit);
    ``value`` is None when the SI value is not finite."""

    si: float
    kind: str
    unit: str
    value: float | None
    text: str  # as people read it, e.g. "353.4 mL/min"


def amount(si: float, kind: str, unit: str | None = None) -> Amount:
    """``si`` of ``kind`` shown in ``unit`` (None: the kind's display unit)."""
    q = units.quantity(si, kind, unit)
    shown = float(q["value"])
    finite = math.isfinite(shown)
    spelled = units.SPELLED.get(q["unit"], q["unit"])
    text = f"{units.significant(shown, 4)} {spelled}" if finite else f"{shown} {spelled}"
    return Amount(si, kind, q["unit"], shown if finite else None, text)


@dataclass(frozen=True)
class Head:
    """The run's facts; the times as the site's local time with offset (None: not yet)."""

    run: int
    status: str
    product: str
    lot: str
    module: str | None
    template: str  # "ID vVERSION"
    template_sha256: str
    planned_by: str
    planned_at: str | None
    started_at: str | None
    finished_at: str | None
    override_reason: str | None
    plan_approved_by: str | None
    plan_approved_at: str | None
    skid: str | None  # the registered skid's code; None: the log needs a mapping file
    next: str  # what comes next in the run's life, in words


@dataclass(frozen=True)
class PlanRow:
    """One planned parameter: a quantity, a plain number, or None when not computed."""

    name: str
    title: str
    phase: str  # "run" for the whole run
    planned: Amount | float | None
    rule: str  # "—" without an acceptance rule
    note: str  # why the value is missing, else ""


@dataclass(frozen=True)
class AdviceRows:
    """The gel-model diafiltration optimum against the plan."""

    gel_concentration: Amount
    k: Amount
    optimum_concentration: Amount
    planned_concentration: Amount
    planned_time: Amount
    optimum_time: Amount
    time_saved: Amount
    buffer_difference: Amount  # buffer as planned minus at the optimum


@dataclass(frozen=True)
class PhaseFacts:
    """One phase found in the skid log."""

    name: str
    start: datetime
    duration: Amount
    samples: int


@dataclass(frozen=True)
class LogFacts:
    """The run's skid log: its files and what was found in it."""

    id: int
    files: list[dict[str, Any]]  # position, file_name, sha256, size_bytes, in joined order
    file_name: str  # of the first file
    sha256: str  # of the first file
    rows: int
    imported_by: str
    imported_at: datetime
    start: datetime
    duration: Amount
    channels: list[str]  # mapped and derived channels that have values
    phases: list[PhaseFacts]
    detected: dict[str, Any] | None  # the first file's dialect (encoding, delimiter, ...)
    warnings: list[str]
    assumptions: list[str]


@dataclass(frozen=True)
class ExcursionRow:
    """A stretch of samples outside a range (``limit`` and ``worst`` in the channel's kind)."""

    name: str
    channel: str
    phase: str  # "run" for the whole run
    side: str  # low, high
    start: datetime
    duration_s: float
    samples: int
    limit: Amount | float
    worst: Amount | float


@dataclass(frozen=True)
class DeviationRow:
    number: int
    check: str | None
    description: str
    classification: str | None
    impact: str | None
    by: str
    at: datetime
    closed: datetime | None
    closed_by: str | None
    closure: str | None  # None while open


@dataclass(frozen=True)
class ChecksPart:
    """The run's skid log, acceptance checks, excursions and deviations."""

    log: LogFacts | None
    checks: list[Check]
    excursions: list[ExcursionRow]
    deviations: list[DeviationRow]


@dataclass(frozen=True)
class RunReport:
    """Everything ``run show`` prints, and what a run page needs besides."""

    head: Head
    inputs: list[tuple[str, str]]  # (name, text as given), by name
    plan: list[PlanRow]
    plan_checks: list[PlanCheck]
    advice: AdviceRows | None
    steps: list[dict[str, Any]]  # operation, phase, signatures, text (the plan's instructions)
    checks: ChecksPart | None  # None while the run is planned
    notes: list[str]
    allowed: tuple[str, ...] = field(default=())  # of ACTIONS, what the run's status allows


def planned_value(v: Planned) -> Amount | float | None:
    """A planned parameter's value: a quantity of its kind in its unit, a fraction in
    percent, or a plain number."""
    if v.value is None:
        return None
    if v.kind:
        return amount(v.value, v.kind, v.unit)
    if v.unit.strip() == "percent":
        return amount(v.value, "fraction", "percent")
    return v.value


def allowed(run: Run) -> tuple[str, ...]:
    """The actions of ACTIONS that the run's status allows (each service checks again)."""
    return tuple(a for a in ACTIONS if sequence.refusal(a, run.status, "") is None)


def run_report(session: Session, run_id: int) -> RunReport:
    """The report of run ``run_id`` (an InputError naming ``run`` when there is none)."""
    from ledger.logbook.site import site_zone
    from ledger.rules.localtime import local_text
    from ledger.runs.queries import run_view

    view = run_view(session, run_id)
    zone = site_zone(session)

    def local(at: datetime | None) -> str | None:
        return local_text(at, zone) if at is not None else None

    run, plan = view.run, view.plan
    head = Head(
        run=run.id,  # type: ignore[arg-type]
        status=run.status,
        product=run.product,
        lot=run.lot,
        module=view.module_serial,
        template=f"{run.template_id} v{run.template_version}",
        template_sha256=run.template_sha256,
        planned_by=run.created_by,
        planned_at=local(run.created_at),
        started_at=local(run.started_at),
        finished_at=local(run.finished_at),
        override_reason=run.override_reason or None,
        plan_approved_by=run.plan_approved_by,
        plan_approved_at=local(run.plan_approved_at),
        skid=_skid_code(session, run),
        next=sequence.NEXT.get(run.status, ""),
    )
    rows = [
        PlanRow(v.name, v.title, v.phase or "run", planned_value(v), v.rule or "—", v.missing or "")
        for v in plan.values
    ]
    advice = None
    if plan.advice is not None:
        a = plan.advice
        advice = AdviceRows(
            gel_concentration=amount(a.gel_concentration_kg_m3, "concentration"),
            k=amount(a.k_m_s, "flux"),
            optimum_concentration=amount(a.optimum_concentration_kg_m3, "concentration"),
            planned_concentration=amount(a.planned_concentration_kg_m3, "concentration"),
            planned_time=amount(a.planned_time_s, "time"),
            optimum_time=amount(a.optimum_time_s, "time"),
            time_saved=amount(a.time_saved_s, "time"),
            buffer_difference=amount(a.buffer_saved_m3, "volume"),
        )
    steps = [{k: s[k] for k in ("operation", "phase", "signatures", "text")} for s in plan.steps]
    return RunReport(
        head=head,
        inputs=sorted(plan.given.items()),
        plan=rows,
        plan_checks=list(plan.checks),
        advice=advice,
        steps=steps,
        checks=checks_part(session, run) if run.status != "planned" else None,
        notes=list(plan.notes),
        allowed=allowed(run),
    )


def run_checks(session: Session, run_id: int) -> ChecksPart:
    """The skid log, checks, excursions and deviations of run ``run_id`` (``run checks``)."""
    return checks_part(session, service.get_run(session, run_id))


def checks_part(session: Session, run: Run) -> ChecksPart:
    """The skid log, checks, excursions and deviations of ``run``."""
    log = service.skid_log(session, run.id)  # type: ignore[arg-type]
    excursions = [_excursion(e) for e in (log.actuals.get("excursions") or [])] if log else []
    return ChecksPart(
        log=log_facts(log) if log is not None else None,
        checks=service.checks_of(session, run),
        excursions=excursions,
        deviations=[_deviation(d) for d in service.deviations(session, run.id)],  # type: ignore[arg-type]
    )


def log_facts(log: SkidLogFile) -> LogFacts:
    """What the skid log holds, from its stored actuals."""
    from ledger.runs.actuals import Summary

    summary = Summary.from_record(log.actuals)
    files = summary.files or []
    return LogFacts(
        id=log.id,  # type: ignore[arg-type]
        files=service.log_files(log),
        file_name=log.file_name,
        sha256=log.sha256,
        rows=log.rows,
        imported_by=log.created_by,
        imported_at=log.created_at,
        start=summary.start,
        duration=amount(summary.run.duration_s, "time"),
        channels=sorted(summary.run.stats),
        phases=[
            PhaseFacts(p.phase or "run", p.start, amount(p.duration_s, "time"), p.samples)
            for p in summary.phases
        ],
        detected=files[0].get("dialect") if files else None,
        warnings=list(summary.warnings),
        assumptions=list(summary.assumptions),
    )


def _in_kind(value: float, channel: str) -> Amount | float:
    from ledger.runs.actuals import CHANNEL_KINDS

    kind = CHANNEL_KINDS.get(channel)
    return amount(value, kind) if kind else value


def _excursion(e: dict[str, Any]) -> ExcursionRow:
    return ExcursionRow(
        name=e["name"],
        channel=e["channel"],
        phase=e.get("phase") or "run",
        side=e["side"],
        start=datetime.fromisoformat(e["start"]),
        duration_s=float(e["duration_s"]),
        samples=e["samples"],
        limit=_in_kind(float(e["limit"]), e["channel"]),
        worst=_in_kind(float(e["worst"]), e["channel"]),
    )


def _deviation(d: Deviation) -> DeviationRow:
    return DeviationRow(
        number=d.number,
        check=d.check_name,
        description=d.description,
        classification=d.classification,
        impact=d.impact,
        by=d.created_by,
        at=d.created_at,
        closed=d.closed_at,
        closed_by=d.closed_by,
        closure=d.closure,
    )


def _skid_code(session: Session, run: Run) -> str | None:
    from ledger.store.equipment import Skid

    skid = session.get(Skid, run.skid_id) if run.skid_id is not None else None
    return skid.code if skid is not None else None


# -- the run list, the steps and the QC form of a run page ---------------------------------


@dataclass(frozen=True)
class RunLine:
    """One run of ``run list``."""

    run: int
    status: str
    product: str
    lot: str
    module: str
    template: str
    planned_at: datetime


def run_lines(session: Session) -> list[RunLine]:
    """Every run that is not void, newest first."""
    from ledger.runs.queries import runs_newest_first

    return [
        RunLine(
            r.id or 0,
            r.status,
            r.product,
            r.lot,
            serial,
            f"{r.template_id} v{r.template_version}",
            r.created_at,
        )
        for r, serial in runs_newest_first(session)
    ]


@dataclass(frozen=True)
class Signed:
    """One signature on a step."""

    meaning: str
    login: str
    full_name: str
    done_at: datetime
    entered_at: datetime
    late: bool
    deviation: int | None


@dataclass(frozen=True)
class StepRow:
    """One step of the run's record: its entries (``ValueView``), its signatures and the
    meanings it still needs, in the template's order."""

    number: int
    operation: str
    phase: str
    title: str
    signatures: tuple[str, ...]
    values: tuple[Any, ...]  # ledger.runs.steps.ValueView
    signed: tuple[Signed, ...]
    needs: tuple[str, ...]
    complete: bool  # every signature it needs is given
    waits: str | None  # why its next signature cannot be given yet (the order); None: it can


def step_rows(session: Session, run_id: int) -> list[StepRow]:
    """The steps of run ``run_id`` as ``run steps`` lists them, each with the meanings it
    still needs and whether the order of the record lets the next one be signed now."""
    from ledger.rules.steps import StepSigned, sign_problem
    from ledger.runs.steps import steps_of

    views = steps_of(session, run_id)
    required = [tuple(v.signatures) for v in views]
    given = [StepSigned(r.step, r.meaning, r.login) for v in views for r in v.signed]
    out = []
    for v in views:
        signed = tuple(
            Signed(
                r.meaning, r.login, r.full_name, r.done_at, r.created_at, r.late, r.deviation_number
            )
            for r in v.signed
        )
        done = {x.meaning for x in signed}
        needs = tuple(m for m in v.signatures if m not in done)
        # No one's login: who may sign (not the performer, for a verification) is the
        # service's question when someone signs.
        waits = sign_problem(v.number, needs[0], "", required, given) if needs else None
        out.append(StepRow(v.number, v.operation, v.phase, v.title, tuple(v.signatures),
                           v.values, signed, needs, not needs, waits))  # fmt: skip
    return out


@dataclass(frozen=True)
class QcField:
    """A QC attribute of the run's template and its current result (as typed)."""

    name: str
    title: str
    unit: str
    method: str | None
    result: str | None


def qc_fields(session: Session, run_id: int) -> list[QcField]:
    """The template's QC attributes in its order, each with the result entered, if any."""
    run = service.get_run(session, run_id)
    entered = service.qc_results(session, run_id)
    return [
        QcField(
            a.name, a.title, a.unit, a.method, entered[a.name].text if a.name in entered else None
        )
        for a in service.run_template(run).qc
    ]
