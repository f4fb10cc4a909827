"""The filters of the audit trail page as typed: who, what action, which table, module or run,
from and to which time, and the page number.

A time is a date (the whole day), a date and time in the site's zone, or a date and time with
its UTC offset; every time comes out aware, in UTC. Blank fields are filters left out.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from datetime import UTC, date, datetime, time, tzinfo

from ledger.entries.fields import Field, Spec, label
from ledger.errors import InputError
from ledger.logbook.audit_trail import TrailFilter

TRAIL = Spec(
    "audit trail",
    (
        Field("user"),
        Field("action"),
        Field("entity"),
        Field("module"),
        Field("run", "integer"),
        Field("since"),
        Field("until"),
        Field("page", "integer"),
    ),
)
TIME_EXPECTED = (
    "a date (2026-11-30: the whole day), a date and time in the site's time "
    "(2026-11-30T14:05) or with its offset (2026-11-30T14:05+01:00)"
)


@dataclass(frozen=True)
class TrailQuery:
    """The checked filter and which page of it (from 1)."""

    filter: TrailFilter
    page: int


def trail_query(raw: Mapping[str, object], zone: tzinfo = UTC) -> TrailQuery:
    """Check the typed filters; ``zone`` is the site's, for times typed without an offset."""
    v = TRAIL.parse(raw)
    run, page = v["run"], v.get("page", 1)
    for name, number in (("run", run), ("page", page)):
        if number is not None and number < 1:
            raise InputError(
                f"{label(name)}: {number} is not allowed",
                field=name,
                value=number,
                expected="a whole number of 1 or more",
            )
    since = moment(v["since"], "since", zone, end_of_day=False)
    until = moment(v["until"], "until", zone, end_of_day=True)
    if since is not None and until is not None and until < since:
        raise InputError(
            f"{label('until')}: {v['until']!r} is before {label('since')} {v['since']!r}",
            field="until",
            value=v["until"],
            expected="a time at or after the start",
        )
    wanted = TrailFilter(
        user=_text(v["user"]),
        action=_text(v["action"]),
        entity=_text(v["entity"]),
        serial=_text(v["module"]),
        run=run,
        since=since,
        until=until,
    )
    return TrailQuery(wanted, page)


def _text(value: str | None) -> str | None:
    return value.strip() or None if value is not None else None


def moment(text: str | None, name: str, zone: tzinfo, *, end_of_day: bool) -> datetime | None:
    """A typed time as aware UTC (None for a blank field). A date alone is the start of that
    day in ``zone``, or with ``end_of_day`` its last microsecond."""
    raw = (text or "").strip()
    if not raw:
        return None
    try:
        if len(raw) == 10:
            day = date.fromisoformat(raw)
            at = datetime.combine(day, time.max if end_of_day else time.min, zone)
        else:
            at = datetime.fromisoformat(raw.replace("Z", "+00:00").replace("z", "+00:00"))
    except ValueError:
        raise InputError(
            f"{label(name)}: {raw!r} is not a date or a date and time",
            field=name,
            value=raw,
            expected=TIME_EXPECTED,
        ) from None
    if at.tzinfo is None:
        at = at.replace(tzinfo=zone)
    return at.astimezone(UTC)
