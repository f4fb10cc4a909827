"""Entries of the integrity calculators (``calc decay``, ``calc bubble-point``), SI out.

Pressures in Pa (gauge, except the absolute atmosphere), decay rates Pa/s, volumes m³, flows
m³/s, temperatures K, lengths m, surface tension N/m, angles rad.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

from ledger.entries.calc import typed_unit
from ledger.entries.defaults import BUBBLE_POINT_DEFAULTS, DECAY_DEFAULTS
from ledger.entries.fields import Field, Spec, exactly_one, together
from ledger.errors import InputError

if TYPE_CHECKING:
    from ledger.pointsfile import Points

# `calc decay` ---------------------------------------------------------------------------------

LIMIT_KINDS = ("pressure_rate", "gas_flow")

DECAY = Spec(
    "calc decay",
    (
        Field("volume", "volume", required=True, positive=True),
        Field("rate", "pressure_rate"),
        Field("readings_file"),
        Field("atmosphere", "pressure", positive=True),
        Field("limit", "either", kinds=LIMIT_KINDS),
        Field("test_pressure", "pressure", positive=True),
        Field("back_pressure", "pressure"),
        Field("operating_tmp", "pressure", positive=True),
        Field("filtrate_flow", "flow", positive=True),
        Field("vcf", "number"),
        Field("temperature", "temperature"),
    ),
)
# The unit a decay rate is shown in when neither --rate nor --limit gives one.
RATE_UNIT = "mbar/min"


@dataclass(frozen=True)
class AlcrInputs:
    """The pressures of the air–liquid conversion ratio, Pa gauge."""

    test_pressure: float
    back_pressure: float
    operating_tmp: float


@dataclass(frozen=True)
class DecayEntry:
    """Inputs of ``calc decay``. Exactly one of ``rate`` (Pa/s) and ``readings`` (columns
    ``time`` s and ``pressure`` Pa gauge) is set; ``limit`` is of ``limit_kind``
    (``pressure_rate`` Pa/s or ``gas_flow`` m³/s); ``*_unit`` are the units as typed."""

    volume: float
    atmosphere: float
    rate: float | None
    readings: Points | None
    rate_unit: str
    limit: float | None
    limit_kind: str | None
    limit_unit: str | None
    alcr: AlcrInputs | None
    filtrate_flow: float | None
    vcf: float
    temperature: float


def decay(raw: Mapping[str, object]) -> DecayEntry:
    """Check the inputs of ``calc decay``: a rate or a readings file, a limit of either kind,
    and the ALCR pressures together or not at all."""
    from ledger.entries.integrity import read_decay_readings

    try:
        v = DECAY.parse(raw, DECAY_DEFAULTS)
    except InputError as err:
        if err.field != "limit":
            raise
        raise InputError(
            f"--limit: {err.value!r} is neither a decay rate nor a gas flow",
            field="limit",
            value=err.value,
            expected="a pressure per time ('0.1 psi/min') or a flow ('2 mL/min')",
        ) from None
    exactly_one(v, "rate", "readings_file")
    limit, limit_kind = v["limit"] if v["limit"] is not None else (None, None)
    limit_unit = typed_unit(v.raw.get("limit"))
    rate_unit = (
        typed_unit(v.raw.get("rate"))
        or (limit_unit if limit_kind == "pressure_rate" else None)
        or RATE_UNIT
    )
    alcr = None
    if together(v, "ALCR", "test_pressure", "operating_tmp"):
        alcr = AlcrInputs(v["test_pressure"], v["back_pressure"], v["operating_tmp"])
    readings = None
    if v["readings_file"] is not None:
        readings = read_decay_readings(v["readings_file"])
    return DecayEntry(
        volume=v["volume"],
        atmosphere=v["atmosphere"],
        rate=v["rate"],
        readings=readings,
        rate_unit=rate_unit,
        limit=limit,
        limit_kind=limit_kind,
        limit_unit=limit_unit,
        alcr=alcr,
        filtrate_flow=v["filtrate_flow"],
        vcf=v["vcf"],
        temperature=v["temperature"],
    )


# `calc bubble-point` --------------------------------------------------------------------------

BUBBLE_POINT = Spec(
    "calc bubble-point",
    (
        Field("pore_size", "length", positive=True),
        Field("pressure", "pressure"),
        Field("surface_tension", "surface_tension", positive=True),
        Field("contact_angle", "number"),
        Field("temperature", "temperature"),
    ),
)


@dataclass(frozen=True)
class BubblePointEntry:
    """Inputs of ``calc bubble-point``: exactly one of ``pore_size`` (m) and ``pressure``
    (Pa, differential); ``surface_tension`` N/m or None (water at ``temperature``, K);
    the contact angle in rad and, as typed, in degrees."""

    pore_size: float | None
    pressure: float | None
    surface_tension: float | None
    contact_angle: float
    contact_angle_deg: float
    temperature: float


def bubble_point(raw: Mapping[str, object]) -> BubblePointEntry:
    """Check the inputs of ``calc bubble-point``: a pore size or a pressure, not both."""
    v = BUBBLE_POINT.parse(raw, BUBBLE_POINT_DEFAULTS)
    exactly_one(v, "pore_size", "pressure")
    return BubblePointEntry(
        pore_size=v["pore_size"],
        pressure=v["pressure"],
        surface_tension=v["surface_tension"],
        contact_angle=math.radians(v["contact_angle"]),
        contact_angle_deg=v["contact_angle"],
        temperature=v["temperature"],
    )
