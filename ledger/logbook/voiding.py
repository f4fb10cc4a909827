"""Void a wrong record with a reason. It stays in the logbook, marked void, and no longer
counts in any status rule or verdict. Voiding does not undo a status change it caused: a
hold still needs its disposition."""

from __future__ import annotations

from sqlmodel import Session

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import DECIDERS, require_role
from ledger.logbook.modules import get_module
from ledger.logbook.required import required
from ledger.rules import runs as run_rules
from ledger.rules.names import shown
from ledger.rules.sequence import refusal
from ledger.store.audit import Journal
from ledger.store.tables import (
    Cleaning,
    IntegrityTest,
    Module,
    ModuleUse,
    Run,
    SkidLogFile,
    Storage,
    UserAccount,
    Voidable,
    WaterFluxTest,
)

VOIDABLE: dict[str, type[Voidable]] = {
    "water-test": WaterFluxTest,
    "integrity-test": IntegrityTest,
    "cleaning": Cleaning,
    "storage": Storage,
    "use": ModuleUse,
    "skid-log": SkidLogFile,  # of a run in progress or finished; the run's status decides
}


def void_record(
    session: Session, actor: UserAccount, kind: str, record_id: int, reason: str
) -> Voidable:
    require_role(actor, DECIDERS, "void records")
    cls = VOIDABLE.get(kind)
    if cls is None:
        raise InputError(
            f"record kind {shown(kind)} is unknown",
            field="kind",
            value=shown(kind),
            expected="one of " + ", ".join(VOIDABLE),
        )
    record = session.get(cls, record_id)
    if record is None:
        raise InputError(
            f"no {kind} with ID {record_id}",
            field="id",
            value=record_id,
            expected=f"the ID of a {kind} (see fluxledger module show)",
        )
    if record.voided_at is not None:
        raise RefusedError(
            f"{kind} {record_id} is already void ({record.void_reason})",
            field="id",
            value=record_id,
        )
    reason = required("reason", reason, "why the record is wrong", kind="text")
    if isinstance(record, SkidLogFile):
        run = session.get(Run, record.run_id)
        assert run is not None
        message = run_rules.refusal("void_log", run.status, f"run {run.id}")
        if message:
            raise RefusedError(message, field="id", value=record_id)
        Journal(session, actor.login).void(record, reason)
        return record
    module = session.get(Module, record.module_id)  # type: ignore[attr-defined]
    assert module is not None
    get_module(session, module.serial, lock=True)
    message = refusal("void", module.status, module.serial)
    if message:
        raise RefusedError(message, field="id", value=record_id)
    Journal(session, actor.login).void(record, reason)
    return record
