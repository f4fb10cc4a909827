"""The bench records of one module as web forms: water-flux test (a table of TMP points),
integrity test, cleaning, cleaning cycle, storage, use start and end.

Each form's inputs are named as the entry's fields (the CLI's options without dashes), so a
POST hands the form to the same entry and the same service as ``fluxledger test water``,
``test integrity``, ``care clean``, ``care cycle``, ``care store``, ``use start`` and
``use end``. A GET shows the form; a POST records it and shows what was recorded
(``form_done.html``), or the form again with the typed values and each error beside the
field it names; nothing is written then. A cycle's inputs are named ``N.NAME`` as its
``--value N.NAME=TEXT`` options. ``?format=json``: the recorded values, or ``{"error", "field"}``.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from starlette.responses import Response
from starlette.routing import Route

from ledger.errors import LedgerError, RefusedError
from ledger.web.show import plain
from ledger.web.visit import Visit, endpoint, field_errors

TABLE_ROWS = 5  # rows shown at first; ?rows=N (up to the entry's maximum) shows more
STAGES = (("baseline", "Baseline"), ("pre-use", "Pre-use"), ("post-use", "Post-use"),
          ("post-clean", "Post-clean"))  # fmt: skip
METHODS = (("", "Decay or bubble point, from the values"),
           ("pressure-decay", "Pressure decay"), ("bubble-point", "Bubble point"),
           ("diffusion", "Diffusion"), ("water-intrusion", "Water intrusion"))  # fmt: skip


@dataclass(frozen=True)
class Input:
    """One input of a form: its name (the entry's field), label, unit kind (for the unit
    suggestions; "" for text), an example and a hint."""

    name: str
    label: str
    kind: str = ""
    example: str = ""
    hint: str = ""
    required: bool = False


LATE = Input("activity_time", "Activity time (only for a late entry)",
             example="2026-12-04T09:30+01:00",
             hint="When it was done, if not now: ISO 8601 with the offset.")  # fmt: skip
NOTE = Input("note", "Note", hint="A free-text remark kept with the record.")

WATER = (
    Input("temperature", "Water temperature", "temperature", "22 degC", required=True),
    Input("water_grade", "Water grade", example="WFI", hint="e.g. WFI, PW."),
    LATE,
    NOTE,
)
INTEGRITY = (
    Input("start", "Pressure at the start", "pressure", "15 psi",
          "A pressure decay: start and end pressures over the hold time."),
    Input("end", "Pressure at the end", "pressure", "14.95 psi"),
    Input("hold_time", "Hold time", "time", "5 min"),
    Input("test_pressure", "Test pressure", "pressure", "15 psi",
          "Default: the start pressure. Needed with a measured flow."),
    Input("upstream_volume", "Upstream gas volume", "volume", "120 mL",
          "Reports a decay's gas flow; gives a diffusion or water-intrusion flow from a decay."),
    Input("bubble_point", "Bubble point seen", "pressure", "52 psi",
          "Instead of a decay."),
    Input("flow", "Measured flow (diffusion or water intrusion)", "flow", "8 mL/min"),
    Input("temperature", "Temperature during the test", "temperature", "21 degC"),
    LATE,
    NOTE,
)  # fmt: skip
CLEAN = (
    Input("agent", "Cleaning agent", example="sodium hydroxide", required=True),
    Input("concentration", "Concentration", "concentration", "0.5 mol/L", required=True),
    Input("temperature", "Solution temperature", "temperature", "25 degC", required=True),
    Input("contact_time", "Contact time", "time", "60 min", required=True),
    Input("reagent_lot", "Reagent lot", example="NX-2611-03", required=True),
    Input("rinse_ph", "Final rinse pH", example="7.2", hint="A bare number."),
    Input("rinse_conductivity", "Final rinse conductivity", "conductivity", "1.4 uS/cm"),
    Input("procedure", "Cleaning procedure", example="CP-NAOH-05",
          hint="The validated procedure to check against; a cleaning outside its ranges holds "
          "the module."),
    LATE,
    NOTE,
)  # fmt: skip
STORAGE = (
    Input("solution", "Storage solution", example="20 % ethanol", required=True),
    LATE,
    NOTE,
)
USE_START = (
    Input("product", "Product", example="QB-117", required=True),
    Input("lot", "Batch or lot", example="QB117-26-014", required=True),
    Input("override_reason", "Override reason (engineer or QA)",
          hint="Only to use a module dedicated to another product: why."),
    LATE,
    NOTE,
)  # fmt: skip
USE_END = (LATE,)


def _serial(v: Visit) -> str:
    return str(v.request.path_params["serial"])


def _suggestions() -> dict[str, tuple[str, ...]]:
    from ledger.logbook.bench_results import unit_suggestions

    return unit_suggestions()


@dataclass(frozen=True)
class Form:
    """One form: its title, template, inputs and what a POST does."""

    slug: str
    title: str
    template: str
    inputs: tuple[Input, ...]
    record: Callable[[dict[str, object]], Callable[[Any, Any], Any]]
    extra_names: tuple[str, ...] = ()  # inputs the template adds (a select, table cells)


def _shown(v: Visit, form: Form, status: int = 200, **context: Any) -> Response:
    """The form (empty, or again with the typed values and the errors)."""
    from ledger.logbook.bench_results import SAFETY_NOTE

    context.setdefault("values", {})
    context.setdefault("errors", {})
    return v.page(
        form.template,
        status,
        form=form,
        serial=_serial(v),
        units=_suggestions(),
        safety=SAFETY_NOTE,
        stages=STAGES,
        methods=METHODS,
        **context,
    )


def _known(form: Form) -> set[str]:
    """The names of the form's inputs (every cell of the whole table)."""
    names = {i.name for i in form.inputs} | set(form.extra_names)
    if form.slug == "water":
        from ledger.entries.water import MAX_ROWS, ROW_FIELDS, row_field

        names |= {row_field(n, r) for n in ROW_FIELDS for r in range(1, MAX_ROWS + 1)}
    return names


def _rows(v: Visit, values: dict[str, str]) -> int:
    """How many table rows to show: the rows asked for, and every row that holds a value."""
    from ledger.entries.water import MAX_ROWS

    def number(text: str) -> int | None:  # "12"; not "²", nor a thousand digits
        return int(text) if text.isascii() and text.isdigit() and len(text) <= 3 else None

    asked = number(v.request.query_params.get("rows", ""))
    rows = TABLE_ROWS if asked is None else asked
    filled = [n for k, t in values.items()
              if (n := number(k.rpartition("_")[2])) is not None and t.strip()]  # fmt: skip
    return max(1, min(MAX_ROWS, max([rows, *filled])))


def handler(form: Form) -> Callable[..., Any]:
    """The GET and POST of one form."""

    @endpoint
    async def page(v: Visit) -> Response:
        v.require_user()  # before the form: an idle session goes to sign-in, not to CSRF
        rows = _rows(v, {})
        if v.request.method == "GET":
            if v.wants_json():
                names = sorted(_known(form))
                return v.json({"form": form.slug, "serial": _serial(v), "fields": names,
                               "units": plain(_suggestions())})  # fmt: skip
            return _shown(v, form, rows=rows)
        typed = await v.form()
        rows = _rows(v, typed)
        raw: dict[str, object] = {**typed, "serial": _serial(v)}
        try:
            work = form.record(raw)
            result = await v.write(work)
        except LedgerError as err:
            status = 403 if isinstance(err, RefusedError) else 400
            if v.wants_json():
                return v.json({"error": str(err), "field": err.field}, status)
            errors = field_errors(err)
            name = next(iter(errors))
            if name not in _known(form):
                errors = {"_": errors[name]}
            return _shown(v, form, status, values=typed, errors=errors, rows=rows)
        if v.wants_json():
            return v.json({"recorded": plain(result)})
        return v.page("form_done.html", form=form, serial=_serial(v), r=result)

    page.__name__ = f"{form.slug}_form"
    return page


# What each POST does: the entry checks the fields, the service records -----------------------


def _water(raw: dict[str, object]) -> Callable[[Any, Any], Any]:
    from ledger.entries.water import water_test_rows
    from ledger.logbook.bench_results import water_result
    from ledger.logbook.waterflux import record_water_test

    e = water_test_rows(raw)

    def work(s: Any, a: Any) -> Any:
        with e.blame():
            test, note = record_water_test(
                s, a, e.serial, e.stage, e.points, e.temperature_k, water_grade=e.water_grade,
                activity_at=e.activity_at, note=e.note, entered=e.entered,
            )  # fmt: skip
        return water_result(s, test, note)

    return work


def _integrity(raw: dict[str, object]) -> Callable[[Any, Any], Any]:
    from ledger.entries.integrity import integrity_test
    from ledger.logbook.bench_results import integrity_result
    from ledger.logbook.integrity import record_bubble_point, record_decay_test, record_flow_test

    raw.pop("readings", None)  # a readings file is the CLI's; the form gives start and end
    e = integrity_test(raw)

    def work(s: Any, a: Any) -> Any:
        common: dict[str, Any] = dict(activity_at=e.activity_at, note=e.note, entered=e.entered)
        if e.flow_test is not None:
            test, note = record_flow_test(s, a, e.serial, e.flow_test, **common)
        elif e.decay is None:
            test, note = record_bubble_point(
                s, a, e.serial, e.bubble_point(), temperature_k=e.temperature_k, **common
            )
        else:
            test, note = record_decay_test(s, a, e.serial, e.decay, **common)
        return integrity_result(s, test, note)

    return work


def _clean(raw: dict[str, object]) -> Callable[[Any, Any], Any]:
    from ledger.entries.care import cleaning
    from ledger.logbook.bench_results import cleaning_result
    from ledger.logbook.care import record_cleaning

    e = cleaning(raw)

    def work(s: Any, a: Any) -> Any:
        record, note = record_cleaning(s, a, e.serial, e.cleaning, procedure=e.procedure,
                                       activity_at=e.activity_at, note=e.note)  # fmt: skip
        return cleaning_result(s, record, note)

    return work


def _storage(raw: dict[str, object]) -> Callable[[Any, Any], Any]:
    from ledger.entries.care import storage
    from ledger.logbook.bench_results import storage_result
    from ledger.logbook.care import record_storage

    e = storage(raw)

    def work(s: Any, a: Any) -> Any:
        record = record_storage(s, a, e.serial, e.solution, activity_at=e.activity_at,
                                note=e.note)  # fmt: skip
        return storage_result(s, record)

    return work


def _use_start(raw: dict[str, object]) -> Callable[[Any, Any], Any]:
    from ledger.entries.uses import use_start
    from ledger.logbook.bench_results import use_result
    from ledger.logbook.uses import start_use

    e = use_start(raw)

    def work(s: Any, a: Any) -> Any:
        use = start_use(s, a, e.serial, e.product, e.lot, override_reason=e.override_reason,
                        activity_at=e.activity_at, note=e.note)  # fmt: skip
        return use_result(s, use, ended=False)

    return work


def _use_end(raw: dict[str, object]) -> Callable[[Any, Any], Any]:
    from ledger.entries.uses import use_end
    from ledger.logbook.bench_results import use_result
    from ledger.logbook.uses import end_use

    e = use_end(raw)

    def work(s: Any, a: Any) -> Any:
        return use_result(s, end_use(s, a, e.serial, activity_at=e.activity_at), ended=True)

    return work


def _blank_text_left_out(
    record: Callable[[dict[str, object]], Callable[[Any, Any], Any]], *names: str
) -> Callable[[dict[str, object]], Callable[[Any, Any], Any]]:
    """A blank optional text box is a field left out, as an option not given on the CLI
    (entries keep blank text as text, and the services then refuse it)."""

    def wrapped(raw: dict[str, object]) -> Callable[[Any, Any], Any]:
        for name in names:
            if not str(raw.get(name) or "").strip():
                raw.pop(name, None)
        return record(raw)

    return wrapped


_TEXTS = ("water_grade", "note", "override_reason", "procedure", "method")
FORMS = (
    Form("water", "Record a water-flux test", "form_water.html", WATER,
         _blank_text_left_out(_water, *_TEXTS), ("stage",)),
    Form("integrity", "Record an integrity test", "form_integrity.html", INTEGRITY,
         _blank_text_left_out(_integrity, *_TEXTS), ("method",)),
    Form("clean", "Record a cleaning", "form_clean.html", CLEAN,
         _blank_text_left_out(_clean, *_TEXTS)),
    Form("storage", "Record the start of storage", "form_storage.html", STORAGE,
         _blank_text_left_out(_storage, *_TEXTS)),
    Form("use-start", "Start a use", "form_use.html", USE_START,
         _blank_text_left_out(_use_start, *_TEXTS)),
    Form("use-end", "End the current use", "form_use.html", USE_END,
         _blank_text_left_out(_use_end, *_TEXTS)),
)  # fmt: skip

# A cleaning cycle: the steps come from the procedure version in force ----------------------

CYCLE = Form("cycle", "Record a cleaning cycle", "form_cycle.html", (LATE, NOTE),
             _blank_text_left_out(lambda raw: _cycle(raw), *_TEXTS), ("procedure",))  # fmt: skip
STEP_VALUE = re.compile(r"\d{1,2}\.[a-z_]{1,20}")  # an input named as `--value N.NAME`


def _cycle(raw: dict[str, object]) -> Callable[[Any, Any], Any]:
    from ledger.entries.care import cycle
    from ledger.logbook.bench_results import cycle_result
    from ledger.logbook.cycles import record_cycle

    e = cycle(raw)

    def work(s: Any, a: Any) -> Any:
        done, steps, note = record_cycle(s, a, e.serial, e.procedure, e.values,
                                         activity_at=e.activity_at, note=e.note)  # fmt: skip
        return cycle_result(s, done, steps, note)

    return work


async def _steps(v: Visit, procedure: str) -> tuple[Any, dict[str, str]]:
    """The form of ``procedure``'s steps, or the error that names the procedure."""
    from ledger.logbook.bench_results import cycle_form

    if not procedure.strip():
        return None, {}
    try:
        return await v.read(lambda s: cycle_form(s, procedure)), {}
    except LedgerError as err:
        return None, {"procedure": str(err)}


@endpoint
async def cycle_page(v: Visit) -> Response:
    """GET /modules/{serial}/cycle[?procedure=ID]: choose a procedure, then its steps' values;
    POST records the cycle as ``care cycle --procedure ID --value N.NAME=TEXT ...``."""
    from ledger.logbook.bench_results import cycle_cell, cycle_procedures

    v.require_user()
    procedures = await v.read(cycle_procedures)
    if v.request.method == "GET":
        procedure = v.request.query_params.get("procedure", "")
        steps, errors = await _steps(v, procedure)
        if v.wants_json():
            if errors:
                return v.json({"error": errors["procedure"], "field": "procedure"}, 400)
            return v.json({"form": "cycle", "serial": _serial(v), "procedures": procedures,
                           "steps": plain(steps)})  # fmt: skip
        return _shown(v, CYCLE, 400 if errors else 200, values={"procedure": procedure},
                      errors=errors, steps=steps, procedures=procedures)  # fmt: skip
    typed = await v.form()
    values = [f"{k}={t}" for k, t in typed.items() if STEP_VALUE.fullmatch(k) and t.strip()]
    raw: dict[str, object] = {**typed, "serial": _serial(v), "values": values}
    try:
        result = await v.write(CYCLE.record(raw))
    except LedgerError as err:
        status = 403 if isinstance(err, RefusedError) else 400
        cell = cycle_cell(err.field, err.value, str(err))
        if v.wants_json():
            return v.json({"error": str(err), "field": cell or err.field}, status)
        name = cell or (err.field if err.field in _known(CYCLE) else "_")
        steps, _ = await _steps(v, typed.get("procedure", ""))
        return _shown(v, CYCLE, status, values=typed, errors={name: str(err)}, steps=steps,
                      procedures=procedures)  # fmt: skip
    if v.wants_json():
        return v.json({"recorded": plain(result)})
    return v.page("form_done.html", form=CYCLE, serial=_serial(v), r=result)


routes = [
    *(Route(f"/modules/{{serial}}/{f.slug}", handler(f), methods=["GET", "POST"]) for f in FORMS),
    Route("/modules/{serial}/cycle", cycle_page, methods=["GET", "POST"]),
]
