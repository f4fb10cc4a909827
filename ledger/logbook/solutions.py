"""Prepared solutions: a cleaning or storage solution made up and verified before it is used.

A solution is registered when it is prepared (agent, target strength, reagent lot and its
expiry, use-by) and verified before use: by a conductivity reading against a stated
calibration (sodium hydroxide only, through ``ledger.science.conductivity``: the CRC table of
NaOH conductivity at 20 °C) or by a titration result. A cleaning-cycle step that asks for a
solution names it, and ``usable_solution`` refuses one that is unknown, void, of another
agent, not verified, not yet prepared, past its use-by or made from an expired reagent.

Times are aware UTC datetimes; a reagent's expiry is a calendar date, and a solution is
usable through the whole of that date (UTC). Strengths are SI values in the solution's
``concentration_unit`` (mol/m³, kg/m³, or "" for a fraction).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from datetime import date, datetime
from typing import Any

from sqlmodel import Session, col, select

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import RECORDERS, require_role
from ledger.logbook.required import existing, new_identifier, optional, required
from ledger.logbook.times import activity_time
from ledger.rules.hazards import key as agent_key
from ledger.store.audit import Journal
from ledger.store.tables import PreparedSolution, UserAccount

METHODS = ("conductivity", "titration")
# The agent names the NaOH conductivity table applies to (after ``hazards.key``).
_NAOH = ("sodium hydroxide", "naoh")
UNIT_WORDS = {"mol/m**3": "mol/m³", "kg/m**3": "kg/m³", "": "fraction"}


@dataclass(frozen=True)
class Preparation:
    """A solution as prepared: ``target`` SI value in ``unit``; ``entered`` the texts typed."""

    code: str
    agent: str
    target: float
    unit: str
    reagent_lot: str
    reagent_expiry: date
    use_by: datetime
    prepared_at: datetime | None = None
    note: str | None = None
    entered: Mapping[str, str] | None = None


@dataclass(frozen=True)
class Verification:
    """How a solution was verified. ``method`` conductivity: ``conductivity_s_m`` (S/m) read
    at ``temperature_k`` (K) with the meter's ``calibration`` stated; titration:
    ``titrated`` (SI value in ``unit``) and the ``calibration`` naming the titrant."""

    method: str
    calibration: str
    conductivity_s_m: float | None = None
    temperature_k: float | None = None
    titrated: float | None = None
    unit: str | None = None
    verified_at: datetime | None = None
    entered: Mapping[str, str] | None = None


def is_naoh(agent: str) -> bool:
    """Whether the NaOH conductivity table applies to ``agent``."""
    k = agent_key(agent)
    return k in _NAOH or "sodium hydroxide" in k


def find(session: Session, code: str) -> PreparedSolution | None:
    """The solution with ``code`` (ignoring case), or None."""
    stored = existing(session, col(PreparedSolution.code), code)
    if stored is None:
        return None
    return session.exec(select(PreparedSolution).where(PreparedSolution.code == stored)).one()


def get(session: Session, code: str, *, field: str = "code") -> PreparedSolution:
    """The solution with ``code``; InputError naming ``field`` when there is none."""
    found = find(session, code)
    if found is None:
        raise InputError(
            f"no prepared solution {code!r}",
            field=field,
            value=code,
            expected="the code of a solution from `fluxledger care solution list`",
        )
    return found


def prepare(session: Session, actor: UserAccount, p: Preparation) -> PreparedSolution:
    """Register a prepared solution (the actor prepared it). Refused: a code in use, a
    reagent already expired on the day of preparation, a use-by before the preparation or
    after the reagent's expiry."""
    require_role(actor, RECORDERS, "record prepared solutions")
    code = required("code", p.code, "the solution's code, e.g. SOL-NAOH-0412", kind="identifier")
    agent = required("agent", p.agent, "the agent, e.g. 'sodium hydroxide'")
    lot = required("reagent_lot", p.reagent_lot, "the reagent's lot", kind="identifier")
    note = optional("note", p.note, "a note on the solution")
    if not p.target > 0:
        raise InputError(
            f"--target {p.target!r} is not above zero",
            field="target",
            value=p.target,
            expected="the strength the solution is made up to, e.g. '0.5 mol/L'",
        )
    journal = Journal(session, actor.login)
    at, _late = activity_time(p.prepared_at, journal.at)
    if p.reagent_expiry < at.date():
        raise RefusedError(
            f"reagent lot {lot} expired on {p.reagent_expiry.isoformat()}, before the "
            f"solution was prepared ({at.date().isoformat()}); nothing was written",
            field="reagent_expiry",
            value=p.reagent_expiry.isoformat(),
        )
    if p.use_by <= at:
        raise InputError(
            f"--use-by {p.use_by.isoformat()} is not after the preparation ({at.isoformat()})",
            field="use_by",
            value=p.use_by.isoformat(),
            expected=f"a time after {at.isoformat()}",
        )
    if p.use_by.date() > p.reagent_expiry:
        raise InputError(
            f"--use-by {p.use_by.isoformat()} is after the reagent's expiry "
            f"({p.reagent_expiry.isoformat()})",
            field="use_by",
            value=p.use_by.isoformat(),
            expected=f"a time on or before {p.reagent_expiry.isoformat()}",
        )

    def taken(found: str) -> InputError:
        return InputError(
            f"a solution {found!r} is recorded already",
            field="code",
            value=code,
            expected="a new solution code",
        )

    with new_identifier(session, col(PreparedSolution.code), code, taken):
        return journal.create(
            PreparedSolution(
                code=code,
                agent=agent,
                target_concentration=p.target,
                concentration_unit=p.unit,
                reagent_lot=lot,
                reagent_expiry=p.reagent_expiry,
                prepared_by=actor.login,
                prepared_at=at,
                use_by=p.use_by,
                note=note,
                entered=dict(p.entered) if p.entered else None,
            )
        )


def _measured(row: PreparedSolution, v: Verification) -> tuple[float, dict[str, Any]]:
    """The verified strength (SI, in the solution's unit) and what it was verified with."""
    from ledger.science.conductivity import naoh_from_conductivity

    if v.method == "conductivity":
        if not is_naoh(row.agent):
            raise InputError(
                f"solution {row.code} is {row.agent}: a conductivity reading gives a strength "
                "for sodium hydroxide only (the CRC table); verify it by titration",
                field="conductivity",
                value=row.agent,
                expected="--titration with the titrated strength",
            )
        assert v.conductivity_s_m is not None and v.temperature_k is not None
        c = naoh_from_conductivity(v.conductivity_s_m, v.temperature_k)
        by_unit = {"mol/m**3": c.molarity_mol_m3, "kg/m**3": c.mass_concentration_kg_m3,
                   "": c.mass_fraction}  # fmt: skip
        detail = {
            "conductivity_s_m": v.conductivity_s_m,
            "temperature_k": v.temperature_k,
            "conductivity_20c_s_m": c.conductivity_20c_s_m,
            "mass_fraction": c.mass_fraction,
            "table": "CRC Handbook, NaOH at 20 °C",
        }
        return by_unit[row.concentration_unit], detail
    assert v.titrated is not None
    if not v.titrated > 0:
        raise InputError(f"--titration {v.titrated!r} is not above zero", field="titration",
                         value=v.titrated, expected="the titrated strength")  # fmt: skip
    if v.unit != row.concentration_unit:
        raise InputError(
            f"--titration is a {UNIT_WORDS.get(v.unit or '', v.unit)}, but solution {row.code} "
            f"was made up as a {UNIT_WORDS.get(row.concentration_unit)}",
            field="titration",
            value=v.titrated,
            expected=f"a strength of the kind of the target ({UNIT_WORDS[row.concentration_unit]})",
        )
    return v.titrated, {"titrated": v.titrated}


def verify(session: Session, actor: UserAccount, code: str, v: Verification) -> PreparedSolution:
    """Record a solution's verification (once; a second is refused: prepare a new solution).
    The verified strength is stored beside the target; whether it is acceptable is decided
    where it is used, against the procedure step's concentration range."""
    require_role(actor, RECORDERS, "verify prepared solutions")
    if v.method not in METHODS:
        raise InputError(f"verification method {v.method!r} is unknown", field="method",
                         value=v.method, expected=" or ".join(METHODS))  # fmt: skip
    calibration = required(
        "calibration", v.calibration,
        "the meter's calibration (cell constant, standard, date) or the titrant and its lot",
    )  # fmt: skip
    row = get(session, code)
    if row.voided_at is not None:
        raise RefusedError(f"solution {row.code} is void; nothing was written", field="code",
                           value=code)  # fmt: skip
    if row.verified_at is not None:
        raise RefusedError(
            f"solution {row.code} was verified already ({row.verified_at.isoformat()}, by "
            f"{row.verified_by}); a solution is verified once",
            field="code",
            value=code,
        )
    journal = Journal(session, actor.login)
    at, _late = activity_time(v.verified_at, journal.at)
    if at < row.prepared_at:
        raise InputError(
            f"verification time {at.isoformat()} is before the solution was prepared "
            f"({row.prepared_at.isoformat()})",
            field="activity_time",
            value=at.isoformat(),
            expected=f"a time after {row.prepared_at.isoformat()}",
        )
    value, detail = _measured(row, v)
    detail["calibration"] = calibration
    if v.entered:
        detail["entered"] = dict(v.entered)
    journal.change(
        row,
        {"verified_concentration": value, "verification_method": v.method,
         "verification": detail, "verified_by": actor.login, "verified_at": at},
        reason=f"verified by {v.method}",
    )  # fmt: skip
    return row


def usable_solution(
    session: Session, code: str, at: datetime, agent: str, *, field: str = "solution"
) -> PreparedSolution:
    """The solution ``code`` if it may be used at ``at`` for ``agent``; else refused with the
    reason (unknown, void, another agent, not verified, used before it was prepared or
    verified, past its use-by, its reagent expired)."""
    row = get(session, code, field=field)

    def refuse(why: str) -> RefusedError:
        return RefusedError(f"solution {row.code} {why}; nothing was written", field=field,
                            value=code)  # fmt: skip

    if row.voided_at is not None:
        raise refuse("is void")
    if agent_key(row.agent) != agent_key(agent):
        raise refuse(f"is {row.agent}, but the step's agent is {agent}")
    if row.verified_at is None or row.verified_concentration is None:
        raise refuse(f"is not verified (`fluxledger care solution verify {row.code}`)")
    if at < row.verified_at:
        raise refuse(f"was verified at {row.verified_at.isoformat()}, after {at.isoformat()}")
    if at > row.use_by:
        raise refuse(f"expired at {row.use_by.isoformat()} (its use-by)")
    if at.date() > row.reagent_expiry:
        raise refuse(f"is made from reagent lot {row.reagent_lot}, expired on "
                     f"{row.reagent_expiry.isoformat()}")  # fmt: skip
    return row


def state_of(row: PreparedSolution, at: datetime) -> str:
    """One word for a solution at ``at``: void, expired, unverified or usable."""
    if row.voided_at is not None:
        return "void"
    if at > row.use_by or at.date() > row.reagent_expiry:
        return "expired"
    if row.verified_at is None:
        return "unverified"
    return "usable"


def list_solutions(
    session: Session, at: datetime | None = None
) -> list[tuple[PreparedSolution, str]]:
    """Every prepared solution, newest first, with its state (:func:`state_of`) at ``at``
    (default: now)."""
    from ledger.store.types import utc_now

    when = at or utc_now()
    rows = session.exec(select(PreparedSolution).order_by(col(PreparedSolution.prepared_at).desc()))
    return [(r, state_of(r, when)) for r in rows]
