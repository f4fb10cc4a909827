"""The integrity-test entry of the logbook (``test integrity``): a pressure decay, from
readings or from start, end and hold time, or a bubble point."""

from __future__ import annotations

from collections.abc import Mapping
from contextlib import AbstractContextManager, nullcontext
from dataclasses import dataclass
from datetime import datetime
from typing import TYPE_CHECKING

from ledger.entries.fields import Field, Spec, refuse_with, when

if TYPE_CHECKING:
    from ledger.logbook.integrity import DecayInput
    from ledger.pointsfile import Points

INTEGRITY_TEST = Spec(
    "test integrity",
    (
        Field("serial", required=True),
        Field("readings", help="CSV of the hold: 'time [min]' and 'pressure [psi]' columns"),
        Field("start", "pressure"),
        Field("end", "pressure"),
        Field("hold_time", "time"),
        Field("test_pressure", "pressure"),
        Field("upstream_volume", "volume"),
        Field("bubble_point", "pressure"),
        Field("temperature", "temperature"),
        Field("activity_time", "datetime"),
        Field("note"),
    ),
)


@dataclass(frozen=True)
class IntegrityEntry:
    """A decay (``decay`` set) or a bubble point (``bubble_point_pa`` set), SI."""

    serial: str
    decay: DecayInput | None
    bubble_point_pa: float | None
    temperature_k: float | None
    activity_at: datetime | None
    note: str | None
    readings: Points | None = None
    entered: dict[str, str] | None = None  # quantity options as typed ("30 psi")

    def bubble_point(self) -> float:
        """The bubble point (Pa); only for a bubble-point entry."""
        if self.bubble_point_pa is None:
            raise ValueError("not a bubble-point entry")  # a bug, not user input
        return self.bubble_point_pa

    def blame(self) -> AbstractContextManager[None]:
        """Attribute a later error on the readings to the readings file's line."""
        return self.readings.blame() if self.readings is not None else nullcontext()


def read_decay_readings(path: str) -> Points:
    """A pressure-hold readings file: 'time' and 'pressure' columns with units, 2 rows or more."""
    from ledger.pointsfile import Column, read_points

    return read_points(path, [Column("time", "time"), Column("pressure", "pressure")], minimum=2)


def integrity_test(raw: Mapping[str, object]) -> IntegrityEntry:
    """Check an integrity-test entry."""
    from ledger.logbook.integrity import DecayInput

    v = INTEGRITY_TEST.parse(raw)
    common = dict(
        serial=v["serial"],
        temperature_k=v["temperature"],
        activity_at=when(v),
        note=v["note"],
        entered=v.entered(),
    )
    if v["bubble_point"] is not None:
        refuse_with(
            v, "bubble_point", "is a bubble-point test and takes no decay values",
            "readings", "start", "end", "hold_time", "test_pressure", "upstream_volume",
        )  # fmt: skip
        return IntegrityEntry(decay=None, bubble_point_pa=v["bubble_point"], **common)
    pts = None
    pairs = None
    if v["readings"] is not None:
        pts = read_decay_readings(v["readings"])
        pairs = list(zip(pts.columns["time"], pts.columns["pressure"], strict=True))
    decay = DecayInput(
        test_pressure_pa=v["test_pressure"],
        readings=pairs,
        start_pa=v["start"],
        end_pa=v["end"],
        hold_time_s=v["hold_time"],
        upstream_volume_m3=v["upstream_volume"],
        temperature_k=v["temperature"],
    )
    return IntegrityEntry(decay=decay, bubble_point_pa=None, readings=pts, **common)
