"""Care entries: a cleaning (``care clean``), a storage period (``care store``) and a
validated cleaning procedure (``care procedure add``)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from datetime import datetime
from typing import TYPE_CHECKING

from ledger.entries.fields import EITHER_UNITS, Field, Spec, label, when
from ledger.errors import InputError

if TYPE_CHECKING:
    from ledger.logbook.care import CleaningInput
    from ledger.logbook.procedures import ProcedureSpec

# A cleaning agent's strength: a molarity, a mass concentration or a percentage.
STRENGTH = ("molarity", "concentration", "fraction")

CLEANING = Spec(
    "care clean",
    (
        Field("serial", required=True),
        Field("agent", required=True),
        Field("concentration", "either", required=True, kinds=STRENGTH),
        Field("temperature", "temperature", required=True),
        Field("contact_time", "time", required=True),
        Field("reagent_lot", required=True),
        Field("rinse_ph", "number"),
        Field("rinse_conductivity", "conductivity"),
        Field("procedure"),
        Field("activity_time", "datetime"),
        Field("note"),
    ),
)


@dataclass(frozen=True)
class CleaningEntry:
    serial: str
    cleaning: CleaningInput
    procedure: str | None
    activity_at: datetime | None
    note: str | None


def cleaning(raw: Mapping[str, object]) -> CleaningEntry:
    """Check a cleaning entry (SI values; the concentration keeps its kind's SI unit)."""
    from ledger.logbook.care import CleaningInput

    v = CLEANING.parse(raw)
    value, kind = v["concentration"]
    c = CleaningInput(
        agent=v["agent"],
        concentration=value,
        concentration_unit=EITHER_UNITS[kind],
        temperature_k=v["temperature"],
        contact_time_s=v["contact_time"],
        reagent_lot=v["reagent_lot"],
        rinse_ph=v["rinse_ph"],
        rinse_conductivity_s_m=v["rinse_conductivity"],
        entered=v.entered(),
    )
    return CleaningEntry(v["serial"], c, v["procedure"], when(v), v["note"])


STORAGE = Spec(
    "care store",
    (
        Field("serial", required=True),
        Field("solution", required=True),
        Field("activity_time", "datetime"),
        Field("note"),
    ),
)


@dataclass(frozen=True)
class StorageEntry:
    serial: str
    solution: str
    activity_at: datetime | None
    note: str | None


def storage(raw: Mapping[str, object]) -> StorageEntry:
    """Check a storage entry."""
    v = STORAGE.parse(raw)
    return StorageEntry(v["serial"], v["solution"], when(v), v["note"])


PROCEDURE = Spec(
    "care procedure add",
    (
        Field("code", required=True),
        Field("title", required=True),
        Field("agent", required=True),
        Field("concentration_min", "either", required=True, kinds=STRENGTH),
        Field("concentration_max", "either", required=True, kinds=STRENGTH),
        Field("temperature_min", "temperature", required=True),
        Field("temperature_max", "temperature", required=True),
        Field("contact_time_min", "time", required=True),
        Field("rinse_ph_min", "number"),
        Field("rinse_ph_max", "number"),
        Field("rinse_conductivity_max", "conductivity"),
    ),
)


def procedure(raw: Mapping[str, object]) -> ProcedureSpec:
    """Check a cleaning-procedure entry: both concentration limits of one kind."""
    from ledger.logbook.procedures import ProcedureSpec

    v = PROCEDURE.parse(raw)
    low, kind = v["concentration_min"]
    high, kind_high = v["concentration_max"]
    if kind != kind_high:
        raise InputError(
            f"{label('concentration_min')} and {label('concentration_max')} are different "
            "kinds of concentration",
            field="concentration_max",
            value=v.raw["concentration_max"],
            expected=f"the same kind as {v.raw['concentration_min']!r}",
        )
    return ProcedureSpec(
        code=v["code"],
        title=v["title"],
        agent=v["agent"],
        concentration_min=low,
        concentration_max=high,
        concentration_unit=EITHER_UNITS[kind],
        temperature_min_k=v["temperature_min"],
        temperature_max_k=v["temperature_max"],
        contact_time_min_s=v["contact_time_min"],
        rinse_ph_min=v["rinse_ph_min"],
        rinse_ph_max=v["rinse_ph_max"],
        rinse_conductivity_max_s_m=v["rinse_conductivity_max"],
        entered=v.entered(),
    )
