"""The review desk: which batch records wait for a signature, and what a signer is shown
before signing — the record with its review by exception, the revision and the SHA-256 the
signature will bind to, and the meanings the signer's role may give, each with whatever
stands in the way (the same rules ``service.sign`` applies, so the page says in advance what
the service would refuse; the service still decides). Read in the caller's transaction;
nothing here writes.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

from sqlmodel import Session, select

from ledger.errors import InputError
from ledger.records import context as c
from ledger.records.assemble import record_id, signature_rows
from ledger.records.copies import state_of
from ledger.records.queries import Overview, overview, signature_receipt
from ledger.records.service import issue_context, record_of
from ledger.rules import runs as run_rules
from ledger.rules.signing import Blocker, Signed, refusals
from ledger.runs import service as runs
from ledger.runs.queries import runs_newest_first
from ledger.store.tables import AuditHead, Run, Signature

WAITING, APPROVED = ("in_review",), ("approved",)


@dataclass(frozen=True)
class RecordItem:
    """One record of the list: its run, product and lot, where its signatures stand."""

    run_id: int
    record: str
    run_status: str
    product: str
    lot: str
    module: str
    template: str
    submitted_at: datetime | None
    revision: int | None  # the current revision, None before the first signature
    signed: tuple[str, ...]  # meanings signed on it, in order
    next_signature: str | None
    next_signers: tuple[str, ...]


def record_list(session: Session) -> tuple[list[RecordItem], list[RecordItem]]:
    """The records awaiting review or signature and the approved ones, newest first."""
    waiting: list[RecordItem] = []
    approved: list[RecordItem] = []
    for run, serial in runs_newest_first(session):
        if run.status not in WAITING + APPROVED:
            continue
        assert run.id is not None
        o = overview(session, run.id)
        item = RecordItem(
            run_id=run.id,
            record=o.record,
            run_status=run.status,
            product=run.product,
            lot=run.lot,
            module=serial,
            template=f"{run.template_id} v{run.template_version}",
            submitted_at=run.submitted_at,
            revision=o.current_revision,
            signed=tuple(s.meaning for s in o.signatures if s.revision == o.current_revision),
            next_signature=o.next_signature,
            next_signers=o.next_signers,
        )
        (waiting if run.status in WAITING else approved).append(item)
    return waiting, approved


@dataclass(frozen=True)
class Choice:
    """A meaning the signer's role may give on this revision, and why not now (if so)."""

    meaning: str
    roles: tuple[str, ...]
    refusals: tuple[str, ...]  # empty: the service would accept it


@dataclass(frozen=True)
class Signing:
    """What a signature given now binds to and who gives it.

    ``issued`` False: no revision exists yet; the first signature issues revision
    ``revision`` and freezes content whose SHA-256 is ``sha256`` — as the database stands now
    (a change before signing makes the frozen hash differ; the receipt shows the real one)."""

    open: bool  # the run may be signed (in review)
    why_closed: str | None  # the run's status in words when it may not
    state: str  # draft, in review, approved, superseded
    revision: int
    issued: bool
    sha256: str
    next_meaning: str | None
    next_signers: tuple[str, ...]
    choices: tuple[Choice, ...]  # the unsigned meanings the signer's role may give
    default: str | None  # the choice offered first (the next one the record expects)
    login: str
    name: str
    role: str


@dataclass(frozen=True)
class Desk:
    """A record as the review page shows it, with what a signature given now would be."""

    context: c.Context
    overview: Overview
    signing: Signing
    findings: int  # how many findings the review by exception lists


def _first_issue(session: Session, run: Run) -> c.Context:
    """The context the first signature would freeze now (built as the service issues it)."""
    head = session.exec(select(AuditHead).where(AuditHead.id == 1)).first()
    return issue_context(session, run, datetime.now(UTC), head.seq if head else 0)


def desk(session: Session, run_id: int, login: str, name: str, role: str) -> Desk:
    """Run ``run_id``'s record for the signer ``login`` (``name``, ``role``): the current
    revision, or when the run is in review and none is issued, the revision the first
    signature would issue; otherwise the draft of the live data."""
    run = runs.get_run(session, run_id)
    o = overview(session, run_id)
    why_closed = run_rules.refusal("sign", run.status, runs.label(run))
    issued = o.current_revision is not None
    if why_closed is None and not issued:
        ctx = _first_issue(session, run).with_signatures(signature_rows(session, run_id))
        superseded = False
    else:
        found = record_of(session, run_id)
        ctx = found.context
        superseded = found.revision is not None and found.revision.superseded_at is not None
    number = ctx.header.revision
    on_this = [s for s in ctx.signatures if s.revision == number]
    signed = [Signed(s.meaning, s.login) for s in on_this]
    blockers = [
        Blocker(k.name, k.verdict, k.deviation, k.deviation_closed)
        for k in ctx.checks
        if k.verdict != "PASS"
    ]
    still_open = [d.number for d in ctx.deviations if d.closed_at is None]
    choices: list[Choice] = []
    if why_closed is None:
        done = {s.meaning for s in on_this}
        for meaning in ctx.required_signatures:
            allowed = tuple(ctx.signature_roles.get(meaning, ()))
            if role not in allowed or meaning in done:
                continue
            why = refusals(meaning, login, role, ctx.required_signatures,
                           ctx.signature_roles, signed, blockers, still_open)  # fmt: skip
            choices.append(Choice(meaning, allowed, tuple(why)))
    default = next((ch.meaning for ch in choices if not ch.refusals), None)
    if o.next_signature in [ch.meaning for ch in choices]:
        default = o.next_signature
    signing = Signing(
        open=why_closed is None,
        why_closed=why_closed,
        state=state_of(number, ctx.required_signatures, [s.meaning for s in on_this], superseded),
        revision=number,
        issued=issued,
        sha256=ctx.sha256(),
        next_meaning=o.next_signature,
        next_signers=o.next_signers,
        choices=tuple(choices),
        default=default,
        login=login,
        name=name,
        role=role,
    )
    findings = sum(len(t.findings) for t in ctx.review)
    return Desk(ctx, o, signing, findings)


def receipt(session: Session, run_id: int, signature_id: int) -> dict[str, Any]:
    """The receipt of signature ``signature_id`` of run ``run_id`` (as ``record sign``
    prints it); an InputError when the run has no such signature."""
    sig = session.get(Signature, signature_id)
    if sig is None or sig.run_id != run_id:
        raise InputError(
            f"{record_id(run_id)} has no signature {signature_id}",
            field="signature",
            value=signature_id,
            expected="a signature of this record (see its review page)",
        )
    return signature_receipt(session, sig)
