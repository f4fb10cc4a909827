"""How values appear on the pages: fractions as percentages, times in UTC with their offset,
a missing value as a dash; and any record as plain JSON for a page's JSON twin."""

from __future__ import annotations

import dataclasses
from datetime import date, datetime
from typing import Any

DASH = "—"


def percent(fraction: float | None) -> str:
    """A fraction (0.87) as "87.0 %"."""
    return DASH if fraction is None else f"{100 * fraction:.1f} %"


def when(at: datetime | None) -> str:
    """An aware time as "2026-11-28 13:05 UTC"."""
    return DASH if at is None else at.strftime("%Y-%m-%d %H:%M UTC")


def number(x: float | None, digits: int = 4) -> str:
    """A number to ``digits`` significant digits."""
    return DASH if x is None else f"{x:.{digits}g}"


def words(text: str | None) -> str:
    """A stored status word for reading: "awaiting_cleaning" → "awaiting cleaning"."""
    return DASH if not text else text.replace("_", " ")


def plain(value: Any) -> Any:
    """``value`` (dataclasses, tuples, times) as JSON-ready lists, dicts, numbers and text."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, set, frozenset)):
        return [plain(v) for v in value]
    if isinstance(value, (datetime, date)):
        return value.isoformat()
    return value


FILTERS = {"percent": percent, "when": when, "number": number, "words": words}
