"""Batch-record services: issue a revision, sign it, correct it, and give its context.

Each function works in the caller's transaction (one per command): validate, decide
(ledger.rules.signing, ledger.rules.runs), persist, audit. A revision is issued — its content
frozen and hashed — when its first signature is given; each signature stores that hash.
The last signature of the template's list (approval) locks the record. A correction sends
the run back to ``finished`` and supersedes the current revision; its signatures stay with it.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

from sqlmodel import Session, col, select

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import DECIDERS, require_role
from ledger.records import context as c
from ledger.records.assemble import assemble, record_id, signature_rows
from ledger.rules import runs as run_rules
from ledger.rules.signing import MEANINGS, Blocker, Signed, fully_signed, refusals
from ledger.runs import service as runs
from ledger.store.audit import Journal
from ledger.store.tables import AuditHead, RecordRevision, Run, Signature, UserAccount


@dataclass(frozen=True)
class Issued:
    """A revision's row and its context (with the signatures of it and earlier revisions)."""

    revision: RecordRevision | None  # None: a draft of the live data
    context: c.Context


def revisions(session: Session, run_id: int) -> list[RecordRevision]:
    return list(
        session.exec(
            select(RecordRevision)
            .where(RecordRevision.run_id == run_id)
            .order_by(col(RecordRevision.number))
        )
    )


def current_revision(session: Session, run_id: int) -> RecordRevision | None:
    """The run's latest revision unless a correction superseded it."""
    found = revisions(session, run_id)
    if found and found[-1].superseded_at is None:
        return found[-1]
    return None


def stored_context(session: Session, rev: RecordRevision) -> c.Context:
    """The revision's frozen context, with the signatures of it and earlier revisions."""
    ctx = c.from_record(c.Context, {**rev.content, "signatures": []})
    return ctx.with_signatures(signature_rows(session, rev.run_id, up_to=rev.number))


def recompute(session: Session, rev: RecordRevision) -> c.Context:
    """The revision's context assembled again from the database as it stood when issued."""
    return assemble(
        session,
        rev.run_id,
        revision=rev.number,
        reason=rev.reason,
        as_of=rev.as_of,
        audit_seq=rev.audit_seq,
        version=int(rev.content.get("version", 1)),
    )


def record_of(session: Session, run_id: int, number: int | None = None) -> Issued:
    """Revision ``number`` of the run's record; by default the current one, else a draft."""
    runs.get_run(session, run_id)
    if number is not None:
        rev = next((r for r in revisions(session, run_id) if r.number == number), None)
        if rev is None:
            known = [r.number for r in revisions(session, run_id)]
            raise InputError(
                f"{record_id(run_id)} has no revision {number}",
                field="revision",
                value=number,
                expected="one of " + ", ".join(map(str, known)) if known else "none issued yet",
            )
        return Issued(rev, stored_context(session, rev))
    rev = current_revision(session, run_id)
    if rev is not None:
        return Issued(rev, stored_context(session, rev))
    draft = assemble(session, run_id)
    return Issued(None, draft.with_signatures(signature_rows(session, run_id)))


def approved_record(session: Session, run_id: int, number: int | None = None) -> Issued:
    """Like :func:`record_of`, but refused (exit 3) unless the revision is fully signed: only
    an approved revision is sealed."""
    issued = record_of(session, run_id, number)
    ctx = issued.context
    signed = [s.meaning for s in ctx.signatures if s.revision == ctx.header.revision]
    if issued.revision is None or not fully_signed(ctx.required_signatures, signed):
        raise RefusedError(
            f"{ctx.header.record_id} revision {ctx.header.revision} is not approved: only a "
            "fully signed revision is sealed",
            field="run",
            value=run_id,
        )
    return issued


def next_revision(session: Session, run: Run) -> tuple[int, str]:
    """The number and reason of the revision the run's next first signature issues."""
    assert run.id is not None
    number = len(revisions(session, run.id)) + 1
    if number == 1:
        reason = "first issue" + (
            f" (returned for correction before signing: {run.correction_reason})"
            if run.correction_reason
            else ""
        )
    else:
        reason = run.correction_reason or "corrected"
    return number, reason


def issue_context(session: Session, run: Run, as_of: datetime, audit_seq: int) -> c.Context:
    """The record content that issuing the next revision at ``as_of`` freezes (and hashes)."""
    assert run.id is not None
    number, reason = next_revision(session, run)
    return assemble(
        session, run.id, revision=number, reason=reason, as_of=as_of, audit_seq=audit_seq
    )


def _issue(session: Session, actor: UserAccount, run: Run) -> RecordRevision:
    # Locked, and the session's first read of the head: an unlocked get() here would keep a
    # stale seq in the identity map, which the Journal's FOR UPDATE does not refresh, so on
    # PostgreSQL a concurrent writer's event made the issue event reuse its seq.
    head = session.exec(select(AuditHead).where(AuditHead.id == 1).with_for_update()).first()
    journal = Journal(session, actor.login)
    assert run.id is not None
    number, reason = next_revision(session, run)
    ctx = issue_context(session, run, journal.at, head.seq if head else 0)
    return journal.create(
        RecordRevision(
            run_id=run.id,
            number=number,
            reason=reason,
            content=ctx.content(),
            sha256=ctx.sha256(),
            as_of=journal.at,
            audit_seq=head.seq if head else 0,
        ),
        module_id=run.module_id,
        reason=f"{record_id(run.id)} revision {number} issued for signature",
    )


def sign(session: Session, actor: UserAccount, run_id: int, meaning: str) -> Signature:
    """Sign the run's current revision as ``meaning`` (issuing it with the first signature).

    Refused (exit 3) with every reason when the rules of ledger.rules.signing forbid it, or
    when the database no longer gives the content the revision was issued with.
    """
    if meaning not in MEANINGS:
        raise InputError(
            f"--meaning {meaning!r} is not a signature meaning",
            field="meaning",
            value=meaning,
            expected="one of " + ", ".join(MEANINGS),
        )
    run = runs.get_run(session, run_id, lock=True)
    message = run_rules.refusal("sign", run.status, runs.label(run))
    if message:
        raise RefusedError(message, field="run", value=run_id)
    rev = current_revision(session, run_id)
    if rev is None:
        rev = _issue(session, actor, run)
    else:
        now = recompute(session, rev)
        if now.sha256() != rev.sha256:
            raise RefusedError(
                f"{record_id(run_id)} revision {rev.number} no longer matches the database "
                "(its data changed after it was issued); run `fluxledger record verify` and "
                "`fluxledger audit verify`",
                field="run",
                value=run_id,
            )
    ctx = stored_context(session, rev)
    on_this = [s for s in ctx.signatures if s.revision == rev.number]
    blockers = [
        Blocker(k.name, k.verdict, k.deviation, k.deviation_closed)
        for k in ctx.checks
        if k.verdict != "PASS"
    ]
    reasons = refusals(
        meaning,
        actor.login,
        actor.role,
        ctx.required_signatures,
        ctx.signature_roles,
        [Signed(s.meaning, s.login) for s in on_this],
        blockers,
        [d.number for d in ctx.deviations if d.closed_at is None],
    )
    if reasons:
        raise RefusedError(
            f"{actor.login} cannot sign {record_id(run_id)} revision {rev.number} as {meaning}: "
            + "; ".join(reasons),
            field="meaning",
            value=meaning,
        )
    journal = Journal(session, actor.login)
    assert rev.id is not None
    signature = journal.create(
        Signature(
            run_id=run_id,
            revision_id=rev.id,
            revision=rev.number,
            revision_sha256=rev.sha256,
            meaning=meaning,
            login=actor.login,
            full_name=actor.full_name,
            role=actor.role,
            signed_at=journal.at,
        ),
        module_id=run.module_id,
        reason=f"signed {record_id(run_id)} revision {rev.number} as {meaning}",
    )
    if fully_signed(ctx.required_signatures, [s.meaning for s in on_this] + [meaning]):
        journal.change(
            run,
            {"status": "approved"},
            module_id=run.module_id,
            reason=f"{record_id(run_id)} revision {rev.number} approved; locked",
        )
    return signature


@dataclass(frozen=True)
class Correction:
    """A record opened for correction: the run, and the revision it superseded (None when
    no revision had been issued since the last correction)."""

    run: Run
    superseded: RecordRevision | None


def correct(session: Session, actor: UserAccount, run_id: int, reason: str) -> Correction:
    """Open the record for correction: the current revision is superseded (its signatures
    stay with it), the run goes back to ``finished``, and its next submission is signed as a
    new revision with ``reason``."""
    require_role(actor, DECIDERS, "correct batch records")
    if not reason or not reason.strip():
        raise InputError(
            "--reason is empty",
            field="reason",
            value=reason,
            expected="why the record must be corrected",
        )
    run = runs.get_run(session, run_id, lock=True)
    message = run_rules.refusal("correct", run.status, runs.label(run))
    if message:
        raise RefusedError(message, field="run", value=run_id)
    journal = Journal(session, actor.login)
    rev = current_revision(session, run_id)
    if rev is not None:
        journal.change(
            rev,
            {
                "superseded_at": journal.at,
                "superseded_by": actor.login,
                "superseded_reason": reason.strip(),
            },
            module_id=run.module_id,
            reason="superseded by a correction",
        )
    journal.change(
        run,
        {"status": "finished", "correction_reason": reason.strip()},
        module_id=run.module_id,
        reason=f"record opened for correction: {reason}",
    )
    return Correction(run, rev)
