"""Verify a batch-record PDF against the database, and every signature's binding (§7).

``verify_file`` checks, and names what failed:

1. the file's digital seal, if it has one (intact, nothing added after sealing, signer);
2. the file itself: the document as printed (before any seal) must be byte for byte the PDF
   that the stored revision renders to, with the signatures the file names (an archive copy:
   that PDF made PDF/A-3b with its record.json, ``ledger.records.archive``);
3. the revision in the database: its stored content still has its stored hash, and — for the
   run's current revision — the database still gives that content when assembled again as it
   stood when the revision was issued (a value edited after signing shows here);
4. every signature of the run: bound to its own run's revision by that revision's hash;
5. the audit trail's hash chain and record hashes (ledger.store.audit.verify);
6. the controlled copy (ledger.records.copies.check): its number is registered with this
   file's SHA-256, and it claims no signature or state the database does not hold. A copy
   older than the database (signed further, or corrected, since) is a note, not a problem.
"""

from __future__ import annotations

import re
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from sqlmodel import Session, col, select

from ledger.errors import TamperedError
from ledger.records import context as c
from ledger.records import copies
from ledger.records.assemble import record_id
from ledger.records.service import current_revision, recompute, stored_context
from ledger.store.tables import RecordRevision, Run, Signature, UserAccount

_RECORD_ID = re.compile(r"^BR-(\d{6,})$")


@dataclass
class Report:
    """What was checked and what failed; ``ok`` when nothing failed."""

    record: str | None = None
    revision: int | None = None
    copy: int | None = None  # the controlled copy's number, its state and signed meanings
    state: str | None = None
    signatures: tuple[str, ...] = ()
    lacks: tuple[str, ...] = ()  # meanings of a fully signed record the copy does not carry
    passed: list[str] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.problems


def differences(a: Any, b: Any, path: str = "") -> Iterator[str]:
    """Paths where two JSON values differ, with both values: ``checks[3].actual: 'x' -> 'y'``."""
    if isinstance(a, dict) and isinstance(b, dict):
        for k in sorted(set(a) | set(b)):
            yield from differences(a.get(k), b.get(k), f"{path}.{k}" if path else k)
    elif isinstance(a, list) and isinstance(b, list) and len(a) == len(b):
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            yield from differences(x, y, f"{path}[{i}]")
    elif a != b:

        def short(v: Any) -> str:
            text = repr(v) if not isinstance(v, list) else f"a list of {len(v)}"
            return text if len(text) <= 80 else text[:77] + "..."

        yield f"{path}: {short(a)} when issued, {short(b)} now"


def binding_problems(session: Session, run_id: int | None = None) -> list[str]:
    """Every signature (of one run, or all) that is not bound to its own run's revision."""
    statement = select(Signature).order_by(col(Signature.id))
    if run_id is not None:
        statement = statement.where(Signature.run_id == run_id)
    by_hash = {r.sha256: r for r in session.exec(select(RecordRevision))}
    out = []
    for s in session.exec(statement):
        who = f"signature {s.id} ({s.meaning} by {s.login}) on {record_id(s.run_id)}"
        rev = session.get(RecordRevision, s.revision_id)
        if rev is None or rev.run_id != s.run_id or rev.number != s.revision:
            where = (
                f"revision {rev.number} of {record_id(rev.run_id)}"
                if rev
                else "a revision that does not exist"
            )
            out.append(
                f"{who} claims revision {s.revision} but points at {where}: it was copied or moved"
            )
            continue
        if s.revision_sha256 != rev.sha256:
            other = by_hash.get(s.revision_sha256)
            whose = (
                f"; that is the hash of {record_id(other.run_id)} revision {other.number}"
                if other
                else ""
            )
            out.append(
                f"{who} signs hash {s.revision_sha256[:12]}…, not the hash "
                f"{rev.sha256[:12]}… of revision {rev.number}{whose}"
            )
        user = session.exec(select(UserAccount).where(UserAccount.login == s.login)).first()
        if user is None:
            out.append(f"{who}: no user {s.login!r} exists")
        elif user.role == "admin" or s.role == "admin":
            out.append(f"{who}: signed by an administrator")
        if s.signed_at < rev.as_of:
            out.append(f"{who} is dated before revision {rev.number} was issued")
    return out


def revision_problems(session: Session, rev: RecordRevision) -> list[str]:
    """The stored revision against its hash and, if current, against the database."""
    name = f"{record_id(rev.run_id)} revision {rev.number}"
    out = []
    if c.content_sha256(rev.content) != rev.sha256:
        out.append(
            f"{name}: its stored content no longer has its hash: the revision row was "
            "edited in the database"
        )
    current = current_revision(session, rev.run_id)
    if current is not None and current.id == rev.id:
        try:
            now = recompute(session, rev).content()
        except TamperedError as exc:
            out.append(f"{name}: {exc.message}")
            return out
        if rev.content.get("version", 1) < c.CONTEXT_VERSION:
            # issued before later fields existed: compare what it holds
            now = {k: v for k, v in now.items() if k in rev.content}
            now["version"] = rev.content.get("version", 1)
        changed = list(differences(rev.content, now))
        if changed:
            shown = "; ".join(changed[:5]) + (
                f"; and {len(changed) - 5} more" if len(changed) > 5 else ""
            )
            out.append(
                f"{name}: the database no longer gives the content that was signed "
                f"(a value was edited after signing): {shown}"
            )
    return out


def _first_difference(a: bytes, b: bytes) -> int:
    n = min(len(a), len(b))
    return next((i for i in range(n) if a[i] != b[i]), n)


# A batch record is a few hundred KiB; anything far larger is not one of ours.
MAX_RECORD_BYTES = 256 << 20


def _merge(report: Report, found: copies.Findings) -> None:
    report.passed += found.passed
    report.problems += found.problems
    report.notes += found.notes


def verify_file(session: Session, data: bytes, *, trust: Sequence[Path] = ()) -> Report:
    """Check a batch-record PDF (sealed or not) against the database; see the module doc."""
    from ledger.records import archive
    from ledger.records.pdf import render, stamp_of
    from ledger.store.audit import verify as verify_audit

    report = Report()
    base = data
    if b"/ByteRange" in data:
        from ledger.records.seal import NO_ANCHOR, NO_ANCHOR_TSA, examine

        seal = examine(data, trust=trust)
        if seal.sealed:
            # Without --trust the signer is unchecked: a note below, not a failure.
            report.problems += [p for p in seal.problems if p not in (NO_ANCHOR, NO_ANCHOR_TSA)]
            if seal.intact and seal.whole_file:
                report.passed.append(
                    f"digital seal intact ({seal.level}, {seal.signer}, {seal.signed_at})"
                )
            if seal.trusted is None:
                report.notes.append(
                    "no --trust certificate given: the sealer's identity was not checked"
                )
            if seal.signed_length:
                base = data[: seal.signed_length]
    stamp = stamp_of(base)
    if stamp is None:
        report.problems.append(
            "the file has no fluxledger record stamp: it is not a batch "
            "record printed by fluxledger, or it was altered"
        )
        return report
    report.record = stamp.get("record")
    m = _RECORD_ID.match(stamp.get("record", ""))
    try:
        number = int(stamp.get("revision", ""))
    except ValueError:
        number = -1
    run = session.get(Run, int(m.group(1))) if m else None
    if run is None or number < 0:
        report.problems.append(
            f"the file names record {stamp.get('record')!r} revision "
            f"{stamp.get('revision')!r}, which this database does not hold"
        )
        return report
    report.revision = number
    copy = copies.from_stamp(stamp)
    if copy is not None:
        report.copy, report.state, report.signatures = copy.number, copy.state, copy.meanings
    if number == 0:
        _merge(report, copies.check(session, run.id or 0, None, copy, data, (), ()))
        report.problems.append(
            "the file is a draft (revision 0): drafts are not issued records and cannot be verified"
        )
        return report
    rev = session.exec(
        select(RecordRevision).where(
            RecordRevision.run_id == run.id, RecordRevision.number == number
        )
    ).first()
    if rev is None:
        report.problems.append(f"{report.record} has no revision {number} in this database")
        return report
    if stamp.get("sha256") != rev.sha256:
        report.problems.append(
            f"the file's content hash {stamp.get('sha256', '')[:12]}… is not "
            f"the hash {rev.sha256[:12]}… of revision {number}"
        )
    found = revision_problems(session, rev)
    report.problems += found
    if not found:
        report.passed.append(f"revision {number} content matches its hash and the database")
    ctx = stored_context(session, rev)
    held = [s.meaning for s in ctx.signatures if s.revision == number]
    if copy is not None:
        report.lacks = tuple(m for m in ctx.required_signatures if m not in copy.meanings)
    _merge(report, copies.check(session, rev.run_id, rev, copy, data,
                                ctx.required_signatures, held))  # fmt: skip
    ids = [int(x) for x in stamp.get("signatures", "").split(",") if x.strip().isdigit()]
    rows = {s.id: s for s in ctx.signatures}
    unknown = [i for i in ids if i not in rows]
    if unknown:
        report.problems.append(
            "the file shows signatures the database does not hold for "
            f"this record: {', '.join(map(str, unknown))}"
        )
    later = [s for s in ctx.signatures if s.id not in ids]
    if later:
        report.notes.append(
            f"the database holds {len(later)} signature(s) given after this "
            "file was printed: " + ", ".join(f"{s.meaning} by {s.login}" for s in later)
        )
    shown = ctx.with_signatures(tuple(rows[i] for i in ids if i in rows))
    software = stamp.get("software", "")
    expected = [render(shown, software_version=software, charts=charts, issued=rev.as_of,
                       copy=copy) for charts in (True, False)]  # fmt: skip
    if base not in expected and archive.is_archive(base):
        expected.append(archive.archive_pdf(shown, software_version=software, issued=rev.as_of,
                                            copy=copy))  # fmt: skip
    if base in expected:
        report.passed.append("the file is byte for byte the record rendered from the database")
    else:
        from ledger import __version__

        at = min(_first_difference(base, e) for e in expected)
        why = (
            ""
            if software == __version__
            else (
                f" (printed by fluxledger {software}; this is {__version__}, whose layout "
                "may differ)"
            )
        )
        report.problems.append(
            f"the file differs from the record rendered from the database, "
            f"first at byte {at:,} of {len(base):,}{why}"
        )
    bindings = binding_problems(session, run.id)
    report.problems += bindings
    if not bindings:
        report.passed.append(
            f"all {len(ctx.signatures)} signature(s) of {report.record} are bound to their revision"
        )
    audit = verify_audit(session)
    if audit.ok:
        report.passed.append(f"audit trail intact ({audit.events} events)")
    else:
        report.problems += [f"audit trail: {p}" for p in audit.problems]
    return report
