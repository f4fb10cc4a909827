"""Module types and modules: register, look up, hold, disposition, retire."""

from __future__ import annotations

from dataclasses import dataclass, replace
from datetime import date
from typing import Any

from sqlmodel import Session, select

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import DECIDERS, RECORDERS, require_role
from ledger.logbook.required import new_identifier, optional, positive, required
from ledger.rules.geometry import area_message, check_area
from ledger.rules.names import shown
from ledger.rules.sequence import refusal
from ledger.science.hydraulics import lumen_area
from ledger.science.water import T_MAX, T_MIN
from ledger.store.audit import Journal
from ledger.store.tables import Hold, Module, ModuleType, UserAccount


@dataclass(frozen=True)
class TypeSpec:
    """A module type as entered, in SI units and fractions."""

    code: str
    membrane: str
    pore_rating: str
    lumen_diameter_m: float
    fiber_count: int
    effective_length_m: float
    area_m2: float | None  # None: the inner lumen area (fibers × π × lumen diameter × length)
    decay_limit_pa_s: float
    integrity_test_pressure_pa: float
    reuse_limit_cycles: int
    storage_limit_s: float
    supplier: str | None = None
    bubble_point_min_pa: float | None = None
    reference_temperature_k: float = 293.15
    recovery_min: float = 0.80
    recovery_alert: float = 0.90
    damage_ratio: float = 1.20
    preuse_band: float = 0.10
    max_volume_loading_m: float | None = None  # m³ of feed per m² of membrane
    max_mass_loading_kg_m2: float | None = None
    clean_hold_s: float | None = None  # pre-use tests older than this must be repeated
    diffusion_max_flow_m3_s: float | None = None  # diffusion limit (m³/s) ...
    diffusion_test_pressure_pa: float | None = None  # ... at this gauge pressure (Pa)
    intrusion_max_flow_m3_s: float | None = None  # water-intrusion limit (m³/s) ...
    intrusion_test_pressure_pa: float | None = None  # ... at this gauge pressure (Pa)
    entered: dict[str, str] | None = None  # field -> text as typed ("30 psi"), shown as is


def check_type(spec: TypeSpec) -> TypeSpec:
    """``spec`` with its texts cleaned by their rules and its area settled (see
    :func:`settle_area`); InputError on any value out of range."""
    for field in (
        "lumen_diameter_m",
        "effective_length_m",
        "decay_limit_pa_s",
        "integrity_test_pressure_pa",
        "storage_limit_s",
    ):
        positive(field, getattr(spec, field), "a value greater than zero")
    if spec.fiber_count < 1:
        raise InputError(
            "fiber count must be at least 1",
            field="fiber_count",
            value=spec.fiber_count,
            expected="a whole number of 1 or more",
        )
    spec = settle_area(spec)
    if spec.reuse_limit_cycles < 1:
        raise InputError(
            "the reuse limit must be at least 1 cycle",
            field="reuse_limit",
            value=spec.reuse_limit_cycles,
            expected="a whole number of 1 or more",
        )
    for name, label in (
        ("max_volume_loading_m", "maximum volume loading"),
        ("max_mass_loading_kg_m2", "maximum mass loading"),
        ("clean_hold_s", "clean-hold window"),
    ):
        if getattr(spec, name) is not None:
            positive(name, getattr(spec, name), "a value greater than zero", label=label)
    if spec.bubble_point_min_pa is not None:
        positive(
            "bubble_point_min_pa",
            spec.bubble_point_min_pa,
            "a pressure above zero",
            label="bubble-point minimum",
        )
    for flow, pressure, label in (
        ("diffusion_max_flow_m3_s", "diffusion_test_pressure_pa", "diffusion"),
        ("intrusion_max_flow_m3_s", "intrusion_test_pressure_pa", "water-intrusion"),
    ):
        given = [n for n in (flow, pressure) if getattr(spec, n) is not None]
        if len(given) == 1:
            missing = pressure if given[0] == flow else flow
            raise InputError(
                f"a {label} limit needs its maximum flow and its test pressure together",
                field=missing,
                value=None,
                expected=f"both of {flow} and {pressure}, or neither",
            )
        if given:
            positive(flow, getattr(spec, flow), "a flow greater than zero",
                     label=f"{label} maximum flow")  # fmt: skip
            positive(pressure, getattr(spec, pressure), "a gauge pressure greater than zero",
                     label=f"{label} test pressure")  # fmt: skip
    if not 0 < spec.recovery_min <= spec.recovery_alert <= 1.5:
        raise InputError(
            f"recovery minimum {spec.recovery_min:.0%} and alert {spec.recovery_alert:.0%} "
            "are inconsistent",
            field="recovery_min",
            value=spec.recovery_min,
            expected="0 % < minimum ≤ alert ≤ 150 %",
        )
    if not spec.damage_ratio > 1.0:
        raise InputError(
            "the damage-suspicion ratio must exceed 100 %",
            field="damage_ratio",
            value=spec.damage_ratio,
            expected="a ratio above 100 %, e.g. 120 %",
        )
    if not 0 < spec.preuse_band < 1:
        raise InputError(
            "the pre-use band must be between 0 and 100 %",
            field="preuse_band",
            value=spec.preuse_band,
            expected="a fraction, e.g. 10 %",
        )
    t_ref = spec.reference_temperature_k
    if not T_MIN <= t_ref <= T_MAX:  # also refuses NaN
        raise InputError(
            f"the NWP reference temperature {t_ref - 273.15:.2f} °C is outside the range of the "
            "water-viscosity correlation that normalizes every water-flux test",
            field="reference_temperature",
            value=t_ref,
            expected="0 to 100 °C (liquid water at 1 atm), usually 20 or 25 degC",
        )
    return replace(
        spec,
        code=required("code", spec.code, "a short code, e.g. HF-750-120", kind="identifier"),
        membrane=required("membrane", spec.membrane, "the membrane material, e.g. mPES"),
        pore_rating=required("pore_rating", spec.pore_rating, "the rating, e.g. 750 kDa"),
        supplier=optional("supplier", spec.supplier, "the supplier's name", kind="name"),
    )


def settle_area(spec: TypeSpec) -> TypeSpec:
    """``spec`` with its area (m²): the stated one when it agrees with the inner lumen area
    within ``rules.geometry.AREA_TOLERANCE``, else InputError; the lumen area when none is
    stated. The geometry (count, diameter, length) must be checked before."""
    lumen = lumen_area(spec.fiber_count, spec.lumen_diameter_m, spec.effective_length_m)
    if spec.area_m2 is None:
        return replace(spec, area_m2=lumen)
    positive("area_m2", spec.area_m2, "a value greater than zero")
    check = check_area(spec.area_m2, lumen)
    if not check.agrees:
        geometry = (
            f"{spec.fiber_count} fibers × π × {spec.lumen_diameter_m * 1e3:.4g} mm × "
            f"{spec.effective_length_m * 1e2:.4g} cm"
        )
        raise InputError(
            area_message(check, geometry),
            field="area_m2",
            value=spec.area_m2,
            expected=f"an area within {check.tolerance * 100:g} % of {lumen:.4g} m², or none "
            "(the lumen area is then used)",
        )
    return spec


def add_type(session: Session, actor: UserAccount, spec: TypeSpec) -> ModuleType:
    require_role(actor, DECIDERS, "define module types and their acceptance limits")
    spec = check_type(spec)

    def taken(found: str) -> InputError:
        return InputError(
            f"module type {shown(found)} exists",
            field="code",
            value=spec.code,
            expected="a new type code (codes differing only in case are the same)",
        )

    values: dict[str, Any] = dict(spec.__dict__)
    with new_identifier(session, ModuleType.code, spec.code, taken):
        return Journal(session, actor.login).create(ModuleType(**values))


def get_type(session: Session, code: str) -> ModuleType:
    found = session.exec(select(ModuleType).where(ModuleType.code == code)).first()
    if found is None:
        known = ", ".join(t.code for t in session.exec(select(ModuleType))) or "none yet"
        raise InputError(
            f"no module type {shown(code)}",
            field="type",
            value=shown(code),
            expected=f"a registered type ({known})",
        )
    return found


def list_types(session: Session) -> list[ModuleType]:
    return list(session.exec(select(ModuleType).order_by(ModuleType.code)))


def get_module(session: Session, serial: str, *, lock: bool = False) -> Module:
    """The module with this serial (locked for update inside a write), or InputError."""
    statement = select(Module).where(Module.serial == serial)
    if lock:
        statement = statement.with_for_update()
    found = session.exec(statement).first()
    if found is None:
        raise InputError(
            f"no module with serial {shown(serial)}",
            field="serial",
            value=shown(serial),
            expected="the serial of a registered module (fluxledger module list)",
        )
    return found


def add_module(
    session: Session,
    actor: UserAccount,
    serial: str,
    type_code: str,
    *,
    manufacturer_lot: str | None = None,
    received_on: date | None = None,
    note: str | None = None,
) -> Module:
    require_role(actor, RECORDERS, "register modules")
    serial = required("serial", serial, "the module's serial number", kind="identifier")
    lot = optional(
        "manufacturer_lot", manufacturer_lot, "the manufacturer's lot", kind="identifier"
    )
    note = optional("note", note, "a note on the module")
    mtype = get_type(session, type_code)

    def taken(found: str) -> InputError:
        return InputError(
            f"module {shown(found)} is already registered",
            field="serial",
            value=serial,
            expected="a serial not yet in the logbook (serials differing only in case are the "
            "same)",
        )

    module = Module(
        serial=serial,
        type_id=row_id(mtype.id),
        manufacturer_lot=lot,
        received_on=received_on,
        note=note,
        status="commissioning",
    )
    with new_identifier(session, Module.serial, serial, taken):
        return Journal(session, actor.login).create(module)


def list_modules(session: Session, status: str | None = None) -> list[tuple[Module, ModuleType]]:
    statement = select(Module, ModuleType).where(Module.type_id == ModuleType.id)
    if status:
        statement = statement.where(Module.status == status)
    return list(session.exec(statement.order_by(Module.serial)))


def open_hold(session: Session, module: Module) -> Hold | None:
    return session.exec(
        select(Hold)
        .where(Hold.module_id == module.id, Hold.decision.is_(None))  # type: ignore[union-attr]
        .order_by(Hold.id.desc())  # type: ignore[union-attr]
    ).first()


def put_on_hold(
    journal: Journal,
    module: Module,
    cause: str,
    reason: str,
    source: tuple[str, int | None] | None = None,
) -> Hold:
    """Hold a module (inside the caller's transaction) and remember where it was."""
    hold = journal.create(
        Hold(
            module_id=row_id(module.id),
            cause=cause,
            reason=reason,
            source_entity=source[0] if source else None,
            source_id=source[1] if source else None,
        ),
        reason=reason,
    )
    journal.change(
        module,
        {"status": "on_hold", "status_before_hold": module.status},
        reason=reason,
        module_id=module.id,
    )
    return hold


def hold(session: Session, actor: UserAccount, serial: str, reason: str) -> Hold:
    require_role(actor, RECORDERS, "put modules on hold")
    module = get_module(session, serial, lock=True)
    _allowed(module, "hold")
    reason = _need_reason(reason)
    return put_on_hold(Journal(session, actor.login), module, "manual", reason)


DECISIONS = ("retest", "return", "retire")
# What a disposition's signature means: its decision (stored), in the words printed beside it.
DISPOSITION_WORDS = {"retest": "retest", "return": "return to service", "retire": "retire"}


def disposition_words(meaning: str | None) -> str:
    """The printed meaning of a disposition signature ("approved" on holds decided before
    dispositions had meanings of their own)."""
    return DISPOSITION_WORDS.get(meaning or "", meaning or "")


def release(session: Session, actor: UserAccount, serial: str, decision: str, reason: str) -> Hold:
    """The signed disposition of a hold: retest, return (manual holds only), or retire."""
    require_role(actor, DECIDERS, "sign a disposition")
    module = get_module(session, serial, lock=True)
    _allowed(module, "release")
    reason = _need_reason(reason)
    if decision not in DECISIONS:
        raise InputError(
            f"decision {shown(decision)} is unknown",
            field="decision",
            value=shown(decision),
            expected="one of " + ", ".join(DECISIONS),
        )
    current = open_hold(session, module)
    if current is None:
        raise RefusedError(
            f"module {serial} is on hold but no open hold record was found",
            field="serial",
            value=serial,
        )
    if decision == "return" and current.cause != "manual":
        raise RefusedError(
            f"module {serial} is on hold for a failed {current.cause} check; it cannot simply "
            "return to service: choose retest or retire",
            field="decision",
            value=decision,
            expected="retest or retire",
        )
    journal = Journal(session, actor.login)
    journal.change(
        current,
        {
            "decision": decision,
            "decision_reason": reason,
            "decided_by": actor.login,
            "decided_at": journal.at,
            "meaning": decision,
        },
        reason=reason,
        module_id=module.id,
    )
    new_status = {
        "retest": "awaiting_retest",
        "return": module.status_before_hold or "available",
        "retire": "retired",
    }[decision]
    journal.change(
        module,
        {"status": new_status, "status_before_hold": None},
        reason=reason,
        module_id=module.id,
    )
    return current


def retire(session: Session, actor: UserAccount, serial: str, reason: str) -> Module:
    require_role(actor, DECIDERS, "retire modules")
    module = get_module(session, serial, lock=True)
    _allowed(module, "retire")
    reason = _need_reason(reason)
    Journal(session, actor.login).change(
        module, {"status": "retired"}, reason=reason, module_id=module.id
    )
    return module


def _need_reason(reason: str) -> str:
    return required("reason", reason, "a short reason for the record", kind="text")


def _allowed(module: Module, action: str) -> None:
    message = refusal(action, module.status, module.serial)
    if message:
        raise RefusedError(message, field="serial", value=module.serial)


def last_decision(session: Session, module_id: int) -> Any:
    """When the module's latest hold was decided (the start of a retest), or None."""
    found = session.exec(
        select(Hold)
        .where(Hold.module_id == module_id, Hold.decided_at.is_not(None))  # type: ignore[union-attr]
        .order_by(Hold.id.desc())  # type: ignore[union-attr]
    ).first()
    return found.decided_at if found is not None else None


def row_id(value: int | None) -> int:
    """The primary key of a stored row (always set once the row is flushed)."""
    if value is None:
        raise RuntimeError("a row without a primary key reached the logbook")
    return value
