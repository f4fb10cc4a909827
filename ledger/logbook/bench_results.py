"""What a bench record shows once it is written: the values a front end puts on its result
page (the web's forms), in the same units as the CLI's one-line outcome (a value as typed,
else the one unit typed for its kind in the record, else the site's display unit, else the
kind's), with the module's status after it, the status note and the agent's caution.

Also the units a form suggests for each kind of quantity: names only, for the web, which
may not import :mod:`ledger.units`; tests/web/test_module_forms.py checks that the entries
accept every one of them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlmodel import Session

from ledger import units
from ledger.audittext import entered_key, typed_units
from ledger.logbook.site import caution_of, display_units
from ledger.store.tables import Cleaning, IntegrityTest, Module, ModuleUse, Storage, WaterFluxTest

# Units offered while a quantity is typed (pint spellings that ledger.units parses).
UNIT_SUGGESTIONS: dict[str, tuple[str, ...]] = {
    "pressure": ("psi", "bar", "kPa", "mbar"),
    "flow": ("mL/min", "L/min", "L/h"),
    "volume": ("mL", "L"),
    "time": ("s", "min", "h"),
    "temperature": ("degC", "K"),
    "concentration": ("mol/L", "mM", "%", "g/L", "mg/L"),
    "conductivity": ("uS/cm", "mS/cm"),
}

SAFETY_NOTE = "Follow your site's safety procedure."


def unit_suggestions() -> dict[str, tuple[str, ...]]:
    """Kind -> the units a form offers for it, most used first."""
    return dict(UNIT_SUGGESTIONS)


@dataclass(frozen=True)
class Shown:
    """One recorded value as people read it: ``text`` ("12 psi", "325.4 LMH/bar"), and the
    number and unit it shows (None for a text value)."""

    label: str
    text: str
    value: float | None = None
    unit: str | None = None


@dataclass(frozen=True)
class BenchResult:
    """A record just written: what it is, its values, the module's status after it."""

    what: str  # "water-flux test", "integrity test", "cleaning", "storage", "use"
    record_id: int
    serial: str
    values: dict[str, Shown]
    status: str  # the module's status now
    status_note: str | None  # what the record did to the status (a hold, available...)
    verdict: str | None  # pass, alert, fail (water); pass, FAIL (integrity)
    caution: str | None  # the agents' hazard cautions (cleaning, storage), one a line
    late: bool
    line: str  # one line, as the CLI prints it


def _status(session: Session, module_id: int) -> tuple[str, str]:
    module = session.get(Module, module_id)
    assert module is not None
    return module.serial, module.status


def _quantity(
    rec: Any,
    column: str,
    kind: str,
    label: str,
    site: dict[str, str],
    default: str | None = None,
    unit: str | None = None,
) -> Shown | None:
    """A stored SI column shown as the CLI shows it (as typed, else in the unit chosen)."""
    value = getattr(rec, column)
    if value is None:
        return None
    text = (getattr(rec, "entered", None) or {}).get(entered_key(column))
    if text:
        shown_unit = units.entered_unit(str(text))
        number = units.from_si(float(value), kind, shown_unit) if shown_unit else float(value)
        return Shown(label, units.shown(float(value), kind, entered=str(text)), number, shown_unit)
    if unit is None:
        columns = {c.name: getattr(rec, c.name) for c in rec.__table__.columns}
        typed = typed_units(columns).get(kind, [])
        if default is not None and not typed and not site.get(kind):
            unit = default
        else:
            unit = units.display_unit(kind, site, typed)
    number = units.from_si(float(value), kind, unit)
    spelled = units.SPELLED.get(unit, unit)
    return Shown(label, f"{units.significant(number, 4)} {spelled}", number, unit)


def _text(label: str, value: object) -> Shown | None:
    return None if value is None or value == "" else Shown(label, str(value))


def _pct(label: str, fraction: float | None) -> Shown | None:
    if fraction is None:
        return None
    return Shown(label, f"{100 * fraction:.1f} %", 100 * fraction, "percent")


def _values(*shown: tuple[str, Shown | None]) -> dict[str, Shown]:
    return {k: v for k, v in shown if v is not None}


def water_result(session: Session, test: WaterFluxTest, note: str | None) -> BenchResult:
    """A recorded water-flux test: NWP at T_ref, TMP, flux, r², recovery against baseline,
    verdict, and the module's status."""
    site = display_units(session)
    serial, status = _status(session, test.module_id)
    v = _values(
        ("nwp", _quantity(test, "nwp_m_s_pa", "permeability", "NWP at T_ref", site)),
        ("reference_temperature",
         _quantity(test, "reference_temperature_k", "temperature", "Reference temperature", site)),
        ("temperature", _quantity(test, "temperature_k", "temperature", "Water temperature", site)),
        ("tmp", _quantity(test, "tmp_pa", "pressure", "TMP", site)),
        ("flux", _quantity(test, "flux_m_s", "flux", "Flux", site)),
        ("r_squared", None if test.r_squared is None
         else Shown("r²", f"{test.r_squared:.4f}", test.r_squared)),
        ("recovery", _pct("Recovery against baseline", test.recovery)),
        ("points", Shown("Points", str(len(test.points)), float(len(test.points)))),
    )  # fmt: skip
    line = (
        f"water-flux test {test.id} ({test.stage.replace('_', '-')}): NWP {v['nwp'].text} at "
        f"{v['reference_temperature'].text}, TMP {v['tmp'].text}, flux {v['flux'].text}"
    )
    if "r_squared" in v:
        line += f", r² {v['r_squared'].text}"
    if "recovery" in v:
        line += f"; {v['recovery'].text} of baseline"
    if test.verdict:
        line += f" — {test.verdict}"
    return _done("water-flux test", test, serial, v, status, note, test.verdict, None, line)


def _rate_unit(test: IntegrityTest, site: dict[str, str]) -> str:
    """A decay rate in the units typed for its pressures and hold ("psi" and "min" ->
    "psi/min"), else the site's or the kind's display unit."""
    table: Any = test.__table__  # type: ignore[attr-defined]
    typed = typed_units({c.name: getattr(test, c.name) for c in table.columns})
    pressures = set(typed.get("pressure", []))
    if len(pressures) == 1:
        times = set(typed.get("time", [])) or {"min"}
        rate = f"{pressures.pop()}/{times.pop() if len(times) == 1 else 'min'}"
        return units.display_unit("pressure_rate", site, [rate])
    return units.display_unit("pressure_rate", site, [])


def integrity_result(session: Session, test: IntegrityTest, note: str | None) -> BenchResult:
    """A recorded integrity test: its measured value against its limit, pass or FAIL."""
    site = display_units(session)
    serial, status = _status(session, test.module_id)
    verdict = "pass" if test.passed else "FAIL"
    kind = test.kind.replace("_", " ")
    pressure = _quantity(test, "test_pressure_pa", "pressure", "Test pressure", site, "psi")
    if test.kind == "bubble_point":
        measured = _quantity(test, "bubble_point_pa", "pressure", "Bubble point", site, "psi")
        unit = site.get("pressure") or "psi"
        limit = _quantity(test, "limit_value", "pressure", "Minimum", site, unit=unit)
    elif test.kind in ("diffusion", "water_intrusion"):
        column = "gas_flow_m3_s" if test.kind == "diffusion" else "intrusion_flow_m3_s"
        measured = _quantity(test, column, "flow", "Flow", site)
        limit = _quantity(test, "limit_value", "flow", "Limit", site,
                          unit=measured.unit if measured else None)  # fmt: skip
    else:
        rate = _rate_unit(test, site)
        measured = _quantity(test, "decay_rate_pa_s", "pressure_rate", "Decay rate", site,
                             unit=rate)  # fmt: skip
        limit = _quantity(test, "limit_value", "pressure_rate", "Limit", site, unit=rate)
    v = _values(
        ("measured", measured),
        ("limit", limit),
        ("test_pressure", pressure),
        ("gas_flow", _quantity(test, "gas_flow_m3_s", "gas_flow", "Gas flow", site)
         if test.kind == "pressure_decay" else None),
    )  # fmt: skip
    parts = [f"integrity test {test.id} ({kind}): {measured.text if measured else '—'}"]
    if pressure is not None and test.kind != "bubble_point":
        parts.append(f" at {pressure.text}")
    if limit is not None:
        parts.append(f", {'minimum' if test.kind == 'bubble_point' else 'limit'} {limit.text}")
    line = "".join(parts) + f" — {verdict}"
    return _done("integrity test", test, serial, v, status, note, verdict, None, line)


def cleaning_result(session: Session, cleaning: Cleaning, note: str | None) -> BenchResult:
    """A recorded cleaning: its agent and conditions, any departure from the procedure, and
    the agent's hazard caution."""
    site = display_units(session)
    serial, status = _status(session, cleaning.module_id)
    entered = cleaning.entered or {}
    strength = entered.get("concentration") or units.significant(cleaning.concentration, 4)
    v = _values(
        ("agent", _text("Agent", cleaning.agent)),
        ("concentration", _text("Concentration", strength)),
        ("temperature", _quantity(cleaning, "temperature_k", "temperature", "Temperature", site)),
        ("contact_time", _quantity(cleaning, "contact_time_s", "time", "Contact time", site)),
        ("reagent_lot", _text("Reagent lot", cleaning.reagent_lot)),
        ("rinse_ph", _text("Final rinse pH", cleaning.rinse_ph)),
        ("rinse_conductivity", _quantity(cleaning, "rinse_conductivity_s_m", "conductivity",
                                         "Final rinse conductivity", site)),
        ("deviations", None if cleaning.deviations is None else Shown(
            "Against the procedure", "; ".join(cleaning.deviations) or "follows it")),
    )  # fmt: skip
    line = f"cleaning {cleaning.id} recorded for {serial}"
    if cleaning.deviations:
        line += "; " + "; ".join(cleaning.deviations)
    caution = caution_of(session, cleaning.agent)
    return _done("cleaning", cleaning, serial, v, status, note, None, caution, line)


def storage_result(session: Session, storage: Storage) -> BenchResult:
    """A storage period just started, with its solution's hazard caution."""
    serial, status = _status(session, storage.module_id)
    v = _values(("solution", _text("Storage solution", storage.solution)))
    line = f"storage {storage.id} started for {serial} in {storage.solution}"
    caution = caution_of(session, storage.solution)
    return _done("storage", storage, serial, v, status, None, None, caution, line)


def use_result(session: Session, use: ModuleUse, ended: bool) -> BenchResult:
    """A use just started or ended."""
    serial, status = _status(session, use.module_id)
    v = _values(("product", _text("Product", use.product)), ("lot", _text("Lot", use.lot)),
                ("override_reason", _text("Override reason", use.override_reason)))  # fmt: skip
    if ended:
        line = f"use {use.id} ended: {serial} is awaiting cleaning"
    else:
        line = f"use {use.id} started: {serial} for {use.product} lot {use.lot}"
    return _done("use", use, serial, v, status, None, None, None, line)


def _done(
    what: str,
    rec: Any,
    serial: str,
    values: dict[str, Shown],
    status: str,
    note: str | None,
    verdict: str | None,
    caution: str | None,
    line: str,
) -> BenchResult:
    late = bool(getattr(rec, "late", False))
    if late:
        line += " (late entry)"
    return BenchResult(what, int(rec.id), serial, values, status, note, verdict, caution,
                       late, line)  # fmt: skip


# A cleaning cycle: the steps a form asks for, and what was recorded --------------------------

# What each value of a cycle step is, for its label and its unit suggestions ("" : text).
_STEP_VALUES = {
    "solution": ("Prepared solution (code)", ""),
    "concentration": ("Concentration", "concentration"),
    "temperature": ("Temperature", "temperature"),
    "contact_time": ("Contact time", "time"),
    "flow": ("Flow", "flow"),
    "tmp": ("TMP", "pressure"),
}
_ENDPOINTS = {
    "ph": ("Endpoint: pH", ""),
    "conductivity": ("Endpoint: conductivity", "conductivity"),
    "toc": ("Endpoint: TOC", "concentration"),
    "volume": ("Endpoint: volume", "volume"),
}


@dataclass(frozen=True)
class StepValue:
    """One value a cycle step asks for: its name in ``--value N.NAME``, label, unit kind."""

    key: str  # "2.temperature"
    name: str
    label: str
    kind: str
    required: bool = True  # a step's strength may come from its verified solution instead


@dataclass(frozen=True)
class CycleStepForm:
    number: int
    name: str
    agent: str
    values: tuple[StepValue, ...]
    caution: str | None


@dataclass(frozen=True)
class CycleForm:
    """The version of a cleaning-cycle procedure in force now, as a form's steps."""

    procedure: str
    version: str
    title: str
    steps: tuple[CycleStepForm, ...]


def cycle_procedures(session: Session) -> list[str]:
    """The IDs of the cleaning-cycle procedures with a version in force now."""
    from ledger.logbook.cycles import catalogue

    return sorted({line.record.template_id for line in catalogue(session)
                   if line.status == "effective"})  # fmt: skip


def cycle_form(session: Session, procedure: str) -> CycleForm:
    """The steps of ``procedure``'s version in force now and the values each one takes
    (InputError naming ``procedure`` when none is in force)."""
    from ledger.errors import LedgerError
    from ledger.logbook.cycles import in_force
    from ledger.store.types import utc_now

    try:
        proc = in_force(session, procedure.strip(), utc_now())
    except LedgerError as err:
        err.field = "procedure"
        raise
    steps = []
    for n, spec in enumerate(proc.steps, start=1):
        values = []
        for name in spec.needs():
            label, kind = _STEP_VALUES.get(name) or _ENDPOINTS[spec.endpoint or "ph"]
            optional = name == "concentration" and spec.needs_solution
            values.append(StepValue(f"{n}.{name}", name, label, kind, not optional))
        steps.append(CycleStepForm(n, spec.name, spec.agent, tuple(values),
                                   caution_of(session, spec.agent)))  # fmt: skip
    return CycleForm(proc.id, proc.version, proc.title, tuple(steps))


def cycle_cell(field: str | None, value: object, message: str) -> str | None:
    """The ``N.NAME`` a cycle error is about (its field, value or message names it), so a
    form shows the error beside that step's value; None for an error of the whole cycle."""
    import re

    for text in (field or "", value if isinstance(value, str) else "", message):
        found = re.search(r"(?:^|--value )(\d+\.[a-z_]+)", text)
        if found:
            return found.group(1)
    return None


def cycle_result(
    session: Session, cleaning: Cleaning, steps: list[Any], note: str | None
) -> BenchResult:
    """A recorded cleaning cycle: each step as typed with its departures, every agent's
    caution once."""
    serial, status = _status(session, cleaning.module_id)
    values: dict[str, Shown] = {}
    cautions: list[str] = []
    for s in steps:
        row = s.row
        typed = ", ".join(f"{k.replace('_', ' ')} {t}" for k, t in (row.entered or {}).items())
        if row.solution_code:
            typed = f"solution {row.solution_code}" + (f", {typed}" if typed else "")
        text = typed or "done"
        if row.departures:
            text += " — " + "; ".join(row.departures)
        values[f"step_{row.number}"] = Shown(f"Step {row.number}: {row.name} ({row.agent})", text)
        if s.caution and s.caution not in cautions:
            cautions.append(s.caution)
    if cleaning.deviations is not None:
        values["deviations"] = Shown("Against the procedure",
                                     "; ".join(cleaning.deviations) or "follows it")  # fmt: skip
    line = f"cleaning cycle {cleaning.id} recorded for {serial}: {len(steps)} steps"
    if cleaning.deviations:
        line += "; " + "; ".join(cleaning.deviations)
    return _done("cleaning cycle", cleaning, serial, values, status, note, None,
                 "\n".join(cautions) or None, line)  # fmt: skip
