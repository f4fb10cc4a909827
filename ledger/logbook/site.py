"""The site's name and IANA time zone: two audited settings, admin only.

Times are stored in UTC; screens and records show them in the site's zone with the offset
(``ledger.rules.localtime``). The zone is meant to be set once when the site is set up. A
later change is allowed, because a site may have set it wrong, but it needs a reason and is
audited like every setting (old value -> new value). A record revision shows the zone that
was in force when it was issued (:func:`site_zone` with ``as_of``), so records issued before
a change still verify against the database.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import UTC, datetime, tzinfo
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from sqlmodel import Session, col, select

from ledger.errors import InputError
from ledger.logbook.auth import ADMINS, require_role
from ledger.logbook.required import required
from ledger.rules.names import shown
from ledger.store.audit import Journal
from ledger.store.tables import AuditEvent, Setting, UserAccount

NAME_KEY = "site.name"
ZONE_KEY = "site.timezone"
ZONE_EXPECTED = "an IANA time zone such as Europe/Berlin"


def check_zone(text: str) -> ZoneInfo:
    """The IANA zone named ``text`` (InputError naming the field ``time_zone`` otherwise)."""
    name = text.strip()
    try:
        if not name or name != text or name.startswith(("/", ".")) or ".." in name:
            raise ValueError(name)
        return ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError, OSError):
        raise InputError(
            f"time zone {shown(text)} is not known",
            field="time_zone",
            value=shown(text),
            expected=ZONE_EXPECTED,
        ) from None


def set_site(session: Session, actor: UserAccount, name: str, timezone: str, reason: str) -> Site:
    """Set the site's name and IANA time zone (an administrator; audited).

    The first setting needs a reason like every setting. Changing either later is allowed
    (a site may have set it wrong); the audit trail keeps the old and the new value and the
    reason. Setting the same values again writes nothing. Returns the settings now.
    """
    require_role(actor, ADMINS, "set the site's name and time zone")
    clean = required("name", name, "the site's name, e.g. Halden fill-finish", kind="name")
    zone = check_zone(timezone)
    why = required("reason", reason, "why the site's name or time zone is set", kind="text")
    _set(session, actor, NAME_KEY, clean, why)
    _set(session, actor, ZONE_KEY, zone.key, why)
    return site_settings(session)


def _set(session: Session, actor: UserAccount, key: str, value: str, reason: str) -> Setting:
    journal = Journal(session, actor.login)
    row = session.get(Setting, key)
    if row is None:
        return journal.create(Setting(key=key, value=value), reason=reason)
    journal.change(row, {"value": value}, reason=reason)
    return row


def _value(session: Session, key: str, as_of: datetime | None) -> str | None:
    """The setting's value, or the value it had at ``as_of`` (from its audit trail)."""
    row = session.get(Setting, key)
    if row is None or as_of is None:
        return row.value if row is not None else None
    if row.created_at > as_of:
        return None
    later = session.exec(
        select(AuditEvent)
        .where(AuditEvent.entity == "setting", AuditEvent.entity_id == key)
        .where(AuditEvent.field == "value", AuditEvent.at > as_of)
        .order_by(col(AuditEvent.seq))
    ).first()
    if later is None or later.old_value is None:
        return row.value
    return str(json.loads(later.old_value))


def site_zone(session: Session, as_of: datetime | None = None) -> tzinfo:
    """The site's time zone (UTC while none is set); with ``as_of``, the zone set then."""
    value = _value(session, ZONE_KEY, as_of)
    return ZoneInfo(value) if value else UTC


def site_name(session: Session, as_of: datetime | None = None) -> str | None:
    """The site's name, None while none is set; with ``as_of``, the name set then."""
    return _value(session, NAME_KEY, as_of)


@dataclass(frozen=True)
class Site:
    """The site's settings as set: None where nothing is set (times then show in UTC)."""

    name: str | None
    time_zone: str | None  # IANA key, e.g. "Europe/Berlin"


def site_settings(session: Session) -> Site:
    """The site's name and time zone as currently set."""
    return Site(_value(session, NAME_KEY, None), _value(session, ZONE_KEY, None))


# Display units per kind ------------------------------------------------------------------------

UNITS_PREFIX = "display."


def _display_setting(text: str) -> tuple[str, str]:
    """("pressure", "psi") from "pressure=psi", the unit checked against the kind (InputError
    naming the field ``set``, the value and what was expected)."""
    from ledger import units

    kind, sep, unit = text.partition("=")
    kind = kind.strip()
    if not sep or not kind or not unit.strip():
        raise InputError(
            f"--set: {shown(text)} is not KIND=UNIT",
            field="set",
            value=shown(text),
            expected="KIND=UNIT, e.g. pressure=psi or temperature=degC",
        )
    try:
        return kind, units.check_display_unit(kind, unit, field=f"--set {kind}")
    except InputError as err:
        err.field = "set"
        raise


def set_display_units(
    session: Session, actor: UserAccount, settings: list[str], reason: str
) -> dict[str, str]:
    """Set the units values nobody typed are shown in, per kind ("pressure=psi"; an
    administrator; audited as settings ``display.<kind>``). Every setting is checked before
    anything is written. Returns the display units now set (kind -> unit)."""
    require_role(actor, ADMINS, "set the site's display units")
    if not settings:
        raise InputError(
            "--set: give at least one KIND=UNIT",
            field="set",
            value=None,
            expected="KIND=UNIT, e.g. pressure=psi",
        )
    chosen = dict(_display_setting(text) for text in settings)
    why = required("reason", reason, "why the display units are set", kind="text")
    for kind, unit in chosen.items():
        row = session.get(Setting, UNITS_PREFIX + kind)
        if row is None or row.value != unit:
            _set(session, actor, UNITS_PREFIX + kind, unit, why)
    return display_units(session)


def display_unit_rows(chosen: dict[str, str]) -> list[tuple[str, str, bool]]:
    """(kind, unit shown, set by the site) for every kind, the site's ``chosen`` units first
    applied over the kinds' own display units."""
    from ledger.units import KINDS

    return [(kind, chosen.get(kind, k.display), kind in chosen) for kind, k in KINDS.items()]


def display_units(session: Session) -> dict[str, str]:
    """The site's display unit of each kind that has one set (kind -> unit)."""
    rows = session.exec(select(Setting).where(col(Setting.key).startswith(UNITS_PREFIX)))
    return {r.key[len(UNITS_PREFIX) :]: r.value for r in rows}


# The site's agent list (hazard classes) ---------------------------------------------------------

AGENTS_KEY = "agents.hazards"  # JSON object: agent name -> hazard class


def _agent_setting(text: str) -> tuple[str, str]:
    """("sodium percarbonate", "oxidizer") from "sodium percarbonate=oxidizer" (InputError
    naming the field ``set``, the value and what was expected)."""
    from ledger.rules.hazards import HAZARD_CLASSES, check_class, key

    name, sep, klass = text.rpartition("=")
    expected = f"AGENT=CLASS with CLASS one of {', '.join(HAZARD_CLASSES)}"
    if not sep or not key(name):
        raise InputError(f"--set: {shown(text)} is not AGENT=CLASS", field="set",
                         value=shown(text), expected=expected)  # fmt: skip
    found = check_class(klass)
    if found is None:
        raise InputError(f"--set {shown(name.strip())}: {shown(klass.strip())} is not a hazard "
                         "class", field="set", value=shown(klass.strip()),
                         expected=expected)  # fmt: skip
    if len(key(name)) > 80:
        raise InputError("--set: the agent's name is longer than 80 characters", field="set",
                         value=shown(name.strip()), expected="an agent name of 80 characters "
                         "or fewer")  # fmt: skip
    return key(name), found


def agent_hazards(session: Session, as_of: datetime | None = None) -> dict[str, str]:
    """The site's own agent list (agent name -> hazard class) over the shipped one; with
    ``as_of``, the list as it stood then. Empty while the site has added none."""
    value = _value(session, AGENTS_KEY, as_of)
    if not value:
        return {}
    table = json.loads(value)
    return {str(k): str(v) for k, v in table.items()} if isinstance(table, dict) else {}


def set_agent_hazards(
    session: Session, actor: UserAccount, settings: list[str], reason: str
) -> dict[str, str]:
    """Add agents to the site's list or change their class ("NAME=CLASS"; an administrator;
    audited as the setting ``agents.hazards``). Every entry is checked before anything is
    written. Returns the site's list now."""
    require_role(actor, ADMINS, "set the site's agent list")
    if not settings:
        raise InputError("--set: give at least one AGENT=CLASS", field="set", value=None,
                         expected="AGENT=CLASS, e.g. 'sodium percarbonate=oxidizer'")  # fmt: skip
    chosen = dict(_agent_setting(text) for text in settings)
    why = required("reason", reason, "why the agent list is changed", kind="text")
    now = agent_hazards(session)
    new = {**now, **chosen}
    if new != now:
        _set(session, actor, AGENTS_KEY, json.dumps(dict(sorted(new.items())),
                                                    ensure_ascii=False), why)  # fmt: skip
    return new


def caution_of(session: Session, agent: str, as_of: datetime | None = None) -> str | None:
    """The caution to print with ``agent`` (a cleaning's agent, a solution, a storage
    solution) from its hazard class on the site's agent list; None for class "none"."""
    from ledger.rules.hazards import hazard_of

    return hazard_of(agent, agent_hazards(session, as_of)).caution
