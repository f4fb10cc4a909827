"""Entries of the bench calculators (``calc ...``): fields as typed, checked inputs in SI out.

Each function takes the fields by name (the option without dashes, ``lumen_id`` for
``--lumen-id``), parses every given one, checks which go together, reads the points file if
there is one, and returns the calculator's inputs in SI: lengths m, flows m³/s, pressures Pa
(gauge unless said), temperatures K, volumes m³, fractions as plain ratios. A field left out
takes the default of ``<NAME>_DEFAULTS``, which the CLI shows as its option's default.
The integrity calculators are in :mod:`ledger.entries.calc_integrity`.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

from ledger.entries.defaults import (
    CONCENTRATION_DEFAULTS,
    DIAFILTRATION_DEFAULTS,
    LIFETIME_DEFAULTS,
    SHEAR_DEFAULTS,
)
from ledger.entries.fields import Field, Spec, exactly_one, together
from ledger.errors import InputError

if TYPE_CHECKING:
    from ledger.pointsfile import Points
    from ledger.science.trending import Model


def typed_unit(text: str | None) -> str | None:
    """The unit of an already checked quantity as typed ("0.1 psi/min" -> "psi/min")."""
    from ledger import units

    if text is None:
        return None
    _, unit = units.split_number(text, field="", expected="")
    return unit or None


# `calc viscosity` -----------------------------------------------------------------------------

VISCOSITY = Spec("calc viscosity", (Field("temperature", "temperature", required=True),))


@dataclass(frozen=True)
class ViscosityEntry:
    """The water temperature, K."""

    temperature: float


def viscosity(raw: Mapping[str, object]) -> ViscosityEntry:
    """Check the inputs of ``calc viscosity``."""
    v = VISCOSITY.parse(raw)
    return ViscosityEntry(temperature=v["temperature"])


# `calc shear` ---------------------------------------------------------------------------------

SHEAR = Spec(
    "calc shear",
    (
        Field("fibers", "integer", required=True),
        Field("lumen_id", "length", required=True, positive=True),
        Field("feed_flow", "flow", positive=True),
        Field("target_shear", "shear_rate", positive=True),
        Field("length", "length", positive=True),
        Field("temperature", "temperature"),
    ),
)


@dataclass(frozen=True)
class ShearEntry:
    """Inputs of ``calc shear``: lengths m, feed flow m³/s, shear rate 1/s, temperature K.

    Exactly one of ``feed_flow`` and ``target_shear`` is set.
    """

    fibers: int
    lumen_id: float
    feed_flow: float | None
    target_shear: float | None
    length: float | None
    temperature: float


def shear(raw: Mapping[str, object]) -> ShearEntry:
    """Check the inputs of ``calc shear``: a feed flow or a target shear, not both."""
    v = SHEAR.parse(raw, SHEAR_DEFAULTS)
    exactly_one(v, "feed_flow", "target_shear")
    return ShearEntry(
        fibers=v["fibers"],
        lumen_id=v["lumen_id"],
        feed_flow=v["feed_flow"],
        target_shear=v["target_shear"],
        length=v["length"],
        temperature=v["temperature"],
    )


# `calc diafiltration` -------------------------------------------------------------------------

DIAFILTRATION = Spec(
    "calc diafiltration",
    (
        Field("removal", "fraction"),
        Field("diavolumes", "number"),
        Field("sieving", "fraction"),
        Field("volume", "volume", positive=True),
        Field("dilution_factor", "number"),
    ),
)


@dataclass(frozen=True)
class DiafiltrationEntry:
    """Inputs of ``calc diafiltration``: fractions as ratios, volume m³.

    Exactly one of ``removal`` and ``diavolumes`` is set.
    """

    removal: float | None
    diavolumes: float | None
    sieving: float
    volume: float | None
    dilution_factor: float | None


def diafiltration(raw: Mapping[str, object]) -> DiafiltrationEntry:
    """Check the inputs of ``calc diafiltration``: a removal or diavolumes, not both."""
    v = DIAFILTRATION.parse(raw, DIAFILTRATION_DEFAULTS)
    exactly_one(v, "removal", "diavolumes")
    return DiafiltrationEntry(
        removal=v["removal"],
        diavolumes=v["diavolumes"],
        sieving=v["sieving"],
        volume=v["volume"],
        dilution_factor=v["dilution_factor"],
    )


# `calc concentration` -------------------------------------------------------------------------

CONCENTRATION = Spec(
    "calc concentration",
    (
        Field("factor", "number"),
        Field("initial_volume", "volume", positive=True),
        Field("final_volume", "volume", positive=True),
        Field("rejection", "fraction"),
        Field("initial_concentration", "concentration", positive=True),
        Field("area", "area", positive=True),
    ),
)


@dataclass(frozen=True)
class ConcentrationEntry:
    """Inputs of ``calc concentration``: volumes m³, concentration kg/m³, area m².

    Either ``factor`` is set (and perhaps ``initial_volume``), or both volumes are.
    """

    factor: float | None
    initial_volume: float | None
    final_volume: float | None
    rejection: float
    initial_concentration: float | None
    area: float | None


def concentration(raw: Mapping[str, object]) -> ConcentrationEntry:
    """Check the inputs of ``calc concentration``: a factor, or the volumes before and after."""
    v = CONCENTRATION.parse(raw, CONCENTRATION_DEFAULTS)
    volumes = v.given("initial_volume", "final_volume")
    if v["factor"] is not None:
        if len(volumes) == 2:
            raise InputError(
                "give --factor, or --initial-volume with --final-volume, not both",
                field="factor",
                value=v.raw["factor"],
                expected="one way of stating the factor",
            )
    elif len(volumes) < 2:
        missing = [n for n in ("initial_volume", "final_volume") if n not in volumes]
        raise InputError(
            "give --factor, or both --initial-volume and --final-volume",
            field="factor" if not volumes else missing[0],
            value=None,
            expected="a factor or two volumes",
        )
    return ConcentrationEntry(
        factor=v["factor"],
        initial_volume=v["initial_volume"],
        final_volume=v["final_volume"],
        rejection=v["rejection"],
        initial_concentration=v["initial_concentration"],
        area=v["area"],
    )


# `calc optimum` -------------------------------------------------------------------------------

OPTIMUM = Spec(
    "calc optimum",
    (
        Field("points_file", required=True),
        Field("product_mass", "mass", positive=True),
        Field("diavolumes", "number"),
        Field("area", "area", positive=True),
        Field("at_concentration", "concentration", positive=True),
    ),
)


@dataclass(frozen=True)
class OptimumEntry:
    """Inputs of ``calc optimum``: the points (columns ``concentration`` kg/m³ and ``flux``
    m/s) and, for the time and buffer, product mass kg, diavolumes and area m² (all three or
    none); ``at_concentration`` kg/m³."""

    points: Points
    product_mass: float | None
    diavolumes: float | None
    area: float | None
    at_concentration: float | None


def optimum(raw: Mapping[str, object]) -> OptimumEntry:
    """Check the inputs of ``calc optimum`` and read its flux-against-concentration points."""
    from ledger.pointsfile import Column, read_points

    v = OPTIMUM.parse(raw)
    together(v, "time and buffer", "product_mass", "diavolumes", "area")
    pts = read_points(
        v["points_file"],
        [Column("concentration", "concentration"), Column("flux", "flux")],
        minimum=2,
    )
    return OptimumEntry(
        points=pts,
        product_mass=v["product_mass"],
        diavolumes=v["diavolumes"],
        area=v["area"],
        at_concentration=v["at_concentration"],
    )


# `calc lifetime` ------------------------------------------------------------------------------

LIFETIME = Spec(
    "calc lifetime",
    (
        Field("points_file", required=True),
        Field("limit", "fraction", required=True, positive=True, bare_ratio=False),
        Field("model"),
        Field("baseline_cycles", "integer"),
    ),
)
LIFE_MODELS: tuple[Model, ...] = ("linear", "exponential")


@dataclass(frozen=True)
class LifetimeEntry:
    """Inputs of ``calc lifetime``: the points (columns ``cycle`` and ``recovery`` as a
    ratio), the recovery limit as a ratio, the fit model and the baseline points (or None)."""

    points: Points
    limit: float
    model: Model
    baseline_cycles: int | None


def lifetime(raw: Mapping[str, object]) -> LifetimeEntry:
    """Check the inputs of ``calc lifetime`` and read its recovery-per-cycle points."""
    from ledger.pointsfile import Column, read_points

    v = LIFETIME.parse(raw, LIFETIME_DEFAULTS)
    model = next((m for m in LIFE_MODELS if m == str(v["model"])), None)
    if model is None:
        raise InputError(
            f"--model {v['model']!r} is unknown",
            field="model",
            value=v["model"],
            expected=" or ".join(LIFE_MODELS),
        )
    pts = read_points(
        v["points_file"], [Column("cycle", None), Column("recovery", "fraction")], minimum=3
    )
    baseline = v["baseline_cycles"]
    if baseline is not None and not 2 <= baseline <= len(pts):
        raise InputError(
            f"--baseline-cycles {baseline} is outside 2..{len(pts)}",
            field="baseline_cycles",
            value=baseline,
            expected=f"a number of points from 2 to {len(pts)}",
        )
    return LifetimeEntry(points=pts, limit=v["limit"], model=model, baseline_cycles=baseline)
