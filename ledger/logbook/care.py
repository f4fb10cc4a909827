"""Cleanings and storage periods."""

from __future__ import annotations

from dataclasses import dataclass, replace
from datetime import datetime

from sqlmodel import Session

from ledger.errors import InputError
from ledger.logbook.context import apply, begin
from ledger.logbook.procedures import as_rule, get_procedure
from ledger.logbook.required import optional, positive, required
from ledger.rules.cleaning import Done, deviations
from ledger.rules.sequence import after_cleaning
from ledger.science.water import T_MAX, T_MIN
from ledger.store.tables import Cleaning, Storage, UserAccount

CONCENTRATION_UNITS = ("mol/m**3", "kg/m**3", "")


@dataclass(frozen=True)
class CleaningInput:
    """A cleaning in SI: concentration in mol/m³, kg/m³ or as a fraction ("" unit)."""

    agent: str
    concentration: float
    concentration_unit: str
    temperature_k: float
    contact_time_s: float
    reagent_lot: str
    rinse_ph: float | None = None
    rinse_conductivity_s_m: float | None = None
    entered: dict[str, str] | None = None  # field -> text as typed ("0.5 M"), shown as is


def _check(c: CleaningInput) -> CleaningInput:
    """``c`` with its texts cleaned by their rules; InputError on any value out of range."""
    c = replace(
        c,
        agent=required("agent", c.agent, "the agent's name, e.g. sodium hydroxide"),
        reagent_lot=required("reagent_lot", c.reagent_lot,
                             "the lot number of the cleaning solution", kind="identifier"),
    )  # fmt: skip
    if c.concentration_unit not in CONCENTRATION_UNITS:
        raise ValueError(f"unknown concentration unit {c.concentration_unit!r}")  # a bug
    positive("concentration", c.concentration, "e.g. 0.5 mol/L, 10 g/L or 0.1 %")
    if not T_MIN <= c.temperature_k <= T_MAX:
        raise InputError(
            f"cleaning temperature {c.temperature_k - 273.15:.1f} °C is out of range",
            field="temperature",
            value=c.temperature_k,
            expected="an aqueous cleaning between 0 and 100 °C",
        )
    positive("contact_time", c.contact_time_s, "a time above zero, e.g. 60 min")
    if c.rinse_ph is not None and not 0 <= c.rinse_ph <= 14:
        raise InputError(
            f"rinse pH {c.rinse_ph} is out of range",
            field="rinse_ph",
            value=c.rinse_ph,
            expected="a pH from 0 to 14",
        )
    if c.rinse_conductivity_s_m is not None and c.rinse_conductivity_s_m < 0:
        raise InputError(
            "the rinse conductivity cannot be negative",
            field="rinse_conductivity",
            value=c.rinse_conductivity_s_m,
            expected="zero or more, e.g. 1.5 uS/cm",
        )
    return c


def record_cleaning(
    session: Session,
    actor: UserAccount,
    serial: str,
    c: CleaningInput,
    *,
    procedure: str | None = None,
    activity_at: datetime | None = None,
    note: str | None = None,
) -> tuple[Cleaning, str | None]:
    """Record a cleaning; with ``procedure`` (a code), check it against that procedure's ranges:
    a cleaning outside them holds the module until a signed disposition."""
    work = begin(session, actor, serial, "cleaning", activity_at)
    c = _check(c)
    note = optional("note", note, "a note on the cleaning")
    found: list[str] | None = None
    proc_id = None
    if procedure is not None:
        proc = get_procedure(session, procedure)
        proc_id = proc.id
        done = Done(c.agent, c.concentration, c.concentration_unit, c.temperature_k,
                    c.contact_time_s, c.rinse_ph, c.rinse_conductivity_s_m)  # fmt: skip
        found = deviations(done, as_rule(proc))
    cleaning = work.journal.create(
        Cleaning(
            module_id=work.module_id,
            activity_at=work.at,
            late=work.late,
            note=note,
            procedure_id=proc_id,
            deviations=found,
            **c.__dict__,
        )
    )
    step = after_cleaning(work.module.status, found)
    return cleaning, apply(work, step, ("cleaning", cleaning.id))


def record_storage(
    session: Session,
    actor: UserAccount,
    serial: str,
    solution: str,
    *,
    activity_at: datetime | None = None,
    note: str | None = None,
) -> Storage:
    work = begin(session, actor, serial, "storage", activity_at)
    solution = required("solution", solution, "e.g. 20 % ethanol, or 0.1 M sodium hydroxide")
    note = optional("note", note, "a note on the storage")
    return work.journal.create(
        Storage(
            module_id=work.module_id,
            activity_at=work.at,
            late=work.late,
            note=note,
            solution=solution,
        )
    )
