"""Care entries: a cleaning (``care clean``), a cleaning cycle (``care cycle``), a storage
period (``care store``), a validated cleaning procedure (``care procedure add``) and a
prepared solution (``care solution prepare`` / ``verify``)."""

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
    from ledger.logbook.solutions import Preparation, Verification

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


CYCLE = Spec(
    "care cycle",
    (
        Field("serial", required=True),
        Field("procedure", required=True),
        Field("activity_time", "datetime"),
        Field("note"),
    ),
)
# What a cycle step may be given (the procedure step says which it takes).
CYCLE_VALUES = ("solution", "concentration", "temperature", "contact_time", "flow", "tmp",
                "endpoint")  # fmt: skip
MAX_CYCLE_STEPS = 20


@dataclass(frozen=True)
class CycleEntry:
    serial: str
    procedure: str
    values: dict[int, dict[str, str]]  # step number -> value name -> text as typed
    activity_at: datetime | None
    note: str | None


def cycle(raw: Mapping[str, object]) -> CycleEntry:
    """Check ``care cycle``'s fields; each ``--value N.NAME=TEXT`` names its step and value,
    parsed by the service against the procedure step (its kinds and units)."""
    from ledger.entries.runs import pairs

    v = CYCLE.parse(raw)
    given = pairs(list(raw.get("values") or ()), "value")  # type: ignore[call-overload]
    out: dict[int, dict[str, str]] = {}
    for key, text in given.items():
        number, dot, name = key.partition(".")
        number = number.strip()
        name = name.strip()
        if not dot or not number.isdigit() or name not in CYCLE_VALUES:
            raise InputError(
                f"--value {key!r} is not STEP.NAME",
                field="value",
                value=key,
                expected="STEP.NAME=TEXT with NAME one of "
                + ", ".join(CYCLE_VALUES)
                + ", e.g. 2.temperature='45 degC'",
            )
        step = int(number)
        if not 1 <= step <= MAX_CYCLE_STEPS:
            raise InputError(
                f"--value {key!r}: step {step} is out of range",
                field="value",
                value=key,
                expected=f"a step number from 1 to {MAX_CYCLE_STEPS}",
            )
        out.setdefault(step, {})[name] = text
    return CycleEntry(v["serial"], v["procedure"], out, when(v), v["note"])


SOLUTION_PREPARE = Spec(
    "care solution prepare",
    (
        Field("code", required=True),
        Field("agent", required=True),
        Field("target", "either", required=True, kinds=STRENGTH),
        Field("reagent_lot", required=True),
        Field("reagent_expiry", "date", required=True),
        Field("use_by", "datetime", required=True),
        Field("activity_time", "datetime"),
        Field("note"),
    ),
)


def solution_prepare(raw: Mapping[str, object]) -> Preparation:
    """Check a prepared solution's entry (the target keeps its kind's SI unit)."""
    from ledger.logbook.solutions import Preparation

    v = SOLUTION_PREPARE.parse(raw)
    value, kind = v["target"]
    return Preparation(
        code=v["code"],
        agent=v["agent"],
        target=value,
        unit=EITHER_UNITS[kind],
        reagent_lot=v["reagent_lot"],
        reagent_expiry=v["reagent_expiry"],
        use_by=v["use_by"],
        prepared_at=when(v),
        note=v["note"],
        entered=v.entered(),
    )


SOLUTION_VERIFY = Spec(
    "care solution verify",
    (
        Field("code", required=True),
        Field("conductivity", "conductivity", positive=True),
        Field("reading_temperature", "temperature"),
        Field("titration", "either", kinds=STRENGTH, positive=True),
        Field("calibration", required=True),
        Field("activity_time", "datetime"),
    ),
)


@dataclass(frozen=True)
class VerifyEntry:
    code: str
    verification: Verification


def solution_verify(raw: Mapping[str, object]) -> VerifyEntry:
    """Check a solution's verification: a conductivity reading with its temperature, or a
    titrated strength — one of the two."""
    from ledger.logbook.solutions import Verification

    v = SOLUTION_VERIFY.parse(raw)
    by_conductivity = v["conductivity"] is not None
    if by_conductivity == (v["titration"] is not None):
        raise InputError(
            "give --conductivity (with --reading-temperature) or --titration, one of the two",
            field="conductivity",
            value=v.raw.get("conductivity") or v.raw.get("titration"),
            expected="--conductivity '98 mS/cm' --reading-temperature '20 degC', or "
            "--titration '0.49 mol/L'",
        )
    if by_conductivity:
        if v["reading_temperature"] is None:
            raise InputError(
                "--conductivity needs --reading-temperature (the solution's temperature at "
                "the reading)",
                field="reading_temperature",
                value=None,
                expected="a temperature, e.g. '21.5 degC'",
            )
        ver = Verification("conductivity", v["calibration"], conductivity_s_m=v["conductivity"],
                           temperature_k=v["reading_temperature"], verified_at=when(v),
                           entered=v.entered())  # fmt: skip
    else:
        value, kind = v["titration"]
        ver = Verification("titration", v["calibration"], titrated=value,
                           unit=EITHER_UNITS[kind], verified_at=when(v),
                           entered=v.entered())  # fmt: skip
    return VerifyEntry(v["code"], ver)
