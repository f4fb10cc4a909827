"""The one place where quantities typed by people become SI floats, and back (pint).

``parse("20 psi", "pressure", field="--feed")`` -> 137895.14... (Pa). A missing unit, a unit
of the wrong dimension, a non-number, NaN or infinity raises :class:`InputError` naming the
field, the value and the expected dimension. Pressures are gauge unless a caller says
otherwise. pint is imported on first use only, so commands that never parse stay fast.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import cache
from typing import TYPE_CHECKING, Any

from ledger.errors import InputError

if TYPE_CHECKING:
    import pint


@dataclass(frozen=True)
class Kind:
    """A physical kind: pint dimensionality, the SI unit we store, the unit we print."""

    dimensionality: str
    si: str
    display: str
    example: str


# Display units are spelled so that a stock pint UnitRegistry parses them (DEVELOPERS.md).
KINDS: dict[str, Kind] = {
    "pressure": Kind("[pressure]", "Pa", "bar", "20 psi, 1.4 bar, 138 kPa"),
    "flow": Kind("[volume] / [time]", "m**3/s", "mL/min", "250 mL/min, 15 L/h"),
    "flux": Kind("[length] / [time]", "m/s", "L/(m^2*h)", "30 LMH, 18 GFD"),
    "permeability": Kind(
        "[length] / [time] / [pressure]", "m/(s*Pa)", "L/(m^2*h*bar)", "300 LMH/bar"
    ),
    "temperature": Kind("[temperature]", "K", "degC", "15 degC, 59 degF, 293.15 K"),
    "area": Kind("[area]", "m**2", "m^2", "0.5 m^2, 1200 cm^2"),
    "length": Kind("[length]", "m", "mm", "0.5 mm, 30 cm"),
    "volume": Kind("[volume]", "m**3", "L", "2 L, 500 mL"),
    "time": Kind("[time]", "s", "min", "30 s, 10 min"),
    "shear_rate": Kind("1 / [time]", "1/s", "1/s", "4000 1/s"),
    "fraction": Kind("", "", "percent", "99.9 %, 0.999"),
    "concentration": Kind("[mass] / [volume]", "kg/m**3", "g/L", "5 g/L, 0.5 mg/mL"),
    "mass": Kind("[mass]", "kg", "g", "12 g, 1.5 kg"),
    "viscosity": Kind("[mass] / [length] / [time]", "Pa*s", "mPa*s", "1.0 mPa*s, 1 cP"),
    "resistance": Kind("1 / [length]", "1/m", "1/m", "1e12 1/m"),
    "surface_tension": Kind("[mass] / [time] ** 2", "N/m", "mN/m", "72.8 mN/m"),
    "pressure_rate": Kind("[pressure] / [time]", "Pa/s", "mbar/min", "0.5 psi/min, 10 mbar/min"),
    "gas_flow": Kind("[volume] / [time]", "m**3/s", "mL/min", "3 mL/min"),
    "areal_volume": Kind("[length]", "m", "L/m^2", "50 L/m^2"),
    "areal_mass": Kind("[mass] / [length] ** 2", "kg/m**2", "g/m^2", "20 g/m^2"),
    "density": Kind("[mass] / [volume]", "kg/m**3", "kg/m^3", "998 kg/m^3"),
    "kinematic_viscosity": Kind("[length] ** 2 / [time]", "m**2/s", "mm^2/s", "1.0 mm^2/s"),
    "velocity": Kind("[length] / [time]", "m/s", "m/s", "0.5 m/s"),
    "fiber_length": Kind("[length]", "m", "cm", "30 cm"),
    "u_constant": Kind("[temperature]", "K", "K", "2640 K"),
    "conductivity": Kind(
        "[current] ** 2 * [time] ** 3 / [mass] / [length] ** 3", "S/m", "uS/cm", "1.2 uS/cm"
    ),
    "molarity": Kind("[substance] / [volume]", "mol/m**3", "mol/L", "0.5 mol/L, 500 mM"),
}

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_HEADER = re.compile(r"^\s*(?P<name>[^\[\]]*?)\s*\[(?P<unit>[^\[\]]*)\]\s*$")
_ALIASES = (("%", " percent "), ("°C", "degC"), ("°F", "degF"), ("µ", "u"), ("μ", "u"), ("²", "^2"))


@cache
def registry() -> pint.UnitRegistry:
    """The application's unit registry, with the trade's flux units added."""
    import pint

    try:
        # pint's on-disk cache of its parsed definitions saves ~0.1 s on every command.
        ureg: pint.UnitRegistry = pint.UnitRegistry(
            autoconvert_offset_to_baseunit=True, cache_folder=":auto:"
        )
    except OSError:  # no writable cache folder: parse the definitions every time
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    # The on-disk cache may already hold them; defining twice only logs a warning.
    for name, definition in (
        ("LMH", "LMH = liter / meter ** 2 / hour"),
        ("GFD", "GFD = gallon / foot ** 2 / day"),
    ):
        if name not in ureg:
            ureg.define(definition)
    return ureg


def _clean_unit(unit: str) -> str:
    for old, new in _ALIASES:
        unit = unit.replace(old, new)
    return unit.strip()


def _dimension_word(kind: str) -> str:
    return kind.replace("_", " ")


def _expected(kind: str) -> str:
    k = KINDS[kind]
    return f"a {_dimension_word(kind)} with a unit, e.g. {k.example}"


def to_si(value: float, unit: str, kind: str, *, field: str, raw: object = None) -> float:
    """Convert ``value`` in ``unit`` to the SI unit of ``kind``; raise InputError if unfit."""
    k = KINDS[kind]
    shown = raw if raw is not None else f"{value} {unit}"
    ureg = registry()
    try:
        q = ureg.Quantity(value, _clean_unit(unit))
    # pint's parser raises many types for malformed text (its own errors, tokenize errors,
    # SyntaxError, KeyError...); any failure here means the user's unit text is unusable.
    except Exception as exc:
        raise InputError(
            f"{field}: unknown unit {unit!r} in {shown!r}; expected {_expected(kind)}",
            field=field,
            value=shown,
            expected=_expected(kind),
        ) from exc
    target = ureg.Quantity(1.0, k.si) if k.si else ureg.Quantity(1.0)
    if q.dimensionality != target.dimensionality:
        raise InputError(
            f"{field}: {shown!r} is {_what_it_is(q, ureg)}; expected {_expected(kind)}",
            field=field,
            value=shown,
            expected=_expected(kind),
        )
    si = float(q.to(k.si).magnitude) if k.si else float(q.to("dimensionless").magnitude)
    if not math.isfinite(si):
        raise InputError(
            f"{field}: {shown!r} is not a finite number",
            field=field,
            value=shown,
            expected=_expected(kind),
        )
    return si


def _what_it_is(q: Any, ureg: Any) -> str:
    """Name the kind a mistyped quantity has ("a flow"), or its dimensionality."""
    for name, k in KINDS.items():
        probe = ureg.Quantity(1.0, k.si) if k.si else ureg.Quantity(1.0)
        if probe.dimensionality == q.dimensionality:
            return f"a {_dimension_word(name)}"
    return f"of dimension {q.dimensionality or 'dimensionless'}"


def split_number(text: str, *, field: str, expected: str) -> tuple[float, str]:
    """Split "12.5 psi" into (12.5, "psi"); refuse non-numbers, NaN and infinity."""
    if not isinstance(text, str):
        text = str(text)
    m = _NUMBER.match(text)
    if m is None:
        low = text.strip().lower()
        why = (
            "is not a finite number"
            if low.lstrip("+-").startswith(("nan", "inf"))
            else "is not a number"
        )
        raise InputError(
            f"{field}: {text!r} {why}; expected {expected}",
            field=field,
            value=text,
            expected=expected,
        )
    number = float(m.group(1))
    if not math.isfinite(number):
        raise InputError(
            f"{field}: {text!r} is not a finite number; expected {expected}",
            field=field,
            value=text,
            expected=expected,
        )
    return number, m.group(2)


def parse(
    text: str,
    kind: str,
    *,
    field: str,
    default_unit: str | None = None,
    positive: bool = False,
    bare_ratio: bool = True,
) -> float:
    """Parse a quantity as people type it into the SI unit of ``kind``.

    A bare number is refused unless ``default_unit`` is given (and stated in the option's help).
    A fraction accepts "99.9 %" or, unless ``bare_ratio`` is False, a bare ratio such as
    "0.999" (the option's help must say so). With ``positive`` a value of zero or less is
    refused (areas, volumes, diameters...).
    """
    expected = _expected(kind)
    number, unit = split_number(text, field=field, expected=expected)
    if not unit:
        if kind == "fraction" and bare_ratio:
            value = number
        elif default_unit is None:
            raise InputError(
                f"{field}: {text!r} has no unit; expected {expected}",
                field=field,
                value=text,
                expected=expected,
            )
        else:
            value = to_si(number, default_unit, kind, field=field, raw=text)
    else:
        value = to_si(number, unit, kind, field=field, raw=text)
    if positive and value <= 0:
        raise InputError(
            f"{field}: {text!r} must be greater than zero",
            field=field,
            value=text,
            expected=f"a {_dimension_word(kind)} greater than zero",
        )
    return value


def split_header(header: str) -> tuple[str, str | None]:
    """Split a column header "flux [LMH]" into ("flux", "LMH"); no brackets -> (name, None)."""
    m = _HEADER.match(header)
    if m is None:
        return header.strip(), None
    return m.group("name"), m.group("unit").strip()


def from_si(value: float, kind: str, unit: str | None = None) -> float:
    """Express an SI value of ``kind`` in ``unit`` (default: the kind's display unit)."""
    k = KINDS[kind]
    target = unit or k.display
    ureg = registry()
    q = ureg.Quantity(value, k.si) if k.si else ureg.Quantity(value)
    return float(q.to(_clean_unit(target)).magnitude)


def quantity(value: float, kind: str, unit: str | None = None) -> dict[str, Any]:
    """A JSON-ready quantity ``{"value": ..., "unit": ...}`` in the display unit (DEVELOPERS.md)."""
    target = unit or KINDS[kind].display
    return {"value": from_si(value, kind, target), "unit": target}
