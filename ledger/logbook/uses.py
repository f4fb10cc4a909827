"""Uses (processing cycles): start only when the module is fit; end sends it to cleaning."""

from __future__ import annotations

from datetime import datetime

from sqlmodel import Session

from ledger.errors import InputError, RefusedError
from ledger.logbook import latest
from ledger.logbook.auth import DECIDERS, require_role
from ledger.logbook.context import begin, set_status
from ledger.logbook.fitness import facts
from ledger.logbook.required import optional, required
from ledger.rules.fitness import verdict
from ledger.store.tables import ModuleUse, UserAccount


def start_use(
    session: Session,
    actor: UserAccount,
    serial: str,
    product: str,
    lot: str,
    *,
    override_reason: str | None = None,
    activity_at: datetime | None = None,
    note: str | None = None,
) -> ModuleUse:
    """Start a cycle. Refused unless the verdict is FIT; a product other than the dedicated
    one needs an engineer's or QA's override with a reason."""
    work = begin(session, actor, serial, "use:start", activity_at)
    product = required("product", product, "the product processed in this use", kind="identifier")
    lot = required("lot", lot, "the batch or lot processed in this use", kind="identifier")
    override_reason = optional(
        "override_reason", override_reason, "why the dedication is set aside"
    )
    note = optional("note", note, "a note on the use")
    judged = verdict(facts(session, work.module, product, now=work.at))
    failing = [r for r in judged.reasons if r.outcome == "fail"]
    if [r.check for r in failing] == ["product"] and override_reason:
        require_role(actor, DECIDERS, "override the module's product dedication")
    elif failing:
        lines = "; ".join(f"{r.check}: {r.message}" for r in failing)
        raise RefusedError(f"module {serial} is NOT FIT: {lines}", field="serial", value=serial)
    elif override_reason:
        raise InputError(
            "an override reason was given but nothing needs overriding",
            field="override_reason",
            value=override_reason,
            expected="no override for a module that is fit for this product",
        )
    use = work.journal.create(
        ModuleUse(
            module_id=work.module_id,
            activity_at=work.at,
            late=work.late,
            note=note,
            product=product,
            lot=lot,
            override_reason=override_reason,
        )
    )
    changes: dict[str, object] = {"status": "in_use"}
    if work.module.dedicated_product is None:
        changes["dedicated_product"] = product
        changes["first_use_at"] = work.at
    work.journal.change(
        work.module, changes, reason=f"use for {product} lot {lot}", module_id=work.module_id
    )
    return use


def end_use(
    session: Session,
    actor: UserAccount,
    serial: str,
    *,
    activity_at: datetime | None = None,
) -> ModuleUse:
    work = begin(session, actor, serial, "use:end", activity_at)
    use = latest.use(session, work.module_id)
    if use is None or use.ended_at is not None:
        raise RefusedError(f"module {serial} has no open use to end", field="serial", value=serial)
    if work.at < use.activity_at:
        raise InputError(
            "a use cannot end before it started",
            field="activity_time",
            value=work.at.isoformat(),
            expected=f"after {use.activity_at}",
        )
    work.journal.change(use, {"ended_at": work.at}, reason="use ended")
    set_status(work, "awaiting_cleaning", f"use for {use.product} lot {use.lot} ended")
    return use
