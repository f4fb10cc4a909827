"""Run services, one transaction each: plan, start, import the skid log, QC, deviations,
finish and submit for review. Every write goes through the audit journal."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import datetime
from pathlib import Path
from typing import Any

from sqlmodel import Session, select

from ledger.errors import InputError, RefusedError
from ledger.logbook import latest, typelimits
from ledger.logbook.auth import DECIDERS, RECORDERS, require_role
from ledger.logbook.fitness import facts
from ledger.logbook.modules import get_module
from ledger.logbook.required import optional, required
from ledger.logbook.times import activity_time
from ledger.logbook.uses import end_use, start_use
from ledger.rules import runs as sequence
from ledger.rules.acceptance import Check, unexplained_failures
from ledger.rules.fitness import verdict
from ledger.rules.water_test import preuse_in_band
from ledger.runs import template as templates
from ledger.runs.checklist import run_checks
from ledger.runs.plan import ModuleFacts, Plan, make_plan
from ledger.store.audit import Journal
from ledger.store.tables import (
    Deviation,
    Module,
    ModuleType,
    QcResult,
    Run,
    Setting,
    SkidLogFile,
    SkidLogPart,
    UserAccount,
    WaterFluxTest,
)


def module_facts(module: Module, mtype: ModuleType) -> ModuleFacts:
    return ModuleFacts(
        serial=module.serial,
        type_code=mtype.code,
        area_m2=mtype.area_m2,
        fibers=mtype.fiber_count,
        lumen_diameter_m=mtype.lumen_diameter_m,
        fiber_length_m=mtype.effective_length_m,
        max_volume_loading_m=mtype.max_volume_loading_m,
        max_mass_loading_kg_m2=mtype.max_mass_loading_kg_m2,
    )


def label(run: Run) -> str:
    return f"run {run.id}"


def get_run(session: Session, run_id: int, *, lock: bool = False) -> Run:
    query = select(Run).where(Run.id == run_id)
    if lock:
        query = query.with_for_update()
    run = session.exec(query).first()
    if run is None or run.voided_at is not None:
        raise InputError(
            f"there is no run {run_id}",
            field="run",
            value=run_id,
            expected="the number of a planned run (see `fluxledger run list`)",
        )
    return run


def run_template(run: Run) -> templates.Template:
    """The exact template the run was planned from, as stored with it."""
    return templates.parse(
        run.template_text.encode("utf-8"), f"{run.template_id} v{run.template_version}"
    )


def run_plan(run: Run) -> Plan:
    return Plan.from_record(run.plan)


def _allow(run: Run, action: str) -> None:
    message = sequence.refusal(action, run.status, label(run))
    if message:
        raise RefusedError(message, field="run", value=run.id)


def plan_run(
    session: Session,
    actor: UserAccount,
    template_ref: str,
    serial: str,
    product: str,
    lot: str,
    inputs: Mapping[str, str],
    *,
    scouting: Sequence[tuple[float, float]] | None = None,
    override_reason: str | None = None,
    product_override_reason: str | None = None,
    planned_at: datetime | None = None,
    skid: str | None = None,
    template_version: str | None = None,
) -> Run:
    """Plan a run on a module. A module that is not fit needs an engineer's or QA's override
    with a reason; so does a template written for another product (the reason is kept in the
    plan record and the audit event); a failing plan check (module loading) refuses the plan.
    The template is the version in force at the plan time (``ledger.runs.versions``); a
    ``template_version`` or a file given must be that version."""
    from ledger.rules import planning
    from ledger.runs.versions import for_plan

    require_role(actor, DECIDERS, "plan runs")
    product = required("product", product, "the product of the run", kind="identifier")
    lot = required("lot", lot, "the batch or lot of the run", kind="identifier")
    override_reason = optional("override_reason", override_reason, "why the run is planned")
    product_override_reason = optional(
        "product_override_reason", product_override_reason,
        "why the template of another product is used",
    )  # fmt: skip
    journal = Journal(session, actor.login)
    planned_at, _ = activity_time(planned_at, journal.at)
    _, tmpl = for_plan(session, template_ref, template_version, planned_at)
    skid_id = None
    if skid is not None:
        from ledger.equipment.service import current_mapping, get_skid

        skid_id = get_skid(session, skid).id
        current_mapping(session, skid)  # a run is planned only on a skid with an approved mapping
    mismatch = planning.product_mismatch(tmpl.id, tmpl.product, product)
    if mismatch and not product_override_reason:
        raise RefusedError(
            f"{mismatch}; plan anyway only with --product-override-reason",
            field="product",
            value=product,
        )
    if product_override_reason and not mismatch:
        raise InputError(
            f"a product override reason was given but template {tmpl.id} is for {product}"
            if tmpl.product
            else f"a product override reason was given but template {tmpl.id} names no product",
            field="product_override_reason",
            value=product_override_reason,
            expected="no product override for a template of the run's product",
        )
    module = get_module(session, serial)
    registered = session.get(ModuleType, module.type_id)
    assert registered is not None
    mtype, _ = typelimits.in_force(session, registered, journal.at)
    judged = verdict(facts(session, module, product, now=journal.at))
    failing = [r for r in judged.reasons if r.outcome == "fail"]
    if failing and not (override_reason and override_reason.strip()):
        lines = "; ".join(f"{r.check}: {r.message}" for r in failing)
        raise RefusedError(
            f"module {serial} is NOT FIT: {lines}; plan anyway only with --override-reason",
            field="serial",
            value=serial,
        )
    if override_reason and not failing:
        raise InputError(
            "an override reason was given but the module is fit",
            field="override_reason",
            value=override_reason,
            expected="no override for a module that is fit",
        )
    plan = make_plan(
        tmpl, module_facts(module, mtype), inputs, product=product, lot=lot, scouting=scouting
    )
    plan.product_override_reason = product_override_reason
    bad = [c for c in plan.checks if c.verdict == "FAIL"]
    if bad:
        raise RefusedError(
            "the plan fails its own checks: " + "; ".join(c.text for c in bad),
            field="input",
            value=bad[0].name,
        )
    return journal.create(
        Run(
            module_id=module.id,  # type: ignore[arg-type]
            product=product,
            lot=lot,
            template_id=tmpl.id,
            template_version=tmpl.version,
            template_sha256=tmpl.sha256,
            template_text=tmpl.text,
            inputs=dict(inputs),
            plan=plan.to_record(),
            override_reason=override_reason,
            planned_at=planned_at,
            skid_id=skid_id,
        ),
        reason="run planned"
        + (f" despite NOT FIT: {override_reason}" if override_reason else "")
        + (
            f"; template of product {tmpl.product} used for {product}: {product_override_reason}"
            if product_override_reason
            else ""
        ),
    )


def start_run(
    session: Session, actor: UserAccount, run_id: int, *, activity_at: datetime | None = None
) -> Run:
    """Put the module in use for the run; its pre-use tests must be recent and passed."""
    run = get_run(session, run_id, lock=True)
    _allow(run, "start")
    if run.plan_approved_at is None:
        raise RefusedError(
            f"{label(run)} cannot start: its plan is not approved; a second engineer or QA "
            f"approves it first (fluxledger run approve-plan {run.id})",
            field="run",
            value=run_id,
        )
    module = session.get(Module, run.module_id)
    mtype = session.get(ModuleType, module.type_id) if module else None
    assert module is not None and mtype is not None
    at, _ = activity_time(activity_at, Journal(session, actor.login).at)
    planned = sequence.planned_time(run.planned_at, run.created_at)
    if at < planned:
        raise InputError(
            f"{label(run)} cannot start at {at.isoformat()}, before it was planned "
            f"({planned.isoformat()})",
            field="activity_time",
            value=at.isoformat(),
            expected=f"a time at or after {planned.isoformat()}",
        )
    cleaning = latest.cleaning(session, run.module_id)
    cleaned_at = cleaning.activity_at if cleaning else None
    pre = latest.water(session, run.module_id, "pre_use")
    it = latest.integrity(session, run.module_id, after=cleaned_at)
    # The pre-use NWP must sit in the type's band around the last post-clean NWP (the
    # baseline before the first cleaning).
    ref = latest.water(session, run.module_id, "post_clean") or latest.water(
        session, run.module_id, "baseline"
    )
    pre_ok = bool(
        pre is not None
        and ref is not None
        and pre.activity_at >= ref.activity_at
        and ref.nwp_m_s_pa > 0
        and preuse_in_band(pre.nwp_m_s_pa / ref.nwp_m_s_pa, mtype.preuse_band)
    )
    problems = sequence.start_problems(
        at,
        mtype.clean_hold_s or mtype.storage_limit_s,
        cleaned_at,
        pre.activity_at if isinstance(pre, WaterFluxTest) else None,
        pre_ok,
        it.activity_at if it else None,
        bool(it and it.passed),
    )
    if problems:
        raise RefusedError(
            f"{label(run)} cannot start on {module.serial}: " + "; ".join(problems),
            field="run",
            value=run_id,
        )
    override = run.override_reason if module.dedicated_product not in (None, run.product) else None
    use = start_use(
        session, actor, module.serial, run.product, run.lot,
        override_reason=override, activity_at=activity_at,
    )  # fmt: skip
    Journal(session, actor.login).change(
        run,
        {"status": "in_progress", "use_id": use.id, "started_at": use.activity_at},
        reason="run started",
        module_id=run.module_id,
    )
    return run


def import_log(
    session: Session,
    actor: UserAccount,
    run_id: int,
    paths: str | Path | Sequence[str | Path],
    mapping_path: str | Path | None,
    windows: Sequence[object] = (),
    *,
    shown: str | None = None,
) -> tuple[SkidLogFile, bool]:
    """Attach the skid log and compute its actuals. A log split over several files is given
    as their paths in time order: they are read and joined (an overlap or a gap between them
    is refused), the first is kept in the log's own row and each later one in a
    ``SkidLogPart``, byte for byte. The same files again (equal SHA-256s in the same order)
    change nothing (returns the log with False); different files need the log voided first.
    ``shown`` is how the record names the log's source instead of its path (an upload's own
    file name)."""
    import hashlib

    from ledger.runs.actuals import ChannelLimit, Geometry, PhaseWindow, summarize
    from ledger.runs.skidlog import MAX_BYTES, read_logs
    from ledger.userfiles import read_user_file

    require_role(actor, RECORDERS, "import skid logs")
    run = get_run(session, run_id, lock=True)
    _allow(run, "import")
    files = [Path(paths)] if isinstance(paths, (str, Path)) else [Path(p) for p in paths]
    if not files:
        raise InputError("no skid log file given", field="file", expected="one or more files")
    contents = [read_user_file(f, "file", MAX_BYTES) for f in files]
    digests = [hashlib.sha256(b).hexdigest() for b in contents]
    existing = skid_log(session, run_id)
    if existing is not None:
        if [f["sha256"] for f in log_files(existing)] == digests:
            return existing, False
        raise RefusedError(
            f"{label(run)} already has skid log {' + '.join(log_names(existing))} (sha256 "
            f"{existing.sha256[:12]}); void it first (fluxledger void skid-log "
            f"{existing.id} --reason ...)",
            field="run",
            value=run_id,
        )
    mapping, skid_code, version = _mapping_of(session, run, mapping_path)
    log = read_logs(files, mapping, digest=False)  # hashed above, from the bytes kept
    log.stamp(digests)
    if shown is not None:
        log.source = shown
    from datetime import timedelta

    journal = Journal(session, actor.login)
    log_end = log.start + timedelta(seconds=float(log.time_s[-1]) if log.rows else 0.0)
    outside = sequence.log_outside_run(
        log.start, log_end, run.started_at, run.finished_at, journal.at, log_tolerance(session)
    )
    if outside:
        raise InputError(
            f"the skid log does not belong to {label(run)}: {outside}",
            field="file",
            value=" + ".join(f.name for f in files),
            expected="a log recorded between the run's start and finish",
            source=str(files[0]) if len(files) == 1 else None,
        )
    module = session.get(Module, run.module_id)
    mtype = session.get(ModuleType, module.type_id) if module else None
    assert mtype is not None
    plan = run_plan(run)
    ranges = [
        ChannelLimit(v.name, v.actual, v.low, v.high, v.phase)
        for v in plan.values
        if v.actual and "." not in v.actual and v.actual in templates.CHANNELS
    ]
    typed = [w for w in windows if isinstance(w, PhaseWindow)]
    summary = summarize(
        log,
        Geometry(mtype.area_m2, mtype.fiber_count, mtype.lumen_diameter_m),
        ranges,
        typed or None,
    )
    if not typed:  # the template's phases against the log's step labels, said at import
        from ledger.runs.skidlog import phase_warnings

        phases = list(dict.fromkeys(step.phase for step in run_template(run).steps))
        summary.warnings = phase_warnings(log, phases)
    if run.skid_id is not None:  # an instrument past its calibration date is a warning
        from ledger.equipment.service import calibration_warnings

        summary.warnings += calibration_warnings(session, run.skid_id, log.start, mapping.channels)
    summary.assumptions.append(_phase_source(typed, mapping, skid_code, version))
    # The later files are listed in the log's own row before it is hashed, so that its record
    # hash covers each by its SHA-256 (audit verify checks the part rows against this list).
    listed = [
        {"position": i, "file_name": f.name, "sha256": d, "size_bytes": len(b)}
        for i, (f, d, b) in enumerate(zip(files, digests, contents, strict=True), start=1)
    ]
    record = journal.create(
        SkidLogFile(
            run_id=run_id,
            file_name=files[0].name,
            sha256=digests[0],
            size_bytes=len(contents[0]),
            content=contents[0],
            parts=listed[1:] or None,
            mapping_text=mapping.text,
            mapping_sha256=mapping.sha256,
            windows=[
                {"name": w.name, "start": w.start.isoformat(), "end": w.end.isoformat()}
                for w in windows
                if isinstance(w, PhaseWindow)
            ]
            or None,
            rows=log.rows,
            actuals=summary.to_record(),
        ),
        module_id=run.module_id,
        reason=f"skid log of {label(run)}",
    )
    for entry, data in zip(listed[1:], contents[1:], strict=True):
        session.add(SkidLogPart(log_id=record.id, content=data, **entry))  # type: ignore[arg-type]
    session.flush()
    return record, True


def log_files(log: SkidLogFile) -> list[dict[str, Any]]:
    """The files of a skid log in the order they were joined: position (from 1), file_name,
    sha256 and size_bytes of each; one entry for a log in one file."""
    first = {"position": 1, "file_name": log.file_name, "sha256": log.sha256,
             "size_bytes": log.size_bytes}  # fmt: skip
    return [first, *(dict(p) for p in log.parts or [])]


def log_names(log: SkidLogFile) -> list[str]:
    """The file names of a skid log, in the order they were joined."""
    return [str(f["file_name"]) for f in log_files(log)]


def log_contents(session: Session, log: SkidLogFile) -> list[tuple[str, bytes]]:
    """(file name, bytes) of each file of a skid log, in the order they were joined."""
    out = [(log.file_name, bytes(log.content))]
    if log.parts:
        rows = session.exec(
            select(SkidLogPart).where(SkidLogPart.log_id == log.id).order_by(SkidLogPart.position)  # type: ignore[arg-type]
        ).all()
        out += [(r.file_name, bytes(r.content)) for r in rows]
    return out


def _mapping_of(
    session: Session, run: Run, path: str | Path | None
) -> tuple[Any, str | None, int | None]:
    """The mapping to read the run's log with: on a registered skid, its current approved
    mapping (a file given must be that mapping); otherwise the file given."""
    from ledger.runs.mapping import load_mapping, parse_mapping

    if run.skid_id is None:
        if path is None:
            raise InputError(
                f"{label(run)} names no skid, so its mapping must be given",
                field="mapping", expected="--mapping FILE (or plan the run with --skid)",
            )  # fmt: skip
        return load_mapping(path), None, None
    from ledger.equipment.service import current_mapping
    from ledger.store.equipment import Skid

    skid = session.get(Skid, run.skid_id)
    assert skid is not None
    text, version, sha256 = current_mapping(session, skid.code)
    approved = parse_mapping(text, f"skid {skid.code} mapping v{version}")
    if path is not None:
        given = load_mapping(path)
        if given.sha256 != sha256:
            raise RefusedError(
                f"{Path(path).name} is not skid {skid.code}'s approved mapping (v{version}, "
                f"sha256 {sha256[:12]}); leave --mapping out to use it, or have an engineer or "
                "QA approve this one (fluxledger skid mapping)",
                field="mapping", value=str(path),
            )  # fmt: skip
    return approved, skid.code, version


def _phase_source(
    typed: Sequence[object], mapping: Any, skid: str | None, version: int | None
) -> str:
    """Where the phases came from, for the record."""
    if typed:
        how = "phase windows typed with --phase"
    elif mapping.phase_labels or mapping.ignored_labels:
        how = "the log's step column through the mapping's [phases]"
    elif "phase" in mapping.channels:
        how = "the log's step column, labels as the template's phases"
    else:
        how = "no phase column or windows: whole run only"
    where = f"skid {skid} mapping v{version}" if skid else "a mapping file"
    return f"phases from {how}; read with {where} (sha256 {mapping.sha256[:12]})"


def enter_qc(
    session: Session,
    actor: UserAccount,
    run_id: int,
    results: Mapping[str, str],
    *,
    correction_reason: str | None = None,
) -> list[QcResult]:
    """Record QC results (``attribute -> "82 nm"``); a second result for an attribute needs a
    correction reason and voids the first."""
    from ledger import units

    require_role(actor, RECORDERS, "enter QC results")
    run = get_run(session, run_id, lock=True)
    _allow(run, "qc")
    correction_reason = optional("correction_reason", correction_reason, "why it is replaced")
    spec = {a.name: a for a in run_template(run).qc}
    journal = Journal(session, actor.login)
    out = []
    for name, text in results.items():
        attr = spec.get(name)
        if attr is None:
            raise InputError(
                f"--result {name}: {run.template_id} has no QC attribute {name!r}",
                field="result",
                value=name,
                expected="one of " + ", ".join(spec),
            )
        where = f"--result {name}"
        text = required("result", text, "a QC result, e.g. 82 nm")
        if attr.kind is None and attr.unit.strip() != "percent":
            number, unit = units.split_number(text, field=where, expected="a plain number")
            if unit:
                raise InputError(
                    f"{where}: {text!r} should be a plain number",
                    field="result",
                    value=text,
                    expected="a plain number",
                )
            value = number
        else:
            value = units.parse(text, attr.kind or "fraction", field=where, bare_ratio=False)
        earlier = qc_results(session, run_id).get(name)
        if earlier is not None:
            if not correction_reason:
                raise RefusedError(
                    f"{label(run)} already has a {name} result ({earlier.text}); give "
                    "--correction-reason to replace it",
                    field="result",
                    value=name,
                )
            journal.void(earlier, f"corrected: {correction_reason}")
        out.append(
            journal.create(
                QcResult(run_id=run_id, attribute=name, value=value, text=text.strip(),
                         method=attr.method),
                module_id=run.module_id,
            )
        )  # fmt: skip
    return out


def qc_results(session: Session, run_id: int) -> dict[str, QcResult]:
    rows = session.exec(
        select(QcResult).where(
            QcResult.run_id == run_id,
            QcResult.voided_at.is_(None),  # type: ignore[union-attr]
        )
    ).all()
    return {r.attribute: r for r in rows}


def deviations(session: Session, run_id: int) -> list[Deviation]:
    return list(
        session.exec(select(Deviation).where(Deviation.run_id == run_id).order_by(Deviation.number))  # type: ignore[arg-type]
    )


def skid_log(session: Session, run_id: int) -> SkidLogFile | None:
    return session.exec(
        select(SkidLogFile).where(
            SkidLogFile.run_id == run_id,
            SkidLogFile.voided_at.is_(None),  # type: ignore[union-attr]
        )
    ).first()


def deviation_classes(session: Session) -> tuple[str, ...]:
    """The site's classification words for deviations (default minor, major, critical)."""
    from ledger.rules.deviations import CLASSES_SETTING, DEFAULT_CLASSES, parse_classes

    row = session.get(Setting, CLASSES_SETTING)
    if row is None:
        return DEFAULT_CLASSES
    parsed = parse_classes(row.value)
    return parsed if isinstance(parsed, tuple) else DEFAULT_CLASSES


def set_deviation_classes(
    session: Session, actor: UserAccount, text: str, reason: str
) -> tuple[str, ...]:
    """QA renames the classification words (audited); words in use on open deviations stay
    valid only if kept."""
    from ledger.rules.deviations import CLASSES_SETTING, parse_classes

    require_role(actor, frozenset({"qa"}), "set the deviation classes")
    reason = required("reason", reason, "why the classes change", kind="text")
    parsed = parse_classes(text)
    if isinstance(parsed, str):
        raise InputError(
            f"--set {text!r}: {parsed}", field="set", value=text,
            expected="classification words separated by commas, e.g. minor,major,critical",
        )  # fmt: skip
    journal = Journal(session, actor.login)
    row = session.get(Setting, CLASSES_SETTING)
    value = ",".join(parsed)
    if row is None:
        journal.create(Setting(key=CLASSES_SETTING, value=value), reason=reason)
    else:
        journal.change(row, {"value": value}, reason=reason)
    return parsed


def _classification(session: Session, given: str | None) -> str | None:
    if given is None:
        return None
    classes = deviation_classes(session)
    word = given.strip().lower()
    if word not in classes:
        raise InputError(
            f"--class {given!r} is not one of the site's deviation classes",
            field="class", value=given, expected="one of " + ", ".join(classes),
        )  # fmt: skip
    return word


def add_deviation(
    session: Session,
    actor: UserAccount,
    run_id: int,
    description: str,
    *,
    check: str | None = None,
    impact: str | None = None,
    classification: str | None = None,
) -> Deviation:
    """Record a deviation (operator, engineer or QA); its classification and impact
    assessment may come now or with its closure."""
    require_role(actor, RECORDERS, "record deviations")
    run = get_run(session, run_id, lock=True)
    _allow(run, "deviation")
    description = required(
        "description", description, "what departed from the plan, and why", kind="text"
    )
    impact = optional("impact", impact, "the deviation's impact on the product")
    word = _classification(session, classification)
    if check is not None:
        names = {c.name for c in checks_of(session, run)}
        if check not in names:
            raise InputError(
                f"--check {check}: {label(run)} has no check {check!r}",
                field="check",
                value=check,
                expected="one of " + ", ".join(sorted(names)),
            )
    number = len(deviations(session, run_id)) + 1
    return Journal(session, actor.login).create(
        Deviation(run_id=run_id, number=number, check_name=check, description=description,
                  impact=impact, classification=word),
        module_id=run.module_id,
    )  # fmt: skip


def close_deviation(
    session: Session,
    actor: UserAccount,
    run_id: int,
    number: int,
    closure: str,
    *,
    impact: str | None = None,
    classification: str | None = None,
) -> Deviation:
    """QA closes a deviation: it needs a classification and an impact assessment (given
    before or now) and the investigation's conclusion."""
    from ledger.rules.deviations import CLOSERS, closure_problems

    require_role(actor, CLOSERS, "close deviations")
    run = get_run(session, run_id, lock=True)
    _allow(run, "close_deviation")
    closure = required(
        "closure", closure, "the investigation's conclusion and actions", kind="text"
    )
    found = next((d for d in deviations(session, run_id) if d.number == number), None)
    if found is None:
        raise InputError(
            f"{label(run)} has no deviation {number}",
            field="number",
            value=number,
            expected="the number of a recorded deviation",
        )
    if found.closed_at is not None:
        raise RefusedError(f"deviation {number} of {label(run)} is already closed", field="number")
    word = _classification(session, classification) or found.classification
    impact = optional("impact", impact, "the deviation's impact on the product") or found.impact
    problems = closure_problems(word, impact, deviation_classes(session))
    if problems:
        raise RefusedError(
            f"deviation {number} of {label(run)} cannot be closed: " + "; ".join(problems),
            field="number", value=number,
        )  # fmt: skip
    journal = Journal(session, actor.login)
    journal.change(
        found,
        {"closed_at": journal.at, "closed_by": actor.login, "closure": closure,
         "impact": impact, "classification": word},
        reason="deviation closed by QA",
        module_id=run.module_id,
    )  # fmt: skip
    return found


def finish_run(
    session: Session, actor: UserAccount, run_id: int, *, activity_at: datetime | None = None
) -> Run:
    """End the module's use: it awaits cleaning and its cycle count grows by one."""
    run = get_run(session, run_id, lock=True)
    _allow(run, "finish")
    module = session.get(Module, run.module_id)
    assert module is not None
    log = skid_log(session, run_id)
    if log is not None:
        from datetime import timedelta

        at, _ = activity_time(activity_at, Journal(session, actor.login).at)
        log_end = datetime.fromisoformat(log.actuals["end"])
        if at < log_end - timedelta(seconds=log_tolerance(session)):
            raise InputError(
                f"{label(run)} cannot finish at {at.isoformat()}: its skid log runs to "
                f"{log_end.isoformat()}",
                field="activity_time",
                value=at.isoformat(),
                expected=f"a time at or after the end of the skid log ({log_end.isoformat()})",
            )
    use = end_use(session, actor, module.serial, activity_at=activity_at)
    Journal(session, actor.login).change(
        run,
        {"status": "finished", "finished_at": use.ended_at},
        reason="run finished",
        module_id=run.module_id,
    )
    return run


LOG_TOLERANCE_KEY = "run.log_tolerance_s"
MAX_LOG_TOLERANCE_S = 24 * 3600.0


def log_tolerance(session: Session) -> float:
    """How far (s) a skid log may reach outside its run: the site's setting, else the
    default of ledger.rules.runs."""
    row = session.get(Setting, LOG_TOLERANCE_KEY)
    return float(row.value) if row is not None else sequence.LOG_TOLERANCE_S


def set_log_tolerance(session: Session, actor: UserAccount, seconds: float, reason: str) -> Setting:
    """Set how far a skid log may reach outside its run's start and finish (an engineer or
    QA; audited). At most a day: beyond that a log could belong to another run."""
    require_role(actor, DECIDERS, "set the skid-log tolerance")
    if not 0 <= seconds <= MAX_LOG_TOLERANCE_S:
        raise InputError(
            f"a tolerance of {seconds:g} s is out of range",
            field="tolerance",
            value=seconds,
            expected="from 0 to 24 h",
        )
    reason = required("reason", reason, "why the tolerance changes", kind="text")
    journal = Journal(session, actor.login)
    row = session.get(Setting, LOG_TOLERANCE_KEY)
    if row is None:
        return journal.create(Setting(key=LOG_TOLERANCE_KEY, value=repr(seconds)), reason=reason)
    journal.change(row, {"value": repr(seconds)}, reason=reason)
    return row


def approve_plan(session: Session, actor: UserAccount, run_id: int) -> Run:
    """Approve a run's plan (an engineer or QA who did not plan it); audited. A run starts
    only on an approved plan."""
    require_role(actor, DECIDERS, "approve plans")
    run = get_run(session, run_id, lock=True)
    _allow(run, "approve_plan")
    problem = sequence.plan_approval_problem(run.created_by, actor.login, run.plan_approved_at)
    if problem:
        raise RefusedError(f"cannot approve the plan of {label(run)}: {problem}", field="run",
                           value=run_id)  # fmt: skip
    journal = Journal(session, actor.login)
    journal.change(run, {"plan_approved_at": journal.at, "plan_approved_by": actor.login},
                   reason="plan approved", module_id=run.module_id)  # fmt: skip
    return run


def abort_run(session: Session, actor: UserAccount, run_id: int, reason: str) -> Run:
    """Abort a run that went wrong before review (an engineer or QA, with a reason). A run in
    progress ends its module's use, so the module awaits cleaning; the run is kept and its
    record prints as aborted."""
    require_role(actor, DECIDERS, "abort runs")
    reason = required("reason", reason, "why the run is aborted", kind="text")
    run = get_run(session, run_id, lock=True)
    _allow(run, "abort")
    journal = Journal(session, actor.login)
    if run.status == "in_progress":
        module = session.get(Module, run.module_id)
        assert module is not None
        end_use(session, actor, module.serial)
    journal.change(
        run,
        {"status": "aborted", "aborted_at": journal.at, "aborted_by": actor.login,
         "abort_reason": reason},
        reason=f"run aborted: {reason}",
        module_id=run.module_id,
    )  # fmt: skip
    return run


def submit_run(session: Session, actor: UserAccount, run_id: int) -> Run:
    """Send the run to review; refused while a FAIL check has no recorded deviation."""
    require_role(actor, RECORDERS, "submit runs for review")
    run = get_run(session, run_id, lock=True)
    _allow(run, "submit")
    found = checks_of(session, run)
    blocking = unexplained_failures(found, [d.check_name for d in deviations(session, run_id)])
    if blocking:
        names = ", ".join(c.name for c in blocking)
        raise RefusedError(
            f"{label(run)} cannot go to review: FAIL without a recorded deviation: {names} "
            "(record one with `fluxledger run deviation RUN --check NAME`)",
            field="run",
            value=run_id,
        )
    journal = Journal(session, actor.login)
    journal.change(
        run,
        {"status": "in_review", "submitted_at": journal.at},
        reason="submitted for review",
        module_id=run.module_id,
    )
    return run


def checks_of(session: Session, run: Run) -> list[Check]:
    """Every acceptance check of the run, from its plan, skid log and QC results."""
    log = skid_log(session, run.id)  # type: ignore[arg-type]
    return run_checks(
        run_plan(run),
        run_template(run),
        log.actuals if log else None,
        {k: v.value for k, v in qc_results(session, run.id).items()},  # type: ignore[arg-type]
    )
