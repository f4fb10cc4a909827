"""Cleaning cycles against versioned cleaning-cycle procedures.

A cleaning-cycle procedure is a TOML file under change control (``ledger.logbook.documents``,
kind ``cleaning_procedure``): an engineer submits it, QA approves it from a stated time. A
cycle records every step of the procedure version in force when it was done, bound by that
version's SHA-256. The cycle is stored as one ``cleaning`` row (so the module's history,
fitness and records see a cleaning, as for a one-agent cleaning) with one ``cleaning_step``
row per step. A step outside its ranges or an endpoint not reached holds the module until a
signed disposition; NWP recovery after the cycle stays the acceptance test of the whole cycle.

A procedure file::

    [procedure]
    id = "QC-CYCLE-05"
    version = "1"
    title = "Flush, caustic, rinse, acid, storage"

    [[steps]]
    name = "caustic"
    agent = "sodium hydroxide"
    solution = true                          # names a prepared solution record
    concentration = ["0.45 mol/L", "0.55 mol/L"]
    temperature = ["40 degC", "50 degC"]
    contact_time = "60 min"                  # at least
    flow = ["200 mL/min", "400 mL/min"]
    tmp = ["0 bar", "1 bar"]
    endpoint = { conductivity = "2 uS/cm" }  # or ph = [low, high], toc = "500 ug/L", volume

A range is ``[low, high]``; ``""`` leaves an end open.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlmodel import Session, col, select

from ledger.errors import InputError
from ledger.logbook import documents
from ledger.logbook.context import apply, begin
from ledger.logbook.required import optional
from ledger.logbook.site import caution_of
from ledger.rules.cycles import ENDPOINT_KINDS, Range, StepDone, StepSpec, departures
from ledger.rules.sequence import after_cleaning
from ledger.store.tables import Cleaning, CleaningStep, TemplateVersion, UserAccount

PROCEDURES = documents.Kind(
    name="cleaning_procedure",
    word="cleaning procedure",
    submit_command="fluxledger care cycle-procedure submit FILE",
    approve_command="fluxledger care cycle-procedure approve",
    history_command="fluxledger care cycle-procedure history ID",
    list_command="fluxledger care cycle-procedure list",
)
MAX_STEPS = 20
EXPECTED = "a TOML cleaning-cycle procedure ([procedure] id, version, title; [[steps]])"
# The strength of an agent: a molarity, a mass concentration or a percentage (SI unit stored).
_STRENGTHS = (("molarity", "mol/m**3"), ("concentration", "kg/m**3"), ("fraction", ""))
_ENDPOINT_KIND = {"ph": None, "conductivity": "conductivity", "toc": "concentration",
                  "volume": "volume"}  # fmt: skip
_STEP_KEYS = {"name", "agent", "solution", "concentration", "temperature", "contact_time",
              "flow", "tmp", "endpoint"}  # fmt: skip


@dataclass(frozen=True)
class CycleProcedure:
    """A parsed cleaning-cycle procedure: ID, version, title, its steps, its file's SHA-256."""

    id: str
    version: str
    title: str
    steps: tuple[StepSpec, ...]
    sha256: str
    text: str


def _bad(source: str, key: str, message: str, expected: str) -> InputError:
    return InputError(f"{source}: {key}: {message}", field="procedure", value=source,
                      expected=expected, source=source)  # fmt: skip


def _text(d: Mapping[str, Any], key: str, source: str, where: str) -> str:
    value = d.get(key)
    if not isinstance(value, str) or not value.strip() or len(value) > 200:
        raise _bad(source, f"{where}{key}", f"{value!r} is not a text", "a text of 1 to 200 "
                   "characters")  # fmt: skip
    return " ".join(value.split())


def _quantity(text: object, kind: str, source: str, key: str) -> float:
    from ledger import units

    if not isinstance(text, str):
        raise _bad(source, key, f"{text!r} is not a quantity", "a quantity with its unit")
    try:
        return units.parse(text, kind, field=key)
    except InputError as err:
        raise _bad(source, key, err.message, err.expected or "a quantity with its unit") from None


def _range(value: object, kind: str, source: str, key: str) -> Range:
    if not (isinstance(value, list) and len(value) == 2):
        raise _bad(source, key, f"{value!r} is not a range", '[low, high], e.g. ["20 degC", '
                   '"30 degC"]; "" leaves an end open')  # fmt: skip
    low, high = (None if v == "" else _quantity(v, kind, source, key) for v in value)
    if low is None and high is None:
        raise _bad(source, key, "both ends are open", "at least one end")
    if low is not None and high is not None and low > high:
        raise _bad(source, key, "the range is reversed", "low ≤ high")
    return Range(low, high)


def _strength(value: object, source: str, key: str) -> tuple[Range, str]:
    """A concentration range of whichever strength kind its ends are."""
    for kind, unit in _STRENGTHS:
        try:
            return _range(value, kind, source, key), unit
        except InputError:
            continue
    raise _bad(source, key, f"{value!r} is not a range of concentrations",
               '["0.45 mol/L", "0.55 mol/L"], ["4 g/L", "6 g/L"] or ["0.5 %", "1 %"]')  # fmt: skip


def _ph(value: object, source: str, key: str) -> Range:
    if not (isinstance(value, list) and len(value) == 2):
        raise _bad(source, key, f"{value!r} is not a pH range", '[low, high], e.g. ["5", "8"]')
    ends: list[float | None] = []
    for v in value:
        try:
            ends.append(None if v == "" else float(v))
        except (TypeError, ValueError):
            raise _bad(source, key, f"{v!r} is not a pH", "a pH from 0 to 14") from None
    if any(e is not None and not 0 <= e <= 14 for e in ends):
        raise _bad(source, key, "a pH lies outside 0–14", "a pH from 0 to 14")
    return Range(ends[0], ends[1])


def _endpoint(value: object, source: str, key: str) -> tuple[str, Range]:
    if not (isinstance(value, dict) and len(value) == 1):
        raise _bad(source, key, f"{value!r} is not one endpoint",
                   "{ ph = [low, high] }, { conductivity = MAX }, { toc = MAX } or "
                   "{ volume = MIN }")  # fmt: skip
    ((kind, limit),) = value.items()
    if kind not in ENDPOINT_KINDS:
        raise _bad(source, key, f"{kind!r} is not an endpoint", ", ".join(ENDPOINT_KINDS))
    if kind == "ph":
        return kind, _ph(limit, source, f"{key}.ph")
    q = _quantity(limit, str(_ENDPOINT_KIND[kind]), source, f"{key}.{kind}")
    return kind, Range(q, None) if kind == "volume" else Range(None, q)


def _step(d: object, n: int, source: str) -> StepSpec:
    where = f"steps[{n}]."
    if not isinstance(d, dict):
        raise _bad(source, f"steps[{n}]", "is not a table", "[[steps]] with name and agent")
    unknown = sorted(set(d) - _STEP_KEYS)
    if unknown:
        raise _bad(source, where + unknown[0], "is not a step key", ", ".join(sorted(_STEP_KEYS)))
    conc, unit = (None, "")
    if "concentration" in d:
        conc, unit = _strength(d["concentration"], source, where + "concentration")
    solution = d.get("solution", False)
    if not isinstance(solution, bool):
        raise _bad(source, where + "solution", f"{solution!r} is not true or false", "true/false")
    endpoint, endpoint_range = (None, None)
    if "endpoint" in d:
        endpoint, endpoint_range = _endpoint(d["endpoint"], source, where + "endpoint")
    return StepSpec(
        name=_text(d, "name", source, where),
        agent=_text(d, "agent", source, where),
        concentration=conc,
        concentration_unit=unit,
        temperature_k=_range(d["temperature"], "temperature", source, where + "temperature")
        if "temperature" in d else None,
        contact_time_min_s=_quantity(d["contact_time"], "time", source, where + "contact_time")
        if "contact_time" in d else None,
        flow_m3_s=_range(d["flow"], "flow", source, where + "flow") if "flow" in d else None,
        tmp_pa=_range(d["tmp"], "pressure", source, where + "tmp") if "tmp" in d else None,
        endpoint=endpoint,
        endpoint_range=endpoint_range,
        needs_solution=solution,
    )  # fmt: skip


def parse(raw: bytes, source: str) -> CycleProcedure:
    """Validate a cleaning-cycle procedure file; InputError naming the file, key (and line)."""
    from ledger.tomlfile import parse_toml_bytes

    data = parse_toml_bytes(raw, source, "procedure", EXPECTED)
    head = data.get("procedure")
    if not isinstance(head, dict):
        raise _bad(source, "procedure", "the [procedure] table is missing", EXPECTED)
    pid = _text(head, "id", source, "procedure.")
    bare = pid.replace("-", "").replace("_", "").replace(".", "")
    if not (bare.isascii() and bare.isalnum()) or len(pid) > 64:
        raise _bad(source, "procedure.id", f"{pid!r} is not an ID",
                   "letters, digits, '-', '_' and '.', at most 64")  # fmt: skip
    version = _text(head, "version", source, "procedure.")
    if len(version) > 32:
        raise _bad(source, "procedure.version", "is longer than 32 characters", "e.g. 1 or 2.1")
    steps = data.get("steps")
    if not isinstance(steps, list) or not 1 <= len(steps) <= MAX_STEPS:
        raise _bad(source, "steps", "the procedure needs [[steps]]",
                   f"1 to {MAX_STEPS} [[steps]] tables")  # fmt: skip
    return CycleProcedure(
        id=pid,
        version=version,
        title=_text(head, "title", source, "procedure."),
        steps=tuple(_step(s, i, source) for i, s in enumerate(steps, start=1)),
        sha256=hashlib.sha256(raw).hexdigest(),
        text=raw.decode("utf-8-sig"),
    )


# Change control ---------------------------------------------------------------------------------


def submit(
    session: Session, actor: UserAccount, raw: bytes, source: str
) -> tuple[TemplateVersion, bool]:
    """Submit a procedure file as a draft version (an engineer); see documents.submit."""
    from ledger.logbook.auth import require_role

    require_role(actor, documents.AUTHORS, "submit cleaning procedure versions")
    p = parse(raw, source)
    doc = documents.Document(p.id, p.version, p.sha256, p.text, p.title)
    return documents.submit(session, actor, PROCEDURES, doc, source)


def approve(
    session: Session,
    actor: UserAccount,
    procedure_id: str,
    version: str,
    effective_from: datetime | None,
    late_reason: str | None = None,
) -> TemplateVersion:
    """Approve a draft (QA, not its author) from ``effective_from``; no time may reach back
    past a cycle already recorded under the procedure."""
    used = session.exec(
        select(Cleaning.activity_at)
        .join(TemplateVersion, col(Cleaning.procedure_version_id) == col(TemplateVersion.id))
        .where(TemplateVersion.template_id == procedure_id, TemplateVersion.kind == PROCEDURES.name)
    ).all()
    return documents.approve(session, actor, PROCEDURES, procedure_id, version, effective_from,
                             late_reason, used_at=list(used))  # fmt: skip


def retire(
    session: Session, actor: UserAccount, procedure_id: str, version: str, reason: str
) -> TemplateVersion:
    """Retire a version (QA, with a reason)."""
    return documents.retire(session, actor, PROCEDURES, procedure_id, version, reason)


def history(
    session: Session, procedure_id: str, at: datetime | None = None
) -> list[documents.VersionLine]:
    """Every version of the procedure with its status at ``at`` (now)."""
    return documents.history(session, PROCEDURES, procedure_id, at)


def catalogue(session: Session, at: datetime | None = None) -> list[documents.VersionLine]:
    """Every version of every cleaning-cycle procedure with its status."""
    return documents.catalogue(session, PROCEDURES, at)


def in_force(session: Session, procedure_id: str, at: datetime) -> CycleProcedure:
    """The procedure version in force at ``at``, parsed and checked against its SHA-256."""
    row = documents.in_force(session, PROCEDURES, procedure_id, at)
    p = parse(row.text.encode("utf-8"), f"{row.template_id} v{row.version}")
    if p.sha256 != row.sha256:
        raise RuntimeError(f"procedure version {row.id} does not match its SHA-256")
    return p


# Recording a cycle ------------------------------------------------------------------------------


@dataclass(frozen=True)
class StepResult:
    """One recorded step: its row and its cautions (by the agent's hazard class)."""

    row: CleaningStep
    caution: str | None


def _step_values(
    session: Session, number: int, spec: StepSpec, texts: Mapping[str, str], at: datetime
) -> tuple[StepDone, str | None, dict[str, str]]:
    """The values given for step ``number`` parsed by what the spec asks: (SI values, the
    solution's code, the texts as typed). Every value the step asks for must be there and no
    other."""
    from ledger import units

    def key(name: str) -> str:
        return f"{number}.{name}"

    wanted = spec.needs()
    extra = sorted(set(texts) - set(wanted))
    if extra:
        raise InputError(
            f"--value {key(extra[0])}: step {number} ({spec.name}) takes no {extra[0]}",
            field="value",
            value=key(extra[0]),
            expected=f"step {number} takes " + (", ".join(wanted) or "no values"),
        )
    solution_code = texts.get("solution")
    solution = None
    if spec.needs_solution:
        if solution_code is None:
            raise _missing(number, spec, "solution")
        from ledger.logbook.solutions import usable_solution

        solution = usable_solution(session, solution_code, at, spec.agent)
    values: dict[str, float | None] = {}
    for name, kind in (("temperature", "temperature"), ("contact_time", "time"),
                       ("flow", "flow"), ("tmp", "pressure")):  # fmt: skip
        if name in wanted:
            if name not in texts:
                raise _missing(number, spec, name)
            values[name] = units.parse(texts[name], kind, field=f"--value {key(name)}")
    concentration = None
    if spec.concentration is not None:
        if "concentration" in texts:
            kind = next(k for k, u in _STRENGTHS if u == spec.concentration_unit)
            concentration = units.parse(texts["concentration"], kind,
                                        field=f"--value {key('concentration')}")  # fmt: skip
        elif (
            solution is not None
            and solution.verified_concentration is not None
            and (solution.concentration_unit == spec.concentration_unit)
        ):
            concentration = solution.verified_concentration  # as verified when prepared
        else:
            raise _missing(number, spec, "concentration")
    endpoint = None
    if spec.endpoint is not None:
        if "endpoint" not in texts:
            raise _missing(number, spec, "endpoint")
        endpoint_kind = _ENDPOINT_KIND[spec.endpoint]
        field = f"--value {key('endpoint')}"
        if endpoint_kind is None:
            endpoint = _ph_value(texts["endpoint"], field)
        else:
            endpoint = units.parse(texts["endpoint"], endpoint_kind, field=field)
    done = StepDone(concentration, values.get("temperature"), values.get("contact_time"),
                    values.get("flow"), values.get("tmp"), endpoint)  # fmt: skip
    entered = {n: t for n, t in texts.items() if n != "solution"}
    return done, solution_code, entered


def _ph_value(text: str, field: str) -> float:
    try:
        value = float(text.strip())
    except ValueError:
        value = float("nan")
    if not 0 <= value <= 14:
        raise InputError(f"{field}: {text!r} is not a pH", field="value", value=text,
                         expected="a pH from 0 to 14")  # fmt: skip
    return value


def _missing(number: int, spec: StepSpec, name: str) -> InputError:
    return InputError(
        f"step {number} ({spec.name}) needs --value {number}.{name}",
        field="value",
        value=None,
        expected=f"step {number} takes " + ", ".join(spec.needs()),
    )


def record_cycle(
    session: Session,
    actor: UserAccount,
    serial: str,
    procedure_id: str,
    values: Mapping[int, Mapping[str, str]],
    *,
    activity_at: datetime | None = None,
    note: str | None = None,
) -> tuple[Cleaning, list[StepResult], str | None]:
    """Record a cleaning cycle on module ``serial`` under the version of ``procedure_id`` in
    force at the activity time: ``values`` maps each step number (from 1) to its values as
    typed (field -> text). Every step of the procedure must be given; all are checked before
    anything is written. A departure at any step holds the module. Returns the cleaning, its
    steps and the status note."""
    work = begin(session, actor, serial, "cleaning", activity_at)
    note = optional("note", note, "a note on the cleaning")
    row = documents.in_force(session, PROCEDURES, procedure_id, work.at)
    proc = in_force(session, procedure_id, work.at)
    unknown = sorted(set(values) - set(range(1, len(proc.steps) + 1)))
    if unknown:
        raise InputError(
            f"--value {unknown[0]}.…: procedure {proc.id} v{proc.version} has "
            f"{len(proc.steps)} steps",
            field="value",
            value=str(unknown[0]),
            expected=f"a step number from 1 to {len(proc.steps)}",
        )
    parsed = [
        _step_values(session, n, spec, values.get(n, {}), work.at)
        for n, spec in enumerate(proc.steps, start=1)
    ]
    found = [d for n, (spec, (done, _, _)) in enumerate(zip(proc.steps, parsed, strict=True), 1)
             for d in departures(n, spec, done)]  # fmt: skip
    cleaning = work.journal.create(
        Cleaning(
            module_id=work.module_id,
            activity_at=work.at,
            late=work.late,
            note=note,
            procedure_version_id=row.id,
            deviations=found,
            **_summary(proc.steps, parsed),
        )
    )
    assert cleaning.id is not None
    results = []
    for n, (spec, (done, code, entered)) in enumerate(zip(proc.steps, parsed, strict=True), 1):
        step = work.journal.create(
            CleaningStep(
                cleaning_id=cleaning.id,
                number=n,
                name=spec.name,
                agent=spec.agent,
                solution_code=code,
                concentration=done.concentration,
                concentration_unit=spec.concentration_unit,
                temperature_k=done.temperature_k,
                contact_time_s=done.contact_time_s,
                flow_m3_s=done.flow_m3_s,
                tmp_pa=done.tmp_pa,
                endpoint_kind=spec.endpoint,
                endpoint_value=done.endpoint_value,
                departures=departures(n, spec, done),
                entered=entered or None,
            ),
            module_id=work.module_id,
        )
        results.append(StepResult(step, caution_of(session, spec.agent)))
    status = apply(work, after_cleaning(work.module.status, found), ("cleaning", cleaning.id))
    return cleaning, results, status


def _summary(steps: Sequence[StepSpec], parsed: Sequence[tuple[StepDone, str | None, Any]]
             ) -> dict[str, Any]:  # fmt: skip
    """The cleaning row's columns for a cycle: its agents in order, the strength, temperature
    and contact time of its main chemical step (the first with a concentration), its total
    contact time, the solutions used, and the last pH and conductivity endpoints."""
    agents: list[str] = []
    for s in steps:
        if s.agent not in agents:
            agents.append(s.agent)
    main = next((i for i, s in enumerate(steps) if s.concentration is not None), None)
    done = [p[0] for p in parsed]
    temps = [d.temperature_k for d in done if d.temperature_k is not None]
    ph = [d.endpoint_value for s, d in zip(steps, done, strict=True) if s.endpoint == "ph"]
    cond = [d.endpoint_value for s, d in zip(steps, done, strict=True)
            if s.endpoint == "conductivity"]  # fmt: skip
    lots = [p[1] for p in parsed if p[1]]
    return {
        "agent": " → ".join(agents),
        "concentration": (done[main].concentration or 0.0) if main is not None else 0.0,
        "concentration_unit": steps[main].concentration_unit if main is not None else "",
        "temperature_k": (done[main].temperature_k if main is not None else None)
        or (max(temps) if temps else 293.15),
        "contact_time_s": sum(d.contact_time_s or 0.0 for d in done),
        "reagent_lot": ", ".join(lots) or "—",
        "rinse_ph": ph[-1] if ph else None,
        "rinse_conductivity_s_m": cond[-1] if cond else None,
    }


def steps_of(session: Session, cleaning_id: int) -> list[CleaningStep]:
    """The steps of a cleaning cycle in order ([] for a one-agent cleaning)."""
    return list(
        session.exec(
            select(CleaningStep)
            .where(CleaningStep.cleaning_id == cleaning_id)
            .order_by(col(CleaningStep.number))
        )
    )


def procedure_of(session: Session, cleaning: Cleaning) -> TemplateVersion | None:
    """The procedure version a cycle was recorded under (None for a one-agent cleaning)."""
    if cleaning.procedure_version_id is None:
        return None
    return session.get(TemplateVersion, cleaning.procedure_version_id)
