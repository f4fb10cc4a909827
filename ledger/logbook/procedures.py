"""Validated cleaning procedures: the ranges a cleaning is checked against (engineer or QA)."""

from __future__ import annotations

from dataclasses import dataclass, replace

from sqlmodel import Session, select

from ledger.errors import InputError
from ledger.logbook.auth import DECIDERS, require_role
from ledger.logbook.required import new_identifier, positive, required
from ledger.rules.cleaning import Procedure
from ledger.rules.names import shown
from ledger.science.water import T_MAX, T_MIN
from ledger.store.audit import Journal
from ledger.store.tables import CleaningProcedure, UserAccount


@dataclass(frozen=True)
class ProcedureSpec:
    """A procedure as entered, in SI (concentrations in ``concentration_unit``)."""

    code: str
    title: str
    agent: str
    concentration_min: float
    concentration_max: float
    concentration_unit: str
    temperature_min_k: float
    temperature_max_k: float
    contact_time_min_s: float
    rinse_ph_min: float | None = None
    rinse_ph_max: float | None = None
    rinse_conductivity_max_s_m: float | None = None
    entered: dict[str, str] | None = None  # field -> text as typed ("0.5 M"), shown as is


def _ordered(field: str, low: float, high: float, what: str) -> None:
    if low > high:
        raise InputError(f"the {field} range is reversed ({low:g} > {high:g})",
                         field=f"{field}_min", value=low, expected=what)  # fmt: skip


def check_procedure(p: ProcedureSpec) -> ProcedureSpec:
    """``p`` with its texts cleaned by their rules; InputError on any value out of range."""
    p = replace(
        p,
        code=required("code", p.code, "a short code, e.g. CP-NAOH-05", kind="identifier"),
        title=required("title", p.title, "what the procedure is called in the site's SOP"),
        agent=required("agent", p.agent, "the agent's name, e.g. sodium hydroxide"),
    )
    positive("concentration_min", p.concentration_min, "a concentration above zero",
             label="minimum concentration")  # fmt: skip
    _ordered("concentration", p.concentration_min, p.concentration_max, "minimum ≤ maximum")
    for field, value in (("temperature_min", p.temperature_min_k),
                         ("temperature_max", p.temperature_max_k)):  # fmt: skip
        if not T_MIN <= value <= T_MAX:
            raise InputError(
                f"{value - 273.15:.1f} °C is out of range",
                field=field,
                value=value,
                expected="an aqueous cleaning between 0 and 100 °C",
            )
    _ordered("temperature", p.temperature_min_k, p.temperature_max_k, "minimum ≤ maximum")
    positive("contact_time_min", p.contact_time_min_s, "a time above zero, e.g. 60 min",
             label="minimum contact time")  # fmt: skip
    for field, ph in (("rinse_ph_min", p.rinse_ph_min), ("rinse_ph_max", p.rinse_ph_max)):
        if ph is not None and not 0 <= ph <= 14:
            raise InputError(
                f"pH {ph:g} is out of range",
                field=field,
                value=ph,
                expected="a pH from 0 to 14",
            )
    if p.rinse_ph_min is not None and p.rinse_ph_max is not None:
        _ordered("rinse_ph", p.rinse_ph_min, p.rinse_ph_max, "minimum ≤ maximum")
    if p.rinse_conductivity_max_s_m is not None:
        positive(
            "rinse_conductivity_max",
            p.rinse_conductivity_max_s_m,
            "a conductivity above zero, e.g. 2 uS/cm",
            label="rinse conductivity limit",
        )
    return p


def add_procedure(session: Session, actor: UserAccount, spec: ProcedureSpec) -> CleaningProcedure:
    require_role(actor, DECIDERS, "define cleaning procedures")
    spec = check_procedure(spec)

    def taken(found: str) -> InputError:
        return InputError(
            f"cleaning procedure {shown(found)} exists",
            field="code",
            value=spec.code,
            expected="a new procedure code (codes differing only in case are the same)",
        )

    with new_identifier(session, CleaningProcedure.code, spec.code, taken):
        return Journal(session, actor.login).create(CleaningProcedure(**spec.__dict__))


def get_procedure(session: Session, code: str) -> CleaningProcedure:
    found = session.exec(select(CleaningProcedure).where(CleaningProcedure.code == code)).first()
    if found is None:
        known = ", ".join(p.code for p in list_procedures(session)) or "none yet"
        raise InputError(
            f"no cleaning procedure {shown(code)}",
            field="procedure",
            value=shown(code),
            expected=f"a registered procedure ({known})",
        )
    return found


def list_procedures(session: Session) -> list[CleaningProcedure]:
    return list(session.exec(select(CleaningProcedure).order_by(CleaningProcedure.code)))


def as_rule(p: CleaningProcedure) -> Procedure:
    """The stored procedure as the plain values the cleaning rule takes."""
    return Procedure(
        code=p.code, agent=p.agent, concentration_min=p.concentration_min,
        concentration_max=p.concentration_max, concentration_unit=p.concentration_unit,
        temperature_min_k=p.temperature_min_k, temperature_max_k=p.temperature_max_k,
        contact_time_min_s=p.contact_time_min_s, rinse_ph_min=p.rinse_ph_min,
        rinse_ph_max=p.rinse_ph_max, rinse_conductivity_max_s_m=p.rinse_conductivity_max_s_m,
    )  # fmt: skip
