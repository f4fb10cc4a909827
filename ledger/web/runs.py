"""The run pages: the runs newest first, and one run's plan, steps, skid log, QC results,
deviations and acceptance checks, with a form for each thing the CLI's ``run`` commands
record (the same entries and services: ``ledger.entries.runs``, ``ledger.runs``)."""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Awaitable, Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from starlette.concurrency import run_in_threadpool
from starlette.datastructures import UploadFile
from starlette.responses import Response
from starlette.routing import Route

from ledger.errors import InputError, LedgerError, RefusedError
from ledger.web.show import plain
from ledger.web.visit import Visit, endpoint, field_errors

SNIFF_BYTES = 1 << 16  # the start of an upload that its type is told from
COPY_CHUNK = 1 << 20

# What a redirect after a write says on the run page (fixed words; nothing typed is echoed).
DONE = {
    "approved": "The plan is approved; the run may start.",
    "started": "The run is started; its module is in use.",
    "signed": "The step is signed.",
    "imported": "The skid log is imported; its checks are below.",
    "already": "That skid log was already imported; nothing was written.",
    "qc": "The QC results are recorded.",
    "deviation": "The deviation is recorded.",
    "closed": "The deviation is closed.",
    "finished": "The run is finished; its module awaits cleaning.",
    "submitted": "The run is sent to review.",
}


@dataclass(frozen=True)
class Failure:
    """A form that was refused: which one, the message beside each field, what was typed."""

    form: str
    errors: dict[str, str]
    typed: dict[str, str] = field(default_factory=dict)

    def at(self, form: str) -> dict[str, str]:
        return self.errors if self.form == form else {}

    def kept(self, form: str) -> dict[str, str]:
        return self.typed if self.form == form else {}


NO_FAILURE = Failure("", {})


@dataclass(frozen=True)
class RunPage:
    report: Any  # ledger.runs.report.RunReport
    steps: list[Any]  # ledger.runs.report.StepRow
    qc: list[Any]  # ledger.runs.report.QcField
    classes: tuple[str, ...]


def _run_id(v: Visit) -> int:
    return int(v.request.path_params["run"])


# -- reading ------------------------------------------------------------------------------------


@endpoint
async def run_list(v: Visit) -> Response:
    """GET /runs[?format=json]: every run, newest first (the service of ``run list``)."""
    from ledger.runs.report import run_lines

    v.require_user()
    rows = await v.read(run_lines)
    if v.wants_json():
        return v.json({"runs": plain(rows)})
    return v.page("run_list.html", rows=rows)


async def _load(v: Visit, run_id: int) -> RunPage:
    from ledger.runs.report import qc_fields, run_report, step_rows
    from ledger.runs.service import deviation_classes

    def work(session: Any) -> RunPage:
        return RunPage(
            run_report(session, run_id),
            step_rows(session, run_id),
            qc_fields(session, run_id),
            deviation_classes(session),
        )

    return await v.read(work)


async def _page(
    v: Visit, run_id: int, failure: Failure = NO_FAILURE, status: int = 200
) -> Response:
    page = await _load(v, run_id)
    word = v.request.query_params.get("done", "")
    done = DONE.get(word, "")
    # The notice stands where the redirect's anchor lands: the section that was written.
    where = {"imported": "log", "already": "log", "qc": "qc", "deviation": "deviations",
             "closed": "deviations", "signed": "steps"}.get(word, "top")  # fmt: skip
    return v.page("run.html", status, p=page, r=page.report, failure=failure, done=done,
                  done_at=where)  # fmt: skip


@endpoint
async def run_page(v: Visit) -> Response:
    """GET /runs/{run}[?format=json]: the run's plan, steps, skid log, QC results,
    deviations and checks (the JSON twin holds ``run show``'s content and the steps)."""
    v.require_user()
    run_id = _run_id(v)
    if v.wants_json():
        page = await _load(v, run_id)
        return v.json({"run": plain(page.report), "steps": plain(page.steps), "qc": plain(page.qc)})
    return await _page(v, run_id)


# -- writing ------------------------------------------------------------------------------------

Work = Callable[[dict[str, str]], Awaitable[tuple[str, dict[str, Any]]]]


Place = Callable[[LedgerError, Mapping[str, str]], dict[str, str]]


def placed(inputs: Mapping[str, str], other: str = "_") -> Place:
    """Errors keyed by the form's input they name (``inputs``: the service's field name ->
    the input's name); any other field's by ``other`` (``_``: the whole form)."""

    def place(err: LedgerError, form: Mapping[str, str]) -> dict[str, str]:
        message = field_errors(err)[err.field or "_"]
        return {inputs.get(err.field or "", other): message}

    return place


async def _post(v: Visit, form_id: str, place: Place, work: Work, *, anchor: str = "") -> Response:
    """Read the form (CSRF checked), run ``work`` (which writes through Visit.write and
    returns the word for the page and the JSON answer); a refused entry shows the page again
    with the message beside its field and the typed values kept, nothing written."""
    run_id = _run_id(v)
    form = await v.form()
    try:
        word, answer = await work(form)
    except LedgerError as err:
        if v.wants_json():
            raise
        status = 403 if isinstance(err, RefusedError) else 400
        typed = {k: value for k, value in form.items() if k != "password"}
        return await _page(v, run_id, Failure(form_id, place(err, form), typed), status)
    if v.wants_json():
        return v.json({"run": run_id, **answer})
    return v.redirect(f"/runs/{run_id}?done={word}" + (f"#{anchor}" if anchor else ""))


def _given(form: Mapping[str, str], name: str) -> str | None:
    text = form.get(name, "")
    return text if text.strip() else None


def _plain_action(action: str, word: str) -> Callable[[Any], Awaitable[Response]]:
    """POST /runs/{run}/approve-plan or /submit (``run approve-plan`` / ``run submit``, the
    latter refused while a FAIL check has no deviation): no fields but the CSRF token."""

    async def handler(v: Visit) -> Response:
        from ledger.runs import service

        run_id = _run_id(v)
        do = service.approve_plan if action == "approve_plan" else service.submit_run

        async def work(form: dict[str, str]) -> tuple[str, dict[str, Any]]:
            status = await v.write(lambda s, a: do(s, a, run_id).status)
            return word, {"status": status}

        return await _post(v, action, placed({}), work)

    handler.__name__ = action
    return endpoint(handler)


def _timed(action: str, word: str) -> Callable[[Any], Awaitable[Response]]:
    """POST /runs/{run}/start or /finish (``run start`` / ``run finish``), with an optional
    activity time for a late entry."""

    async def handler(v: Visit) -> Response:
        from ledger.entries.runs import activity
        from ledger.runs import service

        run_id = _run_id(v)
        do = service.start_run if action == "start" else service.finish_run

        async def work(form: dict[str, str]) -> tuple[str, dict[str, Any]]:
            number, at = activity({"run": run_id, "activity_time": _given(form, "activity_time")})
            status = await v.write(lambda s, a: do(s, a, number, activity_at=at).status)
            return word, {"status": status}

        return await _post(v, action, placed({"activity_time": "activity_time"}), work)

    handler.__name__ = f"{action}_run"
    return endpoint(handler)


STEP_INPUTS = {"deviation": "deviation", "activity_time": "activity_time",
               "password": "password", "meaning": "meaning"}  # fmt: skip


@endpoint
async def sign_step(v: Visit) -> Response:
    """POST /runs/{run}/steps/{step}: ``run step`` — a signature, so the password is typed
    again (checked, and a wrong one counted, as the CLI does before its write)."""
    from ledger.entries.runs import run_step
    from ledger.logbook.workspace import sign_with_password
    from ledger.runs.steps import StepValuesError, record_step

    run_id = _run_id(v)
    number = int(v.request.path_params["step"])
    login = v.require_user()
    form_id = f"step-{number}"
    prefix = "value."

    async def work(form: dict[str, str]) -> tuple[str, dict[str, Any]]:
        values = [f"{k[len(prefix) :]}={t}" for k, t in form.items()
                  if k.startswith(prefix) and t.strip()]  # fmt: skip
        e = run_step({"run": run_id, "step": number, "meaning": form.get("meaning", ""),
                      "values": values, "deviation": _given(form, "deviation"),
                      "activity_time": _given(form, "activity_time")})  # fmt: skip
        password = form.get("password", "")
        if not password:  # not sent is not a wrong password: nothing counted toward lockout
            raise InputError("type your password to sign the step", field="password",
                             value="(empty)", expected="your password")  # fmt: skip

        def write(s: Any, a: Any) -> dict[str, Any]:
            done = record_step(s, a, e.run, e.step, e.meaning, e.values, e.done_at,
                               deviation=e.deviation)  # fmt: skip
            r = done.entry
            return {"step": r.step, "meaning": r.meaning, "login": r.login,
                    "done_at": r.done_at.isoformat(), "late": r.late,
                    "deviation": r.deviation_number,
                    "out_of_range": list(done.out_of_range)}  # fmt: skip

        signed = await run_in_threadpool(sign_with_password, v.app.engine, login, password, write)
        return "signed", {"signed": signed}

    def place(err: LedgerError, form: Mapping[str, str]) -> dict[str, str]:
        """Each problem of the step's values beside the value it names."""
        names = [k[len(prefix) :] for k in form if k.startswith(prefix)]
        problems = err.problems if isinstance(err, StepValuesError) else (err,)
        out: dict[str, str] = {}
        for q in problems:
            text = str(q)
            name = next((n for n in names if q.value == n or text.startswith(f"--value {n}")),
                        None)  # fmt: skip
            key = f"{prefix}{name}" if name and q.field == "value" else None
            key = key or STEP_INPUTS.get(q.field or "", "_")
            out[key] = f"{out[key]}; {text}" if key in out else text
        return out

    return await _post(v, form_id, place, work, anchor=form_id)


@endpoint
async def upload_log(v: Visit) -> Response:
    """POST /runs/{run}/log (multipart): ``run import`` with the uploaded log (and mapping),
    copied to a private temporary folder under their own names and removed afterwards."""
    from ledger.entries.runs import run_import
    from ledger.runs.service import import_log, log_files

    run_id = _run_id(v)

    async def work(form: dict[str, str]) -> tuple[str, dict[str, Any]]:
        phases = [line.strip() for line in form.get("phases", "").splitlines() if line.strip()]
        folder = Path(tempfile.mkdtemp(prefix="fluxledger-upload-"))
        try:
            log = await _keep(v.file("file"), "file", folder)
            mapping = await _keep(v.file("mapping"), "mapping", folder, optional=True)
            e = run_import({"run": run_id, "file": [str(log)], "phase": phases,
                            "mapping": str(mapping) if mapping else None})  # fmt: skip

            def write(s: Any, a: Any) -> dict[str, Any]:
                given = Path(e.mapping) if e.mapping else None
                record, new = import_log(s, a, e.run, [Path(f) for f in e.files], given,
                                         e.phases, shown=Path(e.files[0]).name)  # fmt: skip
                files = [{k: f[k] for k in ("file_name", "sha256", "size_bytes")}
                         for f in log_files(record)]  # fmt: skip
                return {"written": new, "file_name": record.file_name, "rows": record.rows,
                        "sha256": record.sha256, "files": files,
                        "warnings": list((record.actuals or {}).get("warnings") or [])}  # fmt: skip

            try:
                answer = await v.write(write)
            except LedgerError as err:
                raise _named(err, folder) from None
        finally:
            await run_in_threadpool(shutil.rmtree, folder, True)
        return ("imported" if answer["written"] else "already"), answer

    # An error of any other field (a column, a line, the file's encoding) is about the log.
    inputs = {"mapping": "mapping", "phase": "phases", "run": "_", "user": "_"}
    return await _post(v, "log", placed(inputs, other="file"), work, anchor="log")


async def _keep(
    upload: UploadFile | None, name: str, folder: Path, *, optional: bool = False
) -> Path | None:
    """Copy an upload into ``folder`` under its own (checked) name once its type is one that
    ``run import`` reads; None for an optional file not sent."""
    from ledger.entries.runs import skid_upload

    if upload is None or not upload.filename:
        if optional:
            return None
        skid_upload(name, None, b"")  # refused: no file chosen
        raise AssertionError("skid_upload accepted no file")
    head = await upload.read(SNIFF_BYTES)
    base = skid_upload(name, upload.filename, head)
    target = folder / base
    if target.exists():  # the log and its mapping under one name
        target = folder / f"{name}-{base}"

    def copy() -> None:
        upload.file.seek(0)
        fd = os.open(target, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "wb") as out:
            shutil.copyfileobj(upload.file, out, COPY_CHUNK)

    await run_in_threadpool(copy)
    return target


def _named(err: LedgerError, folder: Path) -> LedgerError:
    """The error with the temporary folder left out of what it shows: the files by name."""
    inside = str(folder) + os.sep

    def clean(x: Any) -> Any:
        return x.replace(inside, "") if isinstance(x, str) else x

    err.message, err.source, err.value = clean(err.message), clean(err.source), clean(err.value)
    err.args = (err.message,)
    return err


QC_INPUTS = {"correction_reason": "correction_reason"}


@endpoint
async def enter_qc(v: Visit) -> Response:
    """POST /runs/{run}/qc: ``run qc`` with the results typed (blank ones left out)."""
    from ledger.entries.runs import qc_results
    from ledger.runs.service import enter_qc as enter

    run_id = _run_id(v)
    prefix = "result."

    async def work(form: dict[str, str]) -> tuple[str, dict[str, Any]]:
        typed = [f"{k[len(prefix) :]}={t}" for k, t in form.items()
                 if k.startswith(prefix) and t.strip()]  # fmt: skip
        given = qc_results({"results": typed})
        reason = _given(form, "correction_reason")
        if not given:
            raise InputError("no QC result typed", field="result",
                             expected="at least one result, e.g. 82 nm")  # fmt: skip

        def write(s: Any, a: Any) -> list[dict[str, Any]]:
            rows = enter(s, a, run_id, given, correction_reason=reason)
            return [{"attribute": r.attribute, "text": r.text, "value": r.value} for r in rows]

        return "qc", {"recorded": await v.write(write)}

    def place(err: LedgerError, form: Mapping[str, str]) -> dict[str, str]:
        """A result's error beside it: the service names it by value or as ``--result N``."""
        names = [k[len(prefix) :] for k in form if k.startswith(prefix)]
        field = err.field or ""
        for n in names:
            said = err.value == n or err.message.startswith(f"--result {n}")
            if field == f"--result {n}" or (field == "result" and said):
                return {f"{prefix}{n}": str(err)}
        return placed(QC_INPUTS)(err, form)

    return await _post(v, "qc", place, work, anchor="qc")


DEVIATION_INPUTS = {"description": "description", "check": "check", "impact": "impact",
                    "class": "class"}  # fmt: skip


@endpoint
async def add_deviation(v: Visit) -> Response:
    """POST /runs/{run}/deviations: ``run deviation``."""
    from ledger.runs.service import add_deviation as add

    run_id = _run_id(v)

    async def work(form: dict[str, str]) -> tuple[str, dict[str, Any]]:
        text = form.get("description", "")
        check, impact, word = (_given(form, n) for n in ("check", "impact", "class"))

        def write(s: Any, a: Any) -> int:
            return add(s, a, run_id, text, check=check, impact=impact, classification=word).number

        return "deviation", {"deviation": await v.write(write)}

    return await _post(v, "deviation", placed(DEVIATION_INPUTS), work, anchor="deviations")


@endpoint
async def close_deviation(v: Visit) -> Response:
    """POST /runs/{run}/deviations/{number}/close: ``run close-deviation`` (QA's alone: the
    service refuses anyone else)."""
    from ledger.runs.service import close_deviation as close

    run_id = _run_id(v)
    number = int(v.request.path_params["number"])

    async def work(form: dict[str, str]) -> tuple[str, dict[str, Any]]:
        closure = form.get("closure", "")
        impact, word = _given(form, "impact"), _given(form, "class")

        def write(s: Any, a: Any) -> dict[str, Any]:
            d = close(s, a, run_id, number, closure, impact=impact, classification=word)
            return {"deviation": d.number, "classification": d.classification,
                    "closed_by": d.closed_by}  # fmt: skip

        return "closed", await v.write(write)

    inputs = {"closure": "closure", "impact": "impact", "class": "class"}
    return await _post(v, f"close-{number}", placed(inputs), work, anchor="deviations")


routes = [
    Route("/runs", run_list, methods=["GET"]),
    Route("/runs/{run:int}", run_page, methods=["GET"]),
    Route(
        "/runs/{run:int}/approve-plan", _plain_action("approve_plan", "approved"), methods=["POST"]
    ),
    Route("/runs/{run:int}/start", _timed("start", "started"), methods=["POST"]),
    Route("/runs/{run:int}/finish", _timed("finish", "finished"), methods=["POST"]),
    Route("/runs/{run:int}/submit", _plain_action("submit", "submitted"), methods=["POST"]),
    Route("/runs/{run:int}/steps/{step:int}", sign_step, methods=["POST"]),
    Route("/runs/{run:int}/log", upload_log, methods=["POST"]),
    Route("/runs/{run:int}/qc", enter_qc, methods=["POST"]),
    Route("/runs/{run:int}/deviations", add_deviation, methods=["POST"]),
    Route("/runs/{run:int}/deviations/{number:int}/close", close_deviation, methods=["POST"]),
]
