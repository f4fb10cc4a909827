"""The processing systems (skids) runs are made on: the skid, its instruments and its
approved column mappings. Times are UTC; calibration due dates are calendar dates.

The tables join ``tables.RECORDS`` here, so ``audit verify`` covers them and the Journal
knows their entity names.
"""

from __future__ import annotations

from datetime import date, datetime

from sqlalchemy import Index
from sqlmodel import Field

from ledger.store.tables import RECORDS, Recorded, Voidable
from ledger.store.types import UTCDateTime

MAPPING_STATUSES = ("current", "superseded")


class Skid(Recorded, table=True):
    """A registered processing system, named by its code (an identifier, unique ignoring case)."""

    __table_args__ = ({"sqlite_autoincrement": True},)

    id: int | None = Field(default=None, primary_key=True)
    code: str = Field(max_length=64, unique=True)
    description: str
    location: str | None = None


class SkidInstrument(Voidable, table=True):
    """One instrument of a skid: its tag, the mapped channel it measures and when its
    calibration is due. A replaced instrument is voided with the reason; the new one is a
    new row, so the history of a tag stays."""

    __tablename__ = "skid_instrument"
    __table_args__ = (
        Index("ix_skid_instrument_skid_tag", "skid_id", "tag"),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    skid_id: int = Field(foreign_key="skid.id")
    tag: str = Field(max_length=64)
    measures: str = Field(max_length=32)  # a channel of ledger.runs.mapping.CHANNEL_KINDS
    calibration_due: date


class SkidMapping(Recorded, table=True):
    """One approved version (1, 2, ...) of a skid's column mapping, kept as text with its
    SHA-256; approving a new version supersedes the current one."""

    __tablename__ = "skid_mapping"
    __table_args__ = (
        Index("ix_skid_mapping_skid_version", "skid_id", "version", unique=True),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    skid_id: int = Field(foreign_key="skid.id")
    version: int
    text: str
    sha256: str = Field(max_length=64)
    approved_by: str = Field(max_length=64)
    approved_at: datetime = Field(sa_type=UTCDateTime)
    status: str = Field(default="current", max_length=16)  # current, superseded


RECORDS.update({"skid": Skid, "skid_instrument": SkidInstrument, "skid_mapping": SkidMapping})
