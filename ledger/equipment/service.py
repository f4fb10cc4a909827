"""Skids: register one, add or replace its instruments, approve versions of its column
mapping, and the questions runs ask (the current mapping, overdue calibrations).

Each write runs inside the caller's one transaction and goes through the audit Journal.
It sits beside ``ledger.runs`` (it validates mappings with ``runs.mapping``), below the
entries and the front ends.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from datetime import UTC, date, datetime

from sqlalchemy import func
from sqlmodel import Session, select

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import DECIDERS, require_role
from ledger.logbook.required import new_identifier, optional, required
from ledger.rules import names
from ledger.runs.mapping import CHANNEL_KINDS, parse_mapping
from ledger.store.audit import Journal
from ledger.store.equipment import Skid, SkidInstrument, SkidMapping
from ledger.store.tables import AuditHead, UserAccount

# What an instrument may measure: the mapped numeric channels ("phase" is a text column).
MEASURED = tuple(name for name, kind in CHANNEL_KINDS.items() if kind is not None)


@dataclass(frozen=True)
class SkidView:
    """A skid with its instruments in service (by tag) and every mapping version (newest first)."""

    skid: Skid
    instruments: list[SkidInstrument]
    mappings: list[SkidMapping]

    @property
    def current(self) -> SkidMapping | None:
        return next((m for m in self.mappings if m.status == "current"), None)


def _id(value: int | None) -> int:
    if value is None:
        raise RuntimeError("a row without a primary key reached the equipment service")
    return value


def register_skid(
    session: Session,
    actor: UserAccount,
    code: str,
    description: str,
    location: str | None = None,
) -> Skid:
    """Register a skid under a new code (engineer or QA)."""
    require_role(actor, DECIDERS, "register skids")
    code = required("code", code, "the skid's code, e.g. TFF-SKID-2", kind="identifier")
    description = required("description", description, "what the skid is, in one line")
    location = optional("location", location, "where the skid stands", kind="name")

    def taken(found: str) -> InputError:
        return InputError(
            f"skid {names.shown(found)} is already registered",
            field="code",
            value=code,
            expected="a new skid code (codes differing only in case are the same)",
        )

    skid = Skid(code=code, description=description, location=location)
    with new_identifier(session, Skid.code, code, taken):
        return Journal(session, actor.login).create(skid)


def get_skid(session: Session, code: str) -> Skid:
    """The skid with this code, compared ignoring case; InputError naming ``code`` if none."""
    text = code if isinstance(code, str) else ""
    query = select(Skid)
    if text.isascii():
        query = query.where(func.lower(Skid.code) == text.lower())
    key = names.fold(text)
    found = next((s for s in session.exec(query) if names.fold(s.code) == key), None)
    if found is None:
        known = ", ".join(s.code for s in list_skids_only(session)) or "none yet"
        raise InputError(
            f"no skid {names.shown(code)}",
            field="code",
            value=names.shown(code),
            expected=f"a registered skid ({known})",
        )
    return found


def list_skids_only(session: Session) -> list[Skid]:
    """Every skid, by code."""
    return list(session.exec(select(Skid).order_by(Skid.code)))


def instruments(session: Session, skid_id: int) -> list[SkidInstrument]:
    """The skid's instruments in service (not voided), by tag."""
    statement = (
        select(SkidInstrument)
        .where(SkidInstrument.skid_id == skid_id, SkidInstrument.voided_at.is_(None))  # type: ignore[union-attr]
        .order_by(SkidInstrument.tag)
    )
    return list(session.exec(statement))


def mappings(session: Session, skid_id: int) -> list[SkidMapping]:
    """Every approved mapping version of the skid, newest first."""
    statement = (
        select(SkidMapping)
        .where(SkidMapping.skid_id == skid_id)
        .order_by(SkidMapping.version.desc())  # type: ignore[attr-defined]
    )
    return list(session.exec(statement))


def show_skid(session: Session, code: str) -> SkidView:
    """A skid, its instruments in service and its mapping versions."""
    skid = get_skid(session, code)
    return SkidView(skid, instruments(session, _id(skid.id)), mappings(session, _id(skid.id)))


def list_skids(session: Session) -> list[SkidView]:
    """Every skid with its instruments and mappings, by code."""
    return [
        SkidView(s, instruments(session, _id(s.id)), mappings(session, _id(s.id)))
        for s in list_skids_only(session)
    ]


def set_instrument(
    session: Session,
    actor: UserAccount,
    skid_code: str,
    tag: str,
    measures: str,
    calibration_due: date,
    reason: str | None = None,
) -> tuple[SkidInstrument, SkidInstrument | None]:
    """Add an instrument to a skid, or replace the one in service under the same tag (tags are
    compared ignoring case). A replacement needs a reason; the old row is voided with it.
    Returns (the instrument in service, the one it replaced or None); the same values again
    change nothing."""
    require_role(actor, DECIDERS, "record skid instruments")
    tag = required("tag", tag, "the instrument's tag, e.g. PT-101", kind="identifier")
    if measures not in MEASURED:
        raise InputError(
            f"an instrument cannot measure {names.shown(measures)}",
            field="measures",
            value=names.shown(measures),
            expected="one of " + ", ".join(MEASURED),
        )
    if not isinstance(calibration_due, date) or isinstance(calibration_due, datetime):
        raise TypeError("calibration_due must be a date")  # a bug, not user input
    reason = optional("reason", reason, "why the instrument is replaced")
    skid = get_skid(session, skid_code)
    # The write lock first, so two writers of one tag see each other's rows.
    session.exec(select(AuditHead).where(AuditHead.id == 1).with_for_update()).first()
    key = names.fold(tag)
    old = next((i for i in instruments(session, _id(skid.id)) if names.fold(i.tag) == key), None)
    journal = Journal(session, actor.login)
    if old is not None:
        if old.measures == measures and old.calibration_due == calibration_due:
            return old, None
        if reason is None:
            raise InputError(
                f"skid {skid.code} has instrument {old.tag} in service already; replacing it "
                "needs --reason",
                field="reason",
                value=None,
                expected="why the instrument is replaced (recalibrated, swapped, ...)",
            )
        journal.void(old, reason)
        tag = old.tag  # the tag keeps the spelling it was registered with
    new = SkidInstrument(
        skid_id=_id(skid.id), tag=tag, measures=measures, calibration_due=calibration_due
    )
    return journal.create(new, reason=reason), old


def approve_mapping(
    session: Session, actor: UserAccount, skid_code: str, text: str, source: str
) -> tuple[SkidMapping, bool]:
    """Approve ``text`` (a mapping file read from ``source``) as the skid's next mapping
    version (engineer or QA). The text must parse as a mapping; the version it follows is
    superseded. The text of the current version again changes nothing. Returns (the current
    version, whether it was created now)."""
    require_role(actor, DECIDERS, "approve skid mappings")
    skid = get_skid(session, skid_code)
    parsed = parse_mapping(text, source)  # InputError naming the file and the key
    session.exec(select(AuditHead).where(AuditHead.id == 1).with_for_update()).first()
    versions = mappings(session, _id(skid.id))
    current = next((m for m in versions if m.status == "current"), None)
    if current is not None and current.sha256 == parsed.sha256:
        return current, False
    number = (versions[0].version if versions else 0) + 1
    journal = Journal(session, actor.login)
    if current is not None:
        journal.change(current, {"status": "superseded"}, reason=f"superseded by version {number}")
    record = SkidMapping(
        skid_id=_id(skid.id),
        version=number,
        text=text,
        sha256=parsed.sha256,  # of the UTF-8 text, as runs.mapping computes it
        approved_by=actor.login,
        approved_at=journal.at,
        status="current",
    )
    return journal.create(record), True


def current_mapping(session: Session, skid_code: str) -> tuple[str, int, str]:
    """The skid's current approved mapping: (text, version, SHA-256); RefusedError when it has
    none."""
    skid = get_skid(session, skid_code)
    found = session.exec(
        select(SkidMapping).where(SkidMapping.skid_id == skid.id, SkidMapping.status == "current")
    ).first()
    if found is None:
        raise RefusedError(
            f"skid {skid.code} has no approved mapping; an engineer or QA approves one with "
            "`fluxledger skid mapping`",
            field="code",
            value=skid.code,
            expected="a skid with an approved mapping",
        )
    return found.text, found.version, found.sha256


def calibration_warnings(
    session: Session, skid_id: int, at: datetime, channels: Iterable[str]
) -> list[str]:
    """One line per instrument in service that measures one of ``channels`` and whose
    calibration was due before the UTC calendar day of ``at`` (an aware time): due on that
    day itself is still in date. Ordered by tag."""
    if at.tzinfo is None:
        raise ValueError("at must be a timezone-aware datetime")  # a bug, not user input
    day = at.astimezone(UTC).date()
    wanted = set(channels)
    return [
        f"{i.tag} ({i.measures}) calibration was due {i.calibration_due.isoformat()}"
        for i in instruments(session, skid_id)
        if i.measures in wanted and i.calibration_due < day
    ]
