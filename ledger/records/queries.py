"""What the record commands show, read inside the caller's transaction as plain values.

The revisions and signatures of a run's record with the signature that comes next, what a
signer is shown after signing, and what a correction did. Times are ISO 8601 in UTC with
their offset; nothing here writes.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlmodel import Session

from ledger.records import context as c
from ledger.records.assemble import iso, record_id, signature_rows
from ledger.records.service import Correction, current_revision, revisions
from ledger.rules import runs as run_rules
from ledger.rules.signing import next_meaning
from ledger.runs import service as runs
from ledger.store.tables import Signature


@dataclass(frozen=True)
class RevisionRow:
    """One issued revision: number, reason, when issued, content hash, and its supersession."""

    number: int
    reason: str
    issued_at: str | None
    sha256: str
    superseded_at: str | None
    superseded_reason: str | None


@dataclass(frozen=True)
class Overview:
    """A run's record: its revisions, its signatures and the signature that comes next."""

    record: str
    run_status: str
    current_revision: int | None
    next_signature: str | None  # None unless the run is in review and a meaning is unsigned
    next_signers: tuple[str, ...]  # the roles that may give it
    revisions: tuple[RevisionRow, ...]
    signatures: tuple[c.SignatureRow, ...]


def overview(session: Session, run_id: int) -> Overview:
    """The record of run ``run_id`` as `record show` lists it."""
    run = runs.get_run(session, run_id)
    template = runs.run_template(run)
    current = current_revision(session, run_id)
    sigs = signature_rows(session, run_id)
    following = None
    if run_rules.refusal("sign", run.status, runs.label(run)) is None:
        done = [s.meaning for s in sigs if current and s.revision == current.number]
        following = next_meaning(template.signatures, done)
    rows = tuple(
        RevisionRow(
            number=r.number,
            reason=r.reason,
            issued_at=iso(r.as_of),
            sha256=r.sha256,
            superseded_at=iso(r.superseded_at),
            superseded_reason=r.superseded_reason,
        )
        for r in revisions(session, run_id)
    )
    return Overview(
        record=record_id(run_id),
        run_status=run.status,
        current_revision=current.number if current else None,
        next_signature=following,
        next_signers=tuple(template.signers.get(following, ())) if following else (),
        revisions=rows,
        signatures=sigs,
    )


def signature_receipt(session: Session, signature: Signature) -> dict[str, Any]:
    """What the signer is shown after signing: the signature, its revision hash, the run's
    status (approved once the last signature is given)."""
    run = runs.get_run(session, signature.run_id)
    return {
        "signature": signature.id,
        "record": record_id(signature.run_id),
        "revision": signature.revision,
        "meaning": signature.meaning,
        "user": signature.login,
        "name": signature.full_name,
        "role": signature.role,
        "signed_at": iso(signature.signed_at),
        "revision_sha256": signature.revision_sha256,
        "run_status": run.status,
    }


def correction_receipt(done: Correction) -> dict[str, Any]:
    """What a correction did: the revision it superseded (None when none was issued), the
    run's status and the reason its next revision will carry."""
    run, rev = done.run, done.superseded
    assert run.id is not None
    return {
        "record": record_id(run.id),
        "run": run.id,
        "run_status": run.status,
        "superseded_revision": rev.number if rev else None,
        "superseded_at": iso(rev.superseded_at) if rev else None,
        "reason": run.correction_reason,
    }
