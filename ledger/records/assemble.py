"""Build a run's batch-record context from the database, as the database stood at a time.

A revision is frozen when it is issued: ``as_of`` (a UTC time) and ``audit_seq`` (the last audit
event it includes) are stored with it, and assembling again with them gives the same content
as long as nobody altered the database: records made later are left out, and records voided
later count as they did then. That is how ``record verify`` finds a value edited after
signing. The run's own data cannot change once it is in review (rules/runs.py).
"""

from __future__ import annotations

import hashlib
import re
import tempfile
from collections.abc import Sequence
from contextvars import ContextVar
from dataclasses import replace
from datetime import UTC, datetime, tzinfo
from pathlib import Path
from typing import Any

from sqlmodel import Session, col, select

from ledger.errors import TamperedError
from ledger.logbook import typelimits
from ledger.logbook.site import agent_hazards, site_name, site_zone
from ledger.records import context as c
from ledger.rules.hazards import agents_in, cautions_for
from ledger.rules.localtime import local_text
from ledger.runs import service as runs
from ledger.runs.plan import Plan, show
from ledger.runs.template import Template
from ledger.store.tables import (
    AuditEvent,
    Cleaning,
    CleaningStep,
    Deviation,
    IntegrityTest,
    Module,
    ModuleType,
    ModuleUse,
    QcResult,
    Run,
    Signature,
    SkidLogFile,
    TemplateVersion,
    WaterFluxTest,
)

RECENT_CYCLES = 10
RECOVERY_POINTS = 30
RECENT_CLEANINGS = 3
AUDIT_VALUE_CHARS = 80
CHART_BUCKETS = 400
# (series, title, display unit, display = SI × scale)
CHARTS = (
    ("tmp", "TMP", "bar", 1e-5),
    ("flux", "Permeate flux", "LMH", 3.6e6),
    ("retentate_volume", "Retentate volume", "L", 1e3),
)
_CLEANING_WORDS = re.compile(r"clean|sanitiz|sanitis|naoh|caustic|hydroxide", re.IGNORECASE)


def record_id(run_id: int) -> str:
    return f"BR-{run_id:06d}"


# The zone of the record being assembled. assemble() sets it once, so the dozen helpers
# below that print times need not each be handed it; outside assemble() it is UTC.
_ZONE: ContextVar[tzinfo] = ContextVar("record_zone", default=UTC)


def iso(at: datetime | None, zone: tzinfo | None = None) -> str | None:
    """ISO 8601 local time in ``zone`` (default: the site zone of the record being
    assembled, else UTC) with its offset, to the second."""
    if at is None:
        return None
    return local_text(at, zone or _ZONE.get())


def _at(at: datetime | None) -> str:
    return iso(at) or "—"


def _existed(rec: Any, as_of: datetime | None) -> bool:
    """The record existed at ``as_of`` and was not void then."""
    if as_of is not None and rec.created_at > as_of:
        return False
    voided = getattr(rec, "voided_at", None)
    return voided is None or (as_of is not None and voided > as_of)


def assemble(
    session: Session,
    run_id: int,
    *,
    revision: int = 0,
    reason: str = "draft: not issued for signature",
    as_of: datetime | None = None,
    audit_seq: int | None = None,
    version: int = c.CONTEXT_VERSION,
) -> c.Context:
    """The context of ``run_id``; revision 0 is a draft of the live data (no cut-off).

    Every time in it is the site's local time with its offset, in the zone set at ``as_of``
    (the issue time of a revision), so a revision assembled again shows the same text.
    ``version`` is the context version to assemble: a revision issued at an older one is
    assembled as it was then, so it can be compared with what was signed."""
    token = _ZONE.set(site_zone(session, as_of))
    try:
        ctx = _assemble(session, run_id, revision, reason, as_of, audit_seq)
    finally:
        _ZONE.reset(token)
    if version < 4:
        ctx = _before_cycle_steps(ctx)
    return ctx if version >= 3 else _before_hazard_classes(ctx)


def _before_cycle_steps(ctx: c.Context) -> c.Context:
    """``ctx`` as a version-3 context: cleanings without their cycle steps, no limits name."""
    cleanings = tuple(replace(r, steps=None, procedure="") for r in ctx.history.cleanings)
    history = replace(ctx.history, cleanings=cleanings, limits="")
    return replace(ctx, history=history, version=3)


def _before_hazard_classes(ctx: c.Context) -> c.Context:
    """``ctx`` as a version-2 context: one caustic caution for any cleaning, none per step."""
    steps = tuple(replace(s, cautions=None) for s in ctx.steps)
    cautions = [c.SITE_CAUTION]
    if ctx.history.cleanings or any(s.cleaning for s in steps):
        cautions.append(c.CAUSTIC_CAUTION)
    return replace(ctx, steps=steps, history=replace(ctx.history, cleaning_cautions=None),
                   cautions=tuple(cautions), version=2)  # fmt: skip


def _assemble(
    session: Session,
    run_id: int,
    revision: int,
    reason: str,
    as_of: datetime | None,
    audit_seq: int | None,
) -> c.Context:
    run = runs.get_run(session, run_id)
    if run.status == "aborted" and revision == 0:
        reason = (f"ABORTED on {iso(run.aborted_at)} by {run.aborted_by}: {run.abort_reason}; "
                  "not a released batch record")  # fmt: skip
    module = session.get(Module, run.module_id)
    assert module is not None
    registered = session.get(ModuleType, module.type_id)
    assert registered is not None
    # The limits in force when the revision was issued (a draft: now), of the versions
    # approved by then: a version approved later changes nothing in an issued revision.
    issued_at = as_of or datetime.now(UTC)
    mtype, limits = typelimits.in_force(session, registered, issued_at, known_at=issued_at)
    template = runs.run_template(run)
    plan = runs.run_plan(run)
    log = _skid_log(session, run_id, as_of)
    devs = [
        d
        for d in session.exec(select(Deviation).where(Deviation.run_id == run_id))
        if _existed(d, as_of)
    ]
    devs.sort(key=lambda d: d.number)
    uses = _uses(session, module.id, as_of)  # type: ignore[arg-type]
    cycle = next((i for i, u in enumerate(uses, start=1) if u.id == run.use_id), None)
    header = c.Header(
        record_id=record_id(run_id),
        revision=revision,
        revision_reason=reason,
        run_id=run_id,
        product=run.product,
        lot=run.lot,
        status="in_review" if revision else run.status,
        template_id=run.template_id,
        template_version=run.template_version,
        template_title=template.title,
        template_sha256=run.template_sha256,
        module_serial=module.serial,
        module_type=mtype.code,
        module_area=show(mtype.area_m2, "m^2", "area"),
        cycle=cycle,
        planned_by=run.created_by
        + (
            f"; plan approved by {run.plan_approved_by} at {iso(run.plan_approved_at)}"
            if run.plan_approved_by
            else ""
        ),
        planned_at=_at(run.planned_at or run.created_at),
        started_at=iso(run.started_at),
        finished_at=iso(run.finished_at),
        submitted_at=iso(run.submitted_at),
        skid_log=_log_line(session, run_id, log, as_of),
        override_reason=run.override_reason,
        site=site_name(session, as_of),
    )
    qc_rows = _qc_rows(session, run_id, as_of)
    checks = _checks(plan, template, log, qc_rows, devs, as_of)
    executed = _executed(session, run, len(plan.steps), as_of)
    agent_list = agent_hazards(session, as_of)
    steps = tuple(
        c.Step(
            s["operation"],
            s["phase"],
            s["title"],
            s["text"],
            tuple(s["signatures"]),
            bool(_CLEANING_WORDS.search(f"{s['operation']} {s['title']} {s['text']}")),
            *executed[i],
            cautions=tuple(
                h.caution for h in agents_in(f"{s['title']} {s['text']}", agent_list) if h.caution
            ),
        )
        for i, s in enumerate(plan.steps)
    )
    cutoff = run.finished_at or run.started_at or as_of or datetime.now(UTC)
    history = _history(session, module, mtype, uses, run.use_id, cutoff, as_of)
    in_force = "as registered"
    if limits is not None and limits.effective_from is not None:
        in_force = f"version {limits.version}, effective from {iso(limits.effective_from)}"
    history = replace(history, limits=f"{mtype.code} limits {in_force}")
    agents = [a for r in history.cleanings for a in ([st.agent for st in r.steps] if r.steps
                                                     else [r.agent])]  # fmt: skip
    cleaning_cautions = tuple(cautions_for(agents, agent_list))
    history = replace(history, cleaning_cautions=cleaning_cautions)
    summary = _summary(log)
    cautions = [c.SITE_CAUTION]
    for text in [*(t for st in steps for t in st.cautions or ()), *cleaning_cautions]:
        if text not in cautions:
            cautions.append(text)
    from ledger.records.review import gather

    dev_rows = _deviation_rows(devs, as_of)
    return c.Context(
        header=header,
        steps=steps,
        checks=checks,
        excursions=_excursions(summary, plan),
        qc=_qc(template, qc_rows, checks),
        deviations=dev_rows,
        history=history,
        charts=_charts(session, log, mtype, plan) if log else (),
        audit=_audit(session, run, audit_seq),
        required_signatures=tuple(template.signatures),
        signature_roles={m: tuple(r) for m, r in template.signers.items()},
        assumptions=_assumptions(summary),
        cautions=tuple(cautions),
        review=gather(session, run, as_of, checks, dev_rows, log, zone=_ZONE.get()),
    )


def _deviation_rows(
    devs: Sequence[Deviation], as_of: datetime | None
) -> tuple[c.DeviationRow, ...]:
    return tuple(
        c.DeviationRow(
            d.number,
            d.check_name,
            d.description,
            d.impact,
            d.created_by,
            _at(d.created_at),
            d.closed_by if _closed(d, as_of) else None,
            iso(d.closed_at) if _closed(d, as_of) else None,
            d.closure if _closed(d, as_of) else None,
            # set at creation (still open) or with a closure made by then
            d.classification if d.closed_at is None or _closed(d, as_of) else None,
        )
        for d in devs
    )


def _executed(
    session: Session, run: Run, count: int, as_of: datetime | None
) -> list[tuple[tuple[c.StepValue, ...] | None, tuple[c.StepSignoff, ...] | None]]:
    """Each step's values and signoffs as they stood at ``as_of`` (None when it has none)."""
    from ledger.runs.steps import step_views

    out: list[tuple[tuple[c.StepValue, ...] | None, tuple[c.StepSignoff, ...] | None]] = [
        (None, None)
    ] * count
    verdicts = {True: "in range", False: "OUT OF RANGE", None: ""}
    for v in step_views(session, run, as_of)[:count]:
        values = tuple(
            c.StepValue(x.name, x.title, x.text or "—", x.range, verdicts[x.in_range])
            for x in v.values
        )
        signoffs = tuple(
            c.StepSignoff(
                r.meaning,
                r.login,
                r.full_name,
                _at(r.done_at),
                _at(r.created_at),
                r.late,
                _late_note(r.done_at, r.created_at) if r.late else "",
                r.deviation_number,
            )
            for r in v.signed
        )
        out[v.number - 1] = (values or None, signoffs or None)
    return out


def _late_note(done_at: datetime, entered_at: datetime) -> str:
    return f"late: done at {_at(done_at)}, entered at {_at(entered_at)}"


def signature_rows(
    session: Session, run_id: int, up_to: int | None = None
) -> tuple[c.SignatureRow, ...]:
    """The run's signatures (of revisions up to ``up_to``), in the order they were given,
    dated in the site's current zone (signatures are not part of the hashed content)."""
    zone = site_zone(session)
    rows = session.exec(
        select(Signature).where(Signature.run_id == run_id).order_by(col(Signature.id))
    ).all()
    return tuple(
        c.SignatureRow(
            s.id or 0,
            s.revision,
            s.meaning,
            s.login,
            s.full_name,
            s.role,
            iso(s.signed_at, zone) or "—",
            s.revision_sha256,
        )
        for s in rows
        if up_to is None or s.revision <= up_to
    )


def _closed(d: Deviation, as_of: datetime | None) -> bool:
    return d.closed_at is not None and (as_of is None or d.closed_at <= as_of)


def _log_line(
    session: Session, run_id: int, log: SkidLogFile | None, as_of: datetime | None
) -> str | None:
    """The skid log in use, then every voided one with who voided it, when and why (a
    voided log stays in the record's history)."""
    parts = [_files_text(log)] if log else []
    if log is not None:
        parts += [a for a in (log.actuals or {}).get("assumptions", []) if a.startswith("phases ")]
        parts += list((log.actuals or {}).get("warnings") or [])
    for old in session.exec(select(SkidLogFile).where(SkidLogFile.run_id == run_id)).all():
        if old.voided_at is None or (as_of is not None and old.voided_at > as_of):
            continue
        files = " + ".join(f"{f['file_name']} (SHA-256 {f['sha256'][:16]}…)"
                           for f in runs.log_files(old))  # fmt: skip
        parts.append(
            f"voided: {files} by {old.voided_by} on {iso(old.voided_at)}: {old.void_reason}"
        )
    return "; ".join(parts) or None


def _files_text(log: SkidLogFile) -> str:
    """The log's file, or each of its files in the order they were joined, with SHA-256."""
    files = runs.log_files(log)
    if len(files) == 1:
        return f"{log.file_name} ({log.rows:,} rows, SHA-256 {log.sha256})"
    each = ", then ".join(f"{f['file_name']} (SHA-256 {f['sha256']})" for f in files)
    return f"{len(files)} files joined in this order ({log.rows:,} rows): {each}"


def _skid_log(session: Session, run_id: int, as_of: datetime | None) -> SkidLogFile | None:
    rows = session.exec(select(SkidLogFile).where(SkidLogFile.run_id == run_id)).all()
    return next((r for r in rows if _existed(r, as_of)), None)


def _qc_rows(session: Session, run_id: int, as_of: datetime | None) -> dict[str, QcResult]:
    rows = session.exec(select(QcResult).where(QcResult.run_id == run_id)).all()
    return {r.attribute: r for r in rows if _existed(r, as_of)}


def _checks(
    plan: Plan,
    template: Template,
    log: SkidLogFile | None,
    qc: dict[str, QcResult],
    devs: Sequence[Deviation],
    as_of: datetime | None,
) -> tuple[c.CheckRow, ...]:
    from ledger.runs.checklist import run_checks

    values = {k: v.value for k, v in qc.items()}
    found = run_checks(plan, template, log.actuals if log else None, values)
    out = []
    for k in found:
        dev = next((d for d in devs if d.check_name == k.name), None)
        out.append(
            c.CheckRow(
                k.name,
                k.source,
                k.title,
                k.phase,
                k.planned,
                k.actual,
                k.rule,
                k.verdict,
                k.note,
                dev.number if dev else None,
                bool(dev and _closed(dev, as_of)),
            )
        )
    return tuple(out)


def _qc(
    template: Template, rows: dict[str, QcResult], checks: Sequence[c.CheckRow]
) -> tuple[c.QcRow, ...]:
    methods = {a.name: a.method for a in template.qc}
    out = []
    for k in checks:
        if k.source != "qc":
            continue
        r = rows.get(k.name)
        out.append(
            c.QcRow(
                k.name,
                k.title,
                k.rule,
                r.text if r else "—",
                methods[k.name],
                r.created_by if r else None,
                iso(r.created_at) if r else None,
                k.verdict,
            )
        )
    return tuple(out)


def _summary(log: SkidLogFile | None) -> Any:
    if log is None:
        return None
    from ledger.runs.actuals import Summary

    return Summary.from_record(log.actuals)


def _clock(seconds: float) -> str:
    s = round(seconds)
    return f"{s // 3600:02d}:{s % 3600 // 60:02d}:{s % 60:02d}"


def _excursions(summary: Any, plan: Plan) -> tuple[c.ExcursionRow, ...]:
    if summary is None:
        return ()
    out = []
    for e in summary.excursions:
        v = next((p for p in plan.values if p.name == e.name), None)
        unit, kind = (v.unit, v.kind) if v else ("", None)
        out.append(
            c.ExcursionRow(
                check=e.name,
                channel=e.channel,
                phase=e.phase,
                start=_clock((e.start - summary.start).total_seconds()),
                duration=f"{e.duration_s:,.0f} s",
                worst=show(e.worst, unit, kind),
                limit=v.rule if v else show(e.limit, unit, kind),
            )
        )
    return tuple(out)


def _assumptions(summary: Any) -> tuple[str, ...]:
    if summary is None:
        return ("no skid log imported: no actuals",)
    out = list(summary.assumptions)
    out += [f"not computed: {n.what} — {n.why}" for n in summary.not_computed]
    return tuple(out)


def _uses(session: Session, module_id: int, as_of: datetime | None) -> list[ModuleUse]:
    rows = session.exec(select(ModuleUse).where(ModuleUse.module_id == module_id)).all()
    return sorted((u for u in rows if _existed(u, as_of)), key=lambda u: (u.activity_at, u.id))


def _history(
    session: Session,
    module: Module,
    mtype: ModuleType,
    uses: list[ModuleUse],
    use_id: int | None,
    cutoff: datetime,
    as_of: datetime | None,
) -> c.History:
    def rows(cls: Any) -> list[Any]:
        found = session.exec(select(cls).where(cls.module_id == module.id)).all()
        return sorted(
            (r for r in found if _existed(r, as_of) and r.activity_at <= cutoff),
            key=lambda r: (r.activity_at, r.id),
        )

    upto = [u for u in uses if u.activity_at <= cutoff]
    cycles = tuple(
        c.CycleRow(i, u.product, u.lot, _at(u.activity_at), iso(u.ended_at), u.id == use_id)
        for i, u in enumerate(upto, start=1)
    )[-RECENT_CYCLES:]
    recovery = []
    for t in rows(WaterFluxTest):
        if t.stage != "post_clean" or t.recovery is None:
            continue
        done = sum(1 for u in upto if u.activity_at < t.activity_at)
        nwp = show(t.nwp_m_s_pa, "L/(m^2*h*bar)", "permeability").replace(
            "L/(m^2*h*bar)", "LMH/bar"
        )
        ref = show(t.reference_temperature_k, "degC", "temperature")
        recovery.append(
            c.RecoveryPoint(
                done, _at(t.activity_at), f"{nwp} at {ref}", t.recovery, t.verdict or "—"
            )
        )
    integrity = rows(IntegrityTest)
    last = integrity[-1] if integrity else None
    return c.History(
        cycles_done=len(upto),
        reuse_limit=mtype.reuse_limit_cycles,
        recovery_min=mtype.recovery_min,
        recovery_alert=mtype.recovery_alert,
        recent_cycles=cycles,
        recovery=tuple(recovery[-RECOVERY_POINTS:]),
        last_integrity=_integrity(last) if last else None,
        cleanings=tuple(_cleaning(r, session) for r in rows(Cleaning)[-RECENT_CLEANINGS:]),
    )


def _integrity(t: IntegrityTest) -> c.IntegrityRow:
    if t.kind == "bubble_point":
        return c.IntegrityRow(
            _at(t.activity_at),
            "bubble point",
            show(t.bubble_point_pa, "bar", "pressure"),
            "≥ " + show(t.limit_value, "bar", "pressure"),
            t.passed,
        )
    if t.kind in ("diffusion", "water_intrusion"):
        flow = t.gas_flow_m3_s if t.kind == "diffusion" else t.intrusion_flow_m3_s
        words = "diffusion" if t.kind == "diffusion" else "water intrusion"
        return c.IntegrityRow(
            _at(t.activity_at),
            f"{words} at {show(t.test_pressure_pa, 'bar', 'pressure')}",
            show(flow, "mL/min", "flow"),
            "≤ " + show(t.limit_value, "mL/min", "flow"),
            t.passed,
        )
    at = show(t.test_pressure_pa, "bar", "pressure")
    return c.IntegrityRow(
        _at(t.activity_at),
        f"pressure decay at {at}",
        show(t.decay_rate_pa_s, "mbar/min", "pressure_rate"),
        "≤ " + show(t.limit_value, "mbar/min", "pressure_rate"),
        t.passed,
    )


# A cycle step's values: column, the name it is typed under, display unit, unit kind.
_STEP_VALUES = (
    ("temperature_k", "temperature", "degC", "temperature"),
    ("contact_time_s", "contact_time", "min", "time"),
    ("flow_m3_s", "flow", "mL/min", "flow"),
    ("tmp_pa", "tmp", "bar", "pressure"),
)
_ENDPOINTS: dict[str, tuple[str, str, str | None]] = {
    "ph": ("pH", "", None),
    "conductivity": ("conductivity", "uS/cm", "conductivity"),
    "toc": ("TOC", "ug/L", "concentration"),
    "volume": ("volume", "L", "volume"),
}


def _strength(value: float | None, unit: str) -> str:
    if unit == "mol/m**3":
        return show(value, "mol/L", "molarity")
    if unit == "kg/m**3":
        return show(value, "g/L", "concentration")
    return show(value, "percent", "fraction")


def _cycle_step(st: CleaningStep) -> c.CycleStepRow:
    """A cycle step for the record: each value as typed (else in a common unit)."""
    typed = st.entered or {}
    parts = []
    if st.concentration is not None:
        parts.append(typed.get("concentration") or _strength(st.concentration,
                                                              st.concentration_unit))  # fmt: skip
    for column, name, unit, kind in _STEP_VALUES:
        value = getattr(st, column)
        if value is not None:
            parts.append(typed.get(name) or show(value, unit, kind))
    if st.endpoint_kind is not None and st.endpoint_value is not None:
        word, unit, qkind = _ENDPOINTS[st.endpoint_kind]
        value_text = typed.get("endpoint") or (
            f"{st.endpoint_value:g}" if qkind is None else show(st.endpoint_value, unit, qkind)
        )
        parts.append(f"endpoint {word} {value_text}")
    conforms = "no: " + "; ".join(st.departures) if st.departures else "yes"
    return c.CycleStepRow(st.number, st.name, st.agent, st.solution_code or "",
                          ", ".join(parts) or "—", conforms)  # fmt: skip


def _cleaning(r: Cleaning, session: Session | None = None) -> c.CleaningRow:
    if r.concentration_unit == "mol/m**3":
        conc = show(r.concentration, "mol/L", "molarity")
    elif r.concentration_unit == "kg/m**3":
        conc = show(r.concentration, "g/L", "concentration")
    else:
        conc = show(r.concentration, "percent", "fraction")
    conforms = (
        "not checked"
        if r.deviations is None
        else "yes"
        if not r.deviations
        else "no: " + "; ".join(r.deviations)
    )
    steps: tuple[c.CycleStepRow, ...] = ()
    procedure = ""
    if session is not None and r.procedure_version_id is not None:
        version = session.get(TemplateVersion, r.procedure_version_id)
        procedure = f"{version.template_id} v{version.version}" if version else "?"
        found = session.exec(select(CleaningStep).where(CleaningStep.cleaning_id == r.id)
                             .order_by(col(CleaningStep.number)))  # fmt: skip
        steps = tuple(_cycle_step(st) for st in found)
    return c.CleaningRow(
        _at(r.activity_at),
        r.agent,
        conc,
        show(r.temperature_k, "degC", "temperature"),
        show(r.contact_time_s, "min", "time"),
        conforms,
        steps=steps,
        procedure=procedure,
    )


def _charts(
    session: Session, log: SkidLogFile, mtype: ModuleType, plan: Plan
) -> tuple[c.Series, ...]:
    from ledger.records.downsample import min_max
    from ledger.runs.actuals import Geometry, PhaseWindow, derived_channels, segments
    from ledger.runs.mapping import parse_mapping
    from ledger.runs.skidlog import read_logs

    mapping = parse_mapping(log.mapping_text, f"mapping of {log.file_name}")
    with tempfile.TemporaryDirectory() as tmp:
        paths = []
        # one folder per file: files of one log may share a name (a day's folder each)
        contents = runs.log_contents(session, log)
        for entry, (name, data) in zip(runs.log_files(log), contents, strict=False):
            if hashlib.sha256(data).hexdigest() != entry["sha256"]:
                raise TamperedError(
                    f"the skid log file {name} of {record_id(log.run_id)} was replaced in "
                    f"the database: its bytes no longer match the SHA-256 "
                    f"{str(entry['sha256'])[:12]} recorded when it was imported",
                    field="skid log", value=name,
                )  # fmt: skip
        if len(contents) != len(runs.log_files(log)):
            raise TamperedError(
                f"a file of the skid log of {record_id(log.run_id)} is missing from the "
                "database", field="skid log", value=log.file_name,
            )  # fmt: skip
        for position, (name, data) in enumerate(contents, start=1):
            folder = Path(tmp) / str(position)
            folder.mkdir()
            path = folder / name
            path.write_bytes(data)
            paths.append(path)
        skid = read_logs(paths, mapping, digest=False)
    geometry = Geometry(mtype.area_m2, mtype.fiber_count, mtype.lumen_diameter_m)
    channels, _ = derived_channels(skid, geometry)
    windows = [
        PhaseWindow(w["name"], datetime.fromisoformat(w["start"]), datetime.fromisoformat(w["end"]))
        for w in log.windows or []
    ]
    t = skid.time_s
    phases = tuple(
        (name, float(t[i0]), float(t[i1 - 1]))
        for name, i0, i1 in segments(skid, windows or None)
        if i1 > i0
    )
    out = []
    for name, title, unit, scale in CHARTS:
        y = channels.get(name)
        if y is None:
            continue
        ts, low, high = min_max(t, y, buckets=CHART_BUCKETS)
        bands = tuple(
            c.Band(v.phase or "whole run", v.low, v.high) for v in plan.values if v.actual == name
        )
        out.append(
            c.Series(
                name,
                title,
                unit,
                scale,
                tuple(ts),
                tuple(low),
                tuple(high),
                int(skid.rows),
                bands,
                phases,
            )
        )
    return tuple(out)


def _short(value: str | None) -> str | None:
    if value is None or len(value) <= AUDIT_VALUE_CHARS:
        return value
    return f"{value[:AUDIT_VALUE_CHARS]}… ({len(value):,} characters)"


def _audit(session: Session, run: Run, audit_seq: int | None) -> tuple[c.AuditRow, ...]:
    """The audit trail of the run's critical data: the run, its log, QC results, deviations."""
    from ledger.audittext import describe

    ids: dict[str, set[str]] = {"run": {str(run.id)}}
    for entity, cls in (
        ("skid_log_file", SkidLogFile),
        ("qc_result", QcResult),
        ("deviation", Deviation),
    ):
        found = session.exec(select(cls.id).where(cls.run_id == run.id)).all()
        ids[entity] = {str(i) for i in found}
    statement = select(AuditEvent).where(col(AuditEvent.entity).in_(list(ids)))
    if audit_seq is not None:
        statement = statement.where(AuditEvent.seq <= audit_seq)
    events = session.exec(statement.order_by(col(AuditEvent.seq))).all()
    return tuple(
        c.AuditRow(
            e.seq,
            _at(e.at),
            e.actor,
            e.action,
            e.entity,
            e.entity_id,
            e.field,
            _short(e.old_value),
            _short(e.new_value),
            e.reason,
            describe(e.seq, e.action, e.field, e.old_value, e.new_value, e.reason),
        )
        for e in events
        if e.entity_id in ids[e.entity]
    )
