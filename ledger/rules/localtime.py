"""Local time as a site shows it: ISO 8601 in the site's zone with its UTC offset.

Storage stays UTC; only what people read (screens, records) is shown in local time, and
always with its offset, so a time in the hour that repeats when daylight saving ends is not
ambiguous.
"""

from __future__ import annotations

from datetime import UTC, datetime, tzinfo


def local_text(at: datetime, zone: tzinfo = UTC) -> str:
    """``at`` (timezone-aware) as ISO 8601 local time in ``zone`` with its offset, to the
    second, e.g. "2026-03-29T01:30:00+01:00". A naive ``at`` is refused: its zone is
    unknown."""
    if at.tzinfo is None or at.utcoffset() is None:
        raise ValueError(f"{at!r} has no time zone; stored times are aware UTC")
    return at.astimezone(zone).isoformat(timespec="seconds")
