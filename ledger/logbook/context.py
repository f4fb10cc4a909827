"""What every module write shares: the acting user, the locked module, the activity time."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

from sqlalchemy import func
from sqlmodel import Session, select

from ledger.errors import InputError, RefusedError
from ledger.logbook import latest, typelimits
from ledger.logbook.auth import RECORDERS, require_role
from ledger.logbook.modules import get_module, last_decision, put_on_hold
from ledger.logbook.times import activity_time
from ledger.rules.sequence import Transition, refusal
from ledger.store.audit import Journal
from ledger.store.tables import (
    Cleaning,
    IntegrityTest,
    Module,
    ModuleType,
    ModuleUse,
    Storage,
    UserAccount,
    WaterFluxTest,
)


@dataclass
class Work:
    """One write on one module: its journal, the module (locked), its type, when it happened."""

    journal: Journal
    module: Module
    mtype: ModuleType  # with the limits in force at ``at``
    at: datetime
    late: bool
    limits_version_id: int | None = None  # that limits version (None: as registered)

    @property
    def session(self) -> Session:
        return self.journal.session

    @property
    def module_id(self) -> int:
        assert self.module.id is not None
        return self.module.id


def last_activity(session: Session, module_id: int) -> datetime | None:
    """The newest activity time recorded for a module, over every kind of record."""
    times: list[datetime] = []
    for cls in (WaterFluxTest, IntegrityTest, Cleaning, Storage, ModuleUse):
        t = session.exec(
            select(func.max(cls.activity_at)).where(
                cls.module_id == module_id,
                cls.voided_at.is_(None),  # type: ignore[union-attr]
            )
        ).one()
        if t is not None:
            times.append(t)
    ended = session.exec(
        select(func.max(ModuleUse.ended_at)).where(
            ModuleUse.module_id == module_id,
            ModuleUse.voided_at.is_(None),  # type: ignore[union-attr]
        )
    ).one()
    if ended is not None:
        times.append(ended)
    # max() keeps its argument's column type, so these come back as aware UTC datetimes.
    return max(times, default=None)


def begin(
    session: Session,
    actor: UserAccount,
    serial: str,
    action: str,
    given_time: datetime | None = None,
) -> Work:
    """Check role, module, sequence and activity time; return the context of the write."""
    require_role(actor, RECORDERS, f"record {action.split(':')[0]} results")
    module = get_module(session, serial, lock=True)
    message = refusal(action, module.status, module.serial)
    if message:
        raise RefusedError(message, field="serial", value=serial)
    journal = Journal(session, actor.login)
    at, late = activity_time(given_time, journal.at)
    previous = last_activity(session, module.id)  # type: ignore[arg-type]
    if previous is not None and at < previous:
        raise InputError(
            f"activity time {at.isoformat()} is before module {serial}'s latest recorded "
            f"activity ({previous.isoformat()}); enter records in the order they happened",
            field="activity_time",
            value=at.isoformat(),
            expected=f"a time after {previous.isoformat()}",
        )
    registered = session.get(ModuleType, module.type_id)
    assert registered is not None
    mtype, limits = typelimits.in_force(session, registered, at)
    return Work(journal, module, mtype, at, late, limits.id if limits else None)


def set_status(work: Work, status: str, reason: str) -> None:
    work.journal.change(work.module, {"status": status}, reason=reason, module_id=work.module_id)


def apply(work: Work, step: Transition, source: tuple[str, int | None]) -> str | None:
    """Carry out a status step of the rules: a hold (naming the record that caused it) or a
    new status. Returns the step's note for the user."""
    if step.hold:
        put_on_hold(work.journal, work.module, step.hold, step.note or step.hold, source)
    elif step.status != work.module.status:
        set_status(work, step.status, step.note or "")
    return step.note


def phase_start(work: Work) -> datetime | None:
    """Start of the module's current phase: its last cleaning, or the retest disposition."""
    if work.module.status == "awaiting_retest":
        return last_decision(work.session, work.module_id)
    clean = latest.cleaning(work.session, work.module_id)
    return clean.activity_at if clean is not None else None


def integrity_passed_since(work: Work) -> bool:
    since = phase_start(work) if work.module.status != "commissioning" else None
    it = latest.integrity(work.session, work.module_id, after=since)
    return it is not None and it.passed
