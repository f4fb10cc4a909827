"""Skid entries: a skid (``skid add``), an instrument (``skid instrument``) and a mapping
file to approve (``skid mapping``). Texts stay texts; the calibration due date is an ISO
calendar date."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from datetime import date

from ledger.entries.fields import Field, Spec

SKID = Spec(
    "skid add",
    (Field("code", required=True), Field("description", required=True), Field("location")),
)


@dataclass(frozen=True)
class SkidEntry:
    code: str
    description: str
    location: str | None


def skid(raw: Mapping[str, object]) -> SkidEntry:
    """Check a skid's registration (the service applies the identifier and text rules)."""
    v = SKID.parse(raw)
    return SkidEntry(v["code"], v["description"], v["location"])


INSTRUMENT = Spec(
    "skid instrument",
    (
        Field("code", required=True),
        Field("tag", required=True),
        Field("measures", required=True),
        Field("calibration_due", "date", required=True),
        Field("reason"),
    ),
)


@dataclass(frozen=True)
class InstrumentEntry:
    code: str
    tag: str
    measures: str
    calibration_due: date
    reason: str | None


def instrument(raw: Mapping[str, object]) -> InstrumentEntry:
    """Check an instrument entry: its skid, tag, measured channel and calibration due date."""
    v = INSTRUMENT.parse(raw)
    measures = str(v["measures"]).strip()
    return InstrumentEntry(v["code"], v["tag"], measures, v["calibration_due"], v["reason"])


MAPPING = Spec("skid mapping", (Field("code", required=True), Field("file", required=True)))


@dataclass(frozen=True)
class MappingEntry:
    code: str
    text: str  # the file's text exactly as read (UTF-8)
    source: str  # the path as given, named in every error


def mapping(raw: Mapping[str, object]) -> MappingEntry:
    """Read the mapping file to approve (small UTF-8 text; the service validates it)."""
    from ledger.runs.mapping import read_text

    v = MAPPING.parse(raw)
    path = str(v["file"])
    return MappingEntry(v["code"], read_text(path, "file", "a readable TOML mapping file"), path)
