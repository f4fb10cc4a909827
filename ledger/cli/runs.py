"""`fluxledger run ...`: plan a run from a master-record template, then start it, import its
skid log, enter QC results and deviations, finish it and send it to review."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.cli.describe import SITE_NOTE
from ledger.cli.session import (
    ACTIVITY_TIME,
    DB_OPTION,
    PASSWORD_STDIN,
    READ_USER_OPTION,
    USER_OPTION,
    read,
)
from ledger.cli.session import write as write_as

app = typer.Typer(
    help="Runs: plan from a master-record template, start, import the skid log, QC, "
    "deviations, finish, submit for review.",
    no_args_is_help=True,
)
RUN = typer.Argument(..., help="The run's number (see `fluxledger run list`).")


@app.command("templates")
@guarded
def list_templates(as_json: bool = JSON_OPTION) -> None:
    """List the master-record templates shipped with fluxledger and the inputs each asks for
    (an input without a default must be given to `run plan`)."""
    from ledger.cli.output import Q, Report, Table
    from ledger.runs.template import catalogue

    report = Report("run templates")
    table = Table("Templates", [("id", "ID"), ("version", "version"), ("product", "product"),
                                ("title", "title"), ("sha256", "SHA-256"), ("file", "file"),
                                ("inputs", "inputs")],
                  json_only=frozenset({"sha256", "file", "inputs"}))  # fmt: skip
    report.tables.append(table)
    for t in catalogue():
        inputs, rows = [], []
        for i in t.inputs:
            number = i.default is None or i.kind == "number"
            default = i.default if number else Q(i.default, i.kind)  # type: ignore[arg-type]
            inputs.append({"name": i.name, "kind": i.kind, "unit": i.unit,
                           "required": i.required, "default": default,
                           "title": i.title})  # fmt: skip
            rows.append([i.name, i.kind, i.unit or "—", "required" if i.required else default,
                         i.title])  # fmt: skip
        table.rows.append([t.id, t.version, t.product, t.title, t.sha256, t.file, inputs])
        if not as_json:  # JSON holds them in each template's row
            columns = [("name", "input"), ("kind", "kind"), ("unit", "unit"),
                       ("default", "default"), ("title", "what")]  # fmt: skip
            report.tables.append(Table(f"Inputs of {t.id}", columns, rows))
    report.print(as_json)


@app.command("plan")
@guarded
def plan(
    template: str = typer.Argument(
        ..., help="A template ID (its version in force is used) or a submitted .toml file."
    ),
    template_version: str | None = typer.Option(
        None,
        "--template-version",
        help="The template version meant; refused unless it is the one in force at the "
        "plan time (see fluxledger template history ID).",
    ),
    module: str = typer.Option(..., "--module", help="Serial of the module to run on."),
    product: str = typer.Option(..., "--product", help="Product of the run."),
    lot: str = typer.Option(..., "--lot", help="Batch or lot of the run."),
    inputs: list[str] = typer.Option(
        [], "--input", help="A plan input as NAME=QUANTITY, e.g. initial_volume='1.2 L'."
    ),
    scouting: Path | None = typer.Option(
        None,
        "--scouting",
        help="CSV of flux against concentration from a scouting run ('concentration [g/L]', "
        "'flux [LMH]'): adds the gel-model diafiltration optimum.",
    ),
    override_reason: str | None = typer.Option(
        None, "--override-reason", help="Plan on a module that is NOT FIT, and why (recorded)."
    ),
    product_override_reason: str | None = typer.Option(
        None,
        "--product-override-reason",
        help="Plan with a template written for another product than --product, and why "
        "(recorded in the plan and the audit trail).",
    ),
    activity_time: str | None = ACTIVITY_TIME,
    skid: str | None = typer.Option(
        None,
        "--skid",
        help="The registered skid the run is made on (its approved mapping "
        "then reads the log; see fluxledger skid).",
    ),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Compute every planned parameter of a template for a module, and record the run."""
    from ledger.entries.runs import run_plan
    from ledger.runs.service import plan_run

    e = run_plan(locals())
    run = write_as(
        db,
        user,
        password_stdin,
        lambda s, a: plan_run(
            s, a, e.template, e.module, e.product, e.lot, e.inputs, scouting=e.scouting,
            override_reason=e.override_reason, product_override_reason=e.product_override_reason,
            planned_at=e.planned_at, skid=e.skid, template_version=e.template_version,
        ),
    )  # fmt: skip
    if not as_json:
        typer.echo(f"planned run {run.id}: {run.template_id} v{run.template_version} on {module}")
        if e.product_override_reason:
            typer.echo(f"template of another product used for {run.product}: "
                       f"{e.product_override_reason}")  # fmt: skip
    _show(db, run.id, as_json)  # type: ignore[arg-type]


def _q(v: Any) -> Any:
    """A report value for printing: an Amount as the CLI's quantity, anything else as is."""
    from ledger.cli.output import Q
    from ledger.runs.report import Amount

    return Q(v.si, v.kind, v.unit) if isinstance(v, Amount) else v


def _report(session: Any, run_id: int) -> Any:
    from ledger.cli.output import Report, Table
    from ledger.runs.report import run_report

    r = run_report(session, run_id)
    h = r.head
    report = Report("run show")
    head = report.section(f"Run {h.run}")
    head.add("run", h.run)
    head.add("status", h.status)
    head.add("product", h.product)
    head.add("lot", h.lot)
    head.add("module", h.module)
    head.add("template", h.template)
    head.add("template_sha256", h.template_sha256, "template SHA-256")
    head.add("planned_by", h.planned_by, "planned by")
    head.add("planned_at", h.planned_at, "planned at")
    head.add("started_at", h.started_at, "started")
    head.add("finished_at", h.finished_at, "finished")
    if h.override_reason:
        head.add("override_reason", h.override_reason, "planned despite NOT FIT")
    inputs = Table("Inputs", [("name", "input"), ("text", "as given")])
    for name, text in r.inputs:
        inputs.rows.append([name, text])
    report.tables.append(inputs)
    values = Table("Plan", [("name", "parameter"), ("title", "what"), ("phase", "phase"),
                            ("planned", "planned"), ("rule", "acceptance"),
                            ("note", "note")])  # fmt: skip
    for v in r.plan:
        values.rows.append([v.name, v.title, v.phase, _q(v.planned), v.rule, v.note])
    report.tables.append(values)
    if r.plan_checks:
        pc = Table("Plan checks", [("name", "check"), ("verdict", "verdict"), ("text", "rule")])
        for c in r.plan_checks:
            pc.rows.append([c.name, c.verdict, c.text])
        report.tables.append(pc)
    if r.advice is not None:
        a = r.advice
        adv = report.section("Diafiltration optimum (gel model)")
        adv.add("gel_concentration", _q(a.gel_concentration), "Cg")
        adv.add("k", _q(a.k), "mass-transfer coefficient k")
        adv.add("optimum_concentration", _q(a.optimum_concentration), "optimum Cg/e")
        adv.add("planned_concentration", _q(a.planned_concentration), "planned")
        adv.add("planned_time", _q(a.planned_time), "DF time as planned")
        adv.add("optimum_time", _q(a.optimum_time), "DF time at the optimum")
        adv.add("time_saved", _q(a.time_saved), "time saved at the optimum")
        adv.add("buffer_difference", _q(a.buffer_difference),
                "buffer as planned minus at the optimum")  # fmt: skip
    steps = Table("Steps", [("operation", "operation"), ("phase", "phase"),
                            ("signatures", "signatures"), ("text", "instruction")])  # fmt: skip
    for s in r.steps:
        steps.rows.append([s["operation"], s["phase"], s["signatures"], s["text"]])
    report.tables.append(steps)
    if r.checks is not None:
        _checks_into(report, r.checks)
    report.notes.extend(r.notes)
    report.notes.append(SITE_NOTE)
    return report


def _checks_into(report: Any, part: Any) -> None:
    """The skid log, checks, excursions and deviations (ledger.runs.report.ChecksPart)."""
    from ledger.cli.output import Table

    log = part.log
    if log is not None:
        files = log.files
        several = len(files) > 1
        sec = report.section("Skid log")
        if several:
            sec.add("files", " + ".join(f["file_name"] for f in files), "files, joined in order")
        sec.add("file", log.file_name, "first file" if several else None)
        sec.add("sha256", log.sha256, "SHA-256 of the first" if several else "SHA-256")
        sec.add("rows", log.rows)
        sec.add("imported_by", log.imported_by, "imported by")
        if several:
            columns = [("position", "no."), ("file", "file"), ("size_bytes", "bytes"),
                       ("sha256", "SHA-256")]  # fmt: skip
            ft = Table("Skid log files", columns)
            for f in files:
                ft.rows.append([f["position"], f["file_name"], f["size_bytes"], f["sha256"]])
            report.tables.append(ft)
    checks = Table("Acceptance checks", [("name", "check"), ("phase", "phase"),
                                         ("planned", "planned"), ("actual", "actual"),
                                         ("rule", "rule"), ("verdict", "verdict"),
                                         ("note", "note")])  # fmt: skip
    for c in part.checks:
        checks.rows.append([c.name, c.phase or "run", c.planned, c.actual, c.rule, c.verdict,
                            c.note])  # fmt: skip
    report.tables.append(checks)
    if part.excursions:
        exc = Table("Excursions", [("name", "limit"), ("phase", "phase"), ("side", "side"),
                                   ("start", "start"), ("duration_s", "duration (s)"),
                                   ("samples", "samples")])  # fmt: skip
        for e in part.excursions:
            exc.rows.append([e.name, e.phase, e.side, e.start, e.duration_s, e.samples])
        report.tables.append(exc)
    if part.deviations:
        dt = Table("Deviations", [("number", "no."), ("check", "check"),
                                  ("description", "description"), ("by", "recorded by"),
                                  ("closed", "closed"), ("closure", "closure")])  # fmt: skip
        for d in part.deviations:
            dt.rows.append([d.number, d.check or "—", d.description, d.by, d.closed,
                            d.closure or "open"])  # fmt: skip
        report.tables.append(dt)


def _show(db: str | None, run_id: int, as_json: bool) -> None:
    read(db, lambda s: _report(s, run_id)).print(as_json)


@app.command("show")
@guarded
def show(run: int = RUN, db: str | None = DB_OPTION, as_json: bool = JSON_OPTION) -> None:
    """Show a run: its plan, steps, acceptance checks, excursions and deviations."""
    _show(db, run, as_json)


@app.command("checks")
@guarded
def checks(run: int = RUN, db: str | None = DB_OPTION, as_json: bool = JSON_OPTION) -> None:
    """The run's acceptance checks only: PASS, FAIL or MISSING, each with its rule."""
    from ledger.cli.output import Report
    from ledger.runs.report import run_checks

    def build(session: Any) -> Any:
        report = Report("run checks")
        _checks_into(report, run_checks(session, run))
        report.notes.append(SITE_NOTE)
        return report

    read(db, build).print(as_json)


@app.command("list")
@guarded
def list_runs(db: str | None = DB_OPTION, as_json: bool = JSON_OPTION) -> None:
    """List the runs, newest first."""
    from ledger.cli.output import Report, Table
    from ledger.runs.queries import runs_newest_first

    def build(session: Any) -> Any:
        report = Report("run list")
        table = Table("Runs", [("run", "run"), ("status", "status"), ("product", "product"),
                               ("lot", "lot"), ("module", "module"), ("template", "template"),
                               ("planned_at", "planned")])  # fmt: skip
        for r, serial in runs_newest_first(session):
            table.rows.append([r.id, r.status, r.product, r.lot, serial,
                               f"{r.template_id} v{r.template_version}", r.created_at])  # fmt: skip
        report.tables.append(table)
        return report

    read(db, build).print(as_json)


@app.command("start")
@guarded
def start(
    run: int = RUN,
    activity_time: str | None = ACTIVITY_TIME,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Start the run: the module goes in use (its pre-use tests must be recent and passed)."""
    from ledger.entries.runs import activity
    from ledger.runs.service import start_run

    number, at = activity(locals())
    r = write_as(db, user, password_stdin, lambda s, a: start_run(s, a, number, activity_at=at))
    finish_line(
        "run start", f"run {r.id} started; module in use", as_json, run=r.id, status=r.status
    )


@app.command("import")
@guarded
def import_log(
    run: int = RUN,
    file: list[Path] = typer.Argument(
        ...,
        help="The skid's data log (kept unchanged); a long run's log split over several "
        "files is given as all of them, in time order, and joined.",
    ),
    mapping: Path | None = typer.Option(
        None,
        "--mapping",
        help="TOML mapping of the file's columns; for a run on a registered skid, leave it out "
        "to use the skid's approved mapping.",
    ),
    phase: list[str] = typer.Option(
        [], "--phase", help="A phase by time when the log has no phase column: NAME=START/END."
    ),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Attach the skid log (one file, or several files of one run in time order) to the run
    and compute its actuals and excursions. The same files again change nothing."""
    from ledger.entries.runs import run_import
    from ledger.runs.service import import_log as do_import
    from ledger.runs.service import log_files

    e = run_import(locals())
    record, new = write_as(
        db,
        user,
        password_stdin,
        lambda s, a: do_import(
            s, a, e.run, [Path(f) for f in e.files], Path(e.mapping) if e.mapping else None,
            e.phases,
        ),
    )  # fmt: skip
    files = log_files(record)
    names = " + ".join(f["file_name"] for f in files)
    sums = ", ".join(f["sha256"][:12] for f in files)
    if new:
        line = f"run {run}: imported {names} ({record.rows} rows, sha256 {sums})"
    else:
        line = (f"run {run}: {names} {'was' if len(files) == 1 else 'were'} already imported "
                f"(sha256 {sums}); nothing written")  # fmt: skip
    warnings = list((record.actuals or {}).get("warnings") or [])
    if warnings and not as_json:
        line += "".join(f"\nwarning: {w}" for w in warnings)
    finish_line("run import", line, as_json, run=run, written=new, file_name=record.file_name,
                rows=record.rows, sha256=record.sha256, warnings=warnings,
                files=[{k: f[k] for k in ("file_name", "sha256", "size_bytes")}
                       for f in files])  # fmt: skip


@app.command("qc")
@guarded
def qc(
    run: int = RUN,
    results: list[str] = typer.Option(
        ..., "--result", help="A QC result as NAME=VALUE, e.g. particle_size='82 nm'."
    ),
    correction_reason: str | None = typer.Option(
        None, "--correction-reason", help="Replace an earlier result, and why."
    ),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Enter QC results against the template's specifications."""
    from ledger.entries.runs import qc_results
    from ledger.runs.service import enter_qc

    given = qc_results(locals())
    rows = write_as(
        db,
        user,
        password_stdin,
        lambda s, a: enter_qc(s, a, run, given, correction_reason=correction_reason),
    )
    finish_line("run qc", f"run {run}: recorded {len(rows)} QC result(s)", as_json, run=run,
                records=rows)  # fmt: skip


CLASS_OPTION = typer.Option(
    None, "--class", help="minor, major or critical (or the site's own words)."
)


@app.command("deviation")
@guarded
def deviation(
    run: int = RUN,
    description: str = typer.Option(..., "--description", help="What departed, and why."),
    check: str | None = typer.Option(None, "--check", help="The check it explains."),
    impact: str | None = typer.Option(None, "--impact", help="Assessed impact on the product."),
    classification: str | None = CLASS_OPTION,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Record a deviation against the run (its class and impact may also come at closure)."""
    from ledger.runs.service import add_deviation

    d = write_as(
        db,
        user,
        password_stdin,
        lambda s, a: add_deviation(
            s, a, run, description, check=check, impact=impact, classification=classification
        ),
    )
    finish_line("run deviation", f"run {run}: deviation {d.number} recorded", as_json, run=run,
                records=[d])  # fmt: skip


@app.command("close-deviation")
@guarded
def close_deviation(
    run: int = RUN,
    number: int = typer.Argument(..., help="The deviation's number within the run."),
    closure: str = typer.Option(..., "--closure", help="Conclusion and actions."),
    impact: str | None = typer.Option(None, "--impact", help="Assessed impact on the product."),
    classification: str | None = CLASS_OPTION,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Close a deviation (QA only): it needs a class and an impact assessment."""
    from ledger.runs.service import close_deviation as close

    d = write_as(
        db, user, password_stdin,
        lambda s, a: close(s, a, run, number, closure, impact=impact,
                           classification=classification),
    )  # fmt: skip
    line = f"run {run}: deviation {number} ({d.classification}) closed by {d.closed_by}"
    finish_line("run close-deviation", line, as_json, run=run, records=[d])


@app.command("deviation-classes")
@guarded
def deviation_classes(
    set_to: str | None = typer.Option(
        None, "--set", help="New words, comma-separated (QA; needs --reason and --user)."
    ),
    reason: str | None = typer.Option(None, "--reason", help="Why they change (recorded)."),
    user: str | None = typer.Option(None, "--user", help="Your user ID (QA) to change them."),
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Show the site's deviation classes, or (QA) rename them."""
    from ledger.cli.output import Report
    from ledger.runs.service import deviation_classes as current
    from ledger.runs.service import set_deviation_classes

    if set_to is None:
        words = read(db, current, user, password_stdin)
    else:
        if user is None:
            from ledger.errors import InputError

            raise InputError("--set needs --user: a QA user changes the classes", field="user",
                             expected="--user ID of a QA user")  # fmt: skip
        text, why = set_to, reason or ""
        words = write_as(db, user, password_stdin,
                         lambda s, a: set_deviation_classes(s, a, text, why))  # fmt: skip
    report = Report("run deviation-classes")
    report.section("Deviation classes").add("classes", ", ".join(words))
    report.print(as_json)


@app.command("finish")
@guarded
def finish(
    run: int = RUN,
    activity_time: str | None = ACTIVITY_TIME,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Finish the run: the module awaits cleaning and its cycle count grows."""
    from ledger.entries.runs import activity
    from ledger.runs.service import finish_run

    number, at = activity(locals())
    r = write_as(db, user, password_stdin, lambda s, a: finish_run(s, a, number, activity_at=at))
    finish_line("run finish", f"run {run} finished; module awaits cleaning", as_json, run=r.id,
                status=r.status)  # fmt: skip


@app.command("approve-plan")
@guarded
def approve_plan(
    run: int = RUN,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Approve a run's plan (an engineer or QA who did not plan it): the run may then start."""
    from ledger.runs.service import approve_plan as approve

    r = write_as(db, user, password_stdin, lambda s, a: approve(s, a, run))
    finish_line("run approve-plan", f"plan of run {run} approved by {r.plan_approved_by}",
                as_json, run=r.id, status=r.status)  # fmt: skip


@app.command("log-tolerance")
@guarded
def log_tolerance(
    tolerance: str = quantity_option(
        ..., "--tolerance", help="How far a skid log may reach outside its run, e.g. '10 min'."
    ),
    reason: str = typer.Option(..., "--reason", help="Why the tolerance changes."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Set how far (at most 24 h) a skid log's times may fall outside its run's start and
    finish before `run import` refuses it (engineer or QA; audited; default 10 min)."""
    from ledger.entries.runs import log_tolerance as entry
    from ledger.runs.service import set_log_tolerance

    seconds, why = entry(locals())
    write_as(db, user, password_stdin, lambda s, a: set_log_tolerance(s, a, seconds, why))
    finish_line("run log-tolerance", f"skid logs may now fall {seconds / 60:g} min outside their "
                "run", as_json, tolerance_s=seconds)  # fmt: skip


@app.command("abort")
@guarded
def abort(
    run: int = RUN,
    reason: str = typer.Option(..., "--reason", help="Why the run is aborted."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Abort a run before review (engineer or QA): a run in progress ends its module's use,
    which then awaits cleaning; the run is kept and its record prints as aborted."""
    from ledger.runs.service import abort_run

    r = write_as(db, user, password_stdin, lambda s, a: abort_run(s, a, run, reason))
    finish_line("run abort", f"run {run} aborted: {reason}", as_json, run=r.id,
                status=r.status)  # fmt: skip


@app.command("submit")
@guarded
def submit(
    run: int = RUN,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Send the run to review: refused while a FAIL check has no recorded deviation."""
    from ledger.runs.service import submit_run

    r = write_as(db, user, password_stdin, lambda s, a: submit_run(s, a, run))
    finish_line("run submit", f"run {run} submitted for review", as_json, run=r.id,
                status=r.status)  # fmt: skip


@app.command("step")
@guarded
def step(
    run: int = RUN,
    number: str = typer.Argument(..., help="The step's number in the record, from 1."),
    meaning: str = typer.Option(..., "--meaning", help="performed or verified."),
    values: list[str] = typer.Option(
        [], "--value", help="A value entered at the step as NAME=TEXT, e.g. buffer_used='1.9 L'."
    ),
    deviation: str | None = typer.Option(
        None, "--deviation", help="The deviation (its number) that explains a value out of range."
    ),
    activity_time: str | None = ACTIVITY_TIME,
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Sign one step of the run as performed (with its values) or verified (another person)."""
    from ledger.entries.runs import run_step
    from ledger.runs.steps import record_step

    e = run_step({**locals(), "step": number})
    done = write_as(
        db,
        user,
        password_stdin,
        lambda s, a: record_step(s, a, e.run, e.step, e.meaning, e.values, e.done_at,
                                 deviation=e.deviation),
    )  # fmt: skip
    r = done.entry
    line = f"run {e.run} step {e.step} {e.meaning} by {r.login}"
    if r.deviation_number is not None:
        line += f" (deviation {r.deviation_number})"
    late = _late(r).strip() or None
    if not as_json:
        for out in done.out_of_range:
            typer.echo(out)
        if late:
            typer.echo(late)
    finish_line("run step", line, as_json, run=e.run, step=e.step, meaning=e.meaning,
                out_of_range=list(done.out_of_range), late=late, records=[r])  # fmt: skip


def _late(r: Any) -> str:
    """The note of a late step entry (" late: done at X, entered at Y"), else ""."""
    if not r.late:
        return ""
    done = r.done_at.isoformat(timespec="seconds")
    entered = r.created_at.isoformat(timespec="seconds")
    return f" late: done at {done}, entered at {entered}"


@app.command("steps")
@guarded
def steps(
    run: int = RUN,
    user: str | None = READ_USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """List the run's steps: the values entered at each, who performed and verified it, when."""
    from ledger.cli.output import Q, Report, Table
    from ledger.runs.steps import steps_of

    def build(session: Any) -> Any:
        report = Report("run steps")
        table = Table("Steps", [("step", "step"), ("title", "step title"), ("phase", "phase"),
                                ("values", "values"), ("signed", "signed"),
                                ("entries", "entries"), ("signatures", "signatures"),
                                ("complete", "complete")],
                      json_only=frozenset({"entries", "signatures"}))  # fmt: skip
        for v in steps_of(session, run):
            entries, shown = [], []
            for x in v.values:
                value: Any = x.si
                if x.si is not None and x.kind not in ("number", "text"):
                    value = Q(x.si, x.kind, x.unit)
                verdict = {True: "in range", False: "OUT OF RANGE", None: ""}[x.in_range]
                entries.append({"name": x.name, "title": x.title, "kind": x.kind,
                                "phase": x.phase, "typed": x.text, "value": value,
                                "range": x.range, "in_range": x.in_range})  # fmt: skip
                typed = x.text if x.text is not None else "—"
                shown.append(f"{x.name} {typed}" + (f" ({x.range}) {verdict}" if x.range else ""))
            signatures, signed = [], []
            for r in v.signed:
                late = _late(r)
                signatures.append({"meaning": r.meaning, "login": r.login,
                                   "full_name": r.full_name, "done_at": r.done_at,
                                   "entered_at": r.created_at, "late": r.late,
                                   "deviation": r.deviation_number})  # fmt: skip
                signed.append(f"{r.meaning} by {r.login} at "
                              f"{r.done_at.isoformat(timespec='minutes')}{late}")  # fmt: skip
            table.rows.append([v.number, v.title, v.phase, "; ".join(shown) or "—",
                               "; ".join(signed) or f"needs {', '.join(v.signatures)}",
                               entries, signatures, v.complete])  # fmt: skip
        report.tables.append(table)
        return report

    read(db, build, user, password_stdin).print(as_json)


def finish_line(command: str, line: str, as_json: bool, **body: Any) -> None:
    """One line of what was written, or one JSON object (records with every column)."""
    if not as_json:
        typer.echo(line)
        return
    import json

    from ledger.cli.describe import record_json
    from ledger.cli.output import plain

    if "records" in body:
        body["records"] = [plain(record_json(r)) for r in body["records"]]
    out = {"command": command, "message": line, **body}
    typer.echo(json.dumps(out, indent=2, ensure_ascii=False))
