"""Activity times: the system clock, or an explicit, offset-bearing time for a late entry."""

from __future__ import annotations

from datetime import UTC, datetime

from ledger.errors import InputError


def parse_time(text: str, *, field: str = "activity_time") -> datetime:
    """An ISO 8601 time with its UTC offset ("2026-11-30T14:05+01:00", "...Z") -> aware UTC."""
    raw = text.strip()
    try:
        value = datetime.fromisoformat(raw.replace("Z", "+00:00").replace("z", "+00:00"))
    except ValueError:
        raise InputError(
            f"{raw!r} is not a date and time",
            field=field,
            value=text,
            expected="ISO 8601 with a UTC offset, e.g. 2026-11-30T14:05+01:00",
        ) from None
    if value.tzinfo is None:
        raise InputError(
            f"{raw!r} has no UTC offset",
            field=field,
            value=text,
            expected="a time with its offset, e.g. 2026-11-30T14:05+01:00 or 2026-11-30T13:05Z",
        )
    return value.astimezone(UTC)


def activity_time(given: datetime | None, now: datetime) -> tuple[datetime, bool]:
    """(time the activity happened, late flag). A given time must not be in the future."""
    if given is None:
        return now, False
    if given > now:
        raise InputError(
            f"activity time {given.isoformat()} is in the future (now {now.isoformat()})",
            field="activity_time",
            value=given.isoformat(),
            expected="a time at or before now",
        )
    return given, True
