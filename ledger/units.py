"""The one place where quantities typed by people become SI floats, and back (pint).

``parse("20 psi", "pressure", field="--feed")`` -> 137895.14... (Pa). A missing unit, a unit
of the wrong dimension, a non-number, NaN or infinity raises :class:`InputError` naming the
field, the value and the expected dimension. Pressures are gauge unless a caller says
otherwise. pint is imported on first use only, so commands that never parse stay fast.

What is accepted: at most :data:`MAX_TEXT` characters; a number written with the ASCII digits
0-9, an optional sign, decimal point and exponent; then a unit made of unit names, integer
powers, ``*``, ``/`` and parentheses. Control and invisible characters are refused, and so is
an SI value that is not finite or whose magnitude is outside :data:`SI_MIN`..:data:`SI_MAX`
(other than zero), so that no later computation overflows or underflows on it.

Each (unit, kind) conversion is worked out once with pint as SI = a·x + b and then applied
by arithmetic, so reading thousands of values or printing them costs no pint call per value.
"""

from __future__ import annotations

import math
import re
import unicodedata
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from functools import cache, lru_cache
from typing import TYPE_CHECKING, Any, NamedTuple

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

MAX_TEXT = 200  # characters in a typed quantity
MAX_UNIT = 100  # characters in a unit
SI_MAX = 1e300  # largest SI magnitude accepted: products of two such values stay finite...
SI_MIN = 1e-300  # ...and the smallest non-zero one: far from the subnormal floats (< 2.2e-308)
MAX_POWER_DIGITS = 2  # a unit's exponent is a small integer ("m^2", "s**-1")

# ASCII digits only: Python's \d and float() would also take Arabic-Indic or full-width ones.
_NUMBER = re.compile(r"([-+]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][-+]?[0-9]+)?)(.*)", re.S)
_ALIASES = (
    ("%", " percent "),
    ("°C", "degC"),
    ("°F", "degF"),
    ("µ", "u"),
    ("μ", "u"),
    ("²", "^2"),
    ("³", "^3"),
    ("·", "*"),
    ("⋅", "*"),
)
_UNIT_TOKEN = re.compile(r"\*\*|[A-Za-z_][A-Za-z0-9_]*|[0-9]+(?:\.[0-9]+)?|[-+*/^() ]")
# Unicode categories never part of a quantity: control, format (zero-width, direction marks,
# BOM), surrogates, private use, unassigned, line and paragraph separators.
_INVISIBLE = frozenset({"Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp"})


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


class Linear(NamedTuple):
    """SI = a·x + b for one (unit, kind); ``problem`` instead when the unit is unusable."""

    a: float = 1.0
    b: float = 0.0
    affine: bool = True  # False: a logarithmic unit (dB...), converted by pint each time
    problem: str | None = None  # "unknown" or the kind of quantity the unit is
    detail: str = ""


def check_unit_text(unit: str, *, field: str, shown: object, expected: str) -> str:
    """The unit text cleaned of our aliases ("°C" -> "degC"); InputError if it is not made of
    unit names, small integer powers, ``*``, ``/``, parentheses and numbers.

    pint evaluates the numbers of a unit expression exactly, so "10**10**10" would never
    finish; only this grammar reaches it.
    """

    def refuse(why: str) -> InputError:
        return InputError(
            f"{field}: unknown unit {unit!r} in {shown!r} ({why}); expected {expected}",
            field=field,
            value=shown,
            expected=expected,
        )

    cleaned = _clean_unit(unit)
    if len(cleaned) > MAX_UNIT:
        raise refuse(f"{len(cleaned)} characters; at most {MAX_UNIT}")
    tokens: list[str] = []
    pos = 0
    while pos < len(cleaned):
        m = _UNIT_TOKEN.match(cleaned, pos)
        if m is None:
            raise refuse(f"the character {_char_name(cleaned[pos])} has no place in a unit")
        if m.group() != " ":
            tokens.append(m.group())
        pos = m.end()
    depth = 0
    i = 0
    while i < len(tokens):
        tok = tokens[i]
        if tok == "(":
            depth += 1
            if depth > 4:
                raise refuse("parentheses nested more than 4 deep")
        elif tok == ")":
            depth -= 1
        elif tok in ("+", "-"):
            raise refuse("a sign outside an exponent")
        elif tok[0].isdigit() and (tok != "1" or tokens[i + 1 : i + 2] != ["/"]):
            raise refuse('a number in a unit other than the 1 of "1/s"')
        elif tok in ("**", "^"):
            j = i + 1
            opened = j < len(tokens) and tokens[j] == "("
            j += opened
            j += j < len(tokens) and tokens[j] in ("+", "-")
            power = tokens[j] if j < len(tokens) else ""
            if not power.isdigit() or len(power) > MAX_POWER_DIGITS:
                raise refuse(f"a power must be an integer of at most {MAX_POWER_DIGITS} digits")
            j += 1
            if opened:
                if j >= len(tokens) or tokens[j] != ")":
                    raise refuse("an unclosed parenthesis")
                j += 1
            if j < len(tokens) and tokens[j] in ("**", "^"):
                raise refuse("a power of a power")
            i = j
            continue
        i += 1
    return cleaned


def _char_name(char: str) -> str:
    name = unicodedata.name(char, "")
    return f"U+{ord(char):04X}" + (f" ({name})" if name else "")


@lru_cache(maxsize=512)
def _linear(cleaned: str, kind: str) -> Linear:
    """Work out SI = a·x + b for ``cleaned`` (a checked unit) with pint, or why it cannot."""
    k = KINDS[kind]
    ureg = registry()
    try:
        q = ureg.Quantity(1.0, cleaned)
    # pint's parser raises many types for malformed text (its own errors, tokenize errors,
    # SyntaxError, KeyError, ZeroDivisionError...): any failure means the unit is unusable.
    except Exception as exc:
        return Linear(problem="unknown", detail=type(exc).__name__)
    target = ureg.Quantity(1.0, k.si) if k.si else ureg.Quantity(1.0)
    if q.dimensionality != target.dimensionality:
        return Linear(problem=_what_it_is(q, ureg))

    def pint_si(x: float) -> float:
        v = ureg.Quantity(x, cleaned)
        return float(v.to(k.si).magnitude if k.si else v.to("dimensionless").magnitude)

    try:
        b = pint_si(0.0)
        a = pint_si(1.0) - b
        affine = all(
            math.isclose(pint_si(x), a * x + b, rel_tol=1e-12, abs_tol=1e-12 * abs(b))
            for x in (1000.0, -7.25)
        )
    except (ArithmeticError, ValueError):  # a logarithmic unit at zero or below
        a, b, affine = 1.0, 0.0, False
    return Linear(a, b, affine)


def _pint_to_si(value: float, cleaned: str, kind: str) -> float:
    k = KINDS[kind]
    ureg = registry()
    try:
        v = ureg.Quantity(value, cleaned)
        return float(v.to(k.si).magnitude if k.si else v.to("dimensionless").magnitude)
    except (ArithmeticError, ValueError):  # a logarithmic unit of a value it cannot take
        return math.nan


def check_si(value: float, kind: str, *, field: str, shown: object) -> float:
    """``value`` (SI) if it is finite with magnitude 0 or within SI_MIN..SI_MAX, else an
    InputError naming the field, the value as given and the range."""
    si = KINDS[kind].si if kind in KINDS else ""
    unit = f" {si}" if si else ""
    if not math.isfinite(value):
        expected = f"a magnitude of at most {SI_MAX:g}{unit}"
        raise InputError(
            f"{field}: {shown!r} is not a finite number in SI{unit}; expected {expected}",
            field=field,
            value=shown,
            expected=expected,
        )
    if value != 0.0 and not SI_MIN <= abs(value) <= SI_MAX:
        raise InputError(
            f"{field}: {shown!r} is {value:.3g}{unit} in SI, outside the accepted range; "
            f"expected 0 or a magnitude from {SI_MIN:g} to {SI_MAX:g}{unit}",
            field=field,
            value=shown,
            expected=f"0 or a magnitude from {SI_MIN:g} to {SI_MAX:g}{unit}",
        )
    return value


def to_si(value: float, unit: str, kind: str, *, field: str, raw: object = None) -> float:
    """Convert ``value`` in ``unit`` to the SI unit of ``kind``; raise InputError if unfit
    (an unknown unit, a wrong dimension, or an SI value that is not finite or out of range)."""
    shown = raw if raw is not None else f"{value} {unit}"
    conversion = linear(unit, kind, field=field, shown=shown)
    if conversion.affine:
        si = conversion.a * value + conversion.b
    else:
        si = _pint_to_si(value, _clean_unit(unit), kind)
    return check_si(si, kind, field=field, shown=shown)


def linear(unit: str, kind: str, *, field: str, shown: object) -> Linear:
    """The conversion of ``unit`` to the SI unit of ``kind`` (SI = a·x + b when ``affine``);
    an InputError naming ``field`` and ``shown`` if the unit is unknown or of another kind."""
    expected = _expected(kind)
    cleaned = check_unit_text(str(unit), field=field, shown=shown, expected=expected)
    conversion = _linear(cleaned, kind)
    if conversion.problem == "unknown":
        raise InputError(
            f"{field}: unknown unit {unit!r} in {shown!r}; expected {expected}",
            field=field,
            value=shown,
            expected=expected,
        )
    if conversion.problem is not None:
        raise InputError(
            f"{field}: {shown!r} is {conversion.problem}; expected {expected}",
            field=field,
            value=shown,
            expected=expected,
        )
    return conversion


def _what_it_is(q: Any, ureg: Any) -> str:
    """Name the kind a mistyped quantity has ("a flow"), or its dimensionality."""
    for name, k in KINDS.items():
        probe = ureg.Quantity(1.0, k.si) if k.si else ureg.Quantity(1.0)
        if probe.dimensionality == q.dimensionality:
            return f"a {_dimension_word(name)}"
    return f"of dimension {q.dimensionality or 'dimensionless'}"


def _plain_text(text: str, *, field: str, expected: str) -> str:
    """``text`` with every kind of space made a plain one, stripped; InputError if it is too
    long or holds a control or invisible character."""
    if len(text) > MAX_TEXT:
        raise InputError(
            f"{field}: the text is {len(text)} characters long; at most {MAX_TEXT} "
            f"(expected {expected})",
            field=field,
            value=text[:40] + "...",
            expected=expected,
        )
    chars = []
    for ch in text:
        category = unicodedata.category(ch)
        if category in _INVISIBLE:
            raise InputError(
                f"{field}: {text!r} contains the control or invisible character "
                f"{_char_name(ch)}; expected {expected}",
                field=field,
                value=text,
                expected=expected,
            )
        chars.append(" " if category == "Zs" else ch)
    return "".join(chars).strip()


def split_number(text: str, *, field: str, expected: str) -> tuple[float, str]:
    """Split "12.5 psi" into (12.5, "psi"); refuse non-numbers, NaN, infinity, digits other
    than ASCII 0-9, control or invisible characters and text over MAX_TEXT characters."""
    if not isinstance(text, str):
        text = str(text)
    clean = _plain_text(text, field=field, expected=expected)
    m = _NUMBER.match(clean)
    if m is None:
        low = clean.lower()
        if low.lstrip("+-").startswith(("nan", "inf")):
            why = "is not a finite number"
        elif any(ch.isdigit() or unicodedata.decimal(ch, None) is not None for ch in clean):
            why = "is not a number (write its digits as 0-9)"
        else:
            why = "is not a number"
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
    return number, m.group(2).strip()


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
            value = check_si(number, kind, field=field, shown=text)
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
    """Split a column header "flux [LMH]" into ("flux", "LMH"); no brackets -> (name, None).

    A header is one ``name [unit]`` at most; anything else (more brackets, text after the
    closing one) is returned whole as a name, which matches no wanted column.
    """
    text = header.strip()
    if text.endswith("]") and text.count("[") == 1 and text.count("]") == 1:
        name, _, unit = text[:-1].partition("[")
        return name.strip(), unit.strip()
    return text, None


def from_si(value: float, kind: str, unit: str | None = None) -> float:
    """Express an SI value of ``kind`` in ``unit`` (default: the kind's display unit)."""
    a, b = _display(kind, unit or KINDS[kind].display)
    return a * value + b


@lru_cache(maxsize=256)
def _display(kind: str, unit: str) -> tuple[float, float]:
    """unit = a·SI + b, worked out once with pint (our display units are all affine)."""
    k = KINDS[kind]
    ureg = registry()
    target = _clean_unit(unit)

    def shown(x: float) -> float:
        q = ureg.Quantity(x, k.si) if k.si else ureg.Quantity(x)
        return float(q.to(target).magnitude)

    b = shown(0.0)
    return shown(1.0) - b, b


def quantity(value: float, kind: str, unit: str | None = None) -> dict[str, Any]:
    """A JSON-ready quantity ``{"value": ..., "unit": ...}`` in the display unit (DEVELOPERS.md)."""
    target = unit or KINDS[kind].display
    return {"value": from_si(value, kind, target), "unit": target}


# How values are shown to people ----------------------------------------------------------------

# Units as people read them; JSON keeps the pint spelling.
SPELLED = {
    "L/(m^2*h)": "LMH",
    "L/(m^2*h*bar)": "LMH/bar",
    "degC": "°C",
    "percent": "%",
    "m^2": "m²",
    "m**2": "m²",
    "m**3": "m³",
    "mPa*s": "mPa·s",
    "kg/m^3": "kg/m³",
    "kg/m**3": "kg/m³",
    "mol/m**3": "mol/m³",
    "m**3/s": "m³/s",
    "L/m^2": "L/m²",
    "g/m^2": "g/m²",
    "kg/m**2": "kg/m²",
    "um": "µm",
    "mm^2/s": "mm²/s",
    "m**2/s": "m²/s",
    "m/(s*Pa)": "m/(s·Pa)",
    "Pa*s": "Pa·s",
}


def significant(x: float, digits: int = 6) -> str:
    """``x`` with at most ``digits`` significant digits and no float artefacts:
    499.99999999999994 -> "500", 0.30000000000000004 -> "0.3"."""
    if x == 0:
        return "0"
    if not math.isfinite(x):
        return str(x)
    rounded = float(f"{x:.{digits}g}")
    if not 1e-4 <= abs(rounded) < 1e7:
        return f"{x:.{digits}g}"
    decimals = max(0, digits - 1 - math.floor(math.log10(abs(rounded))))
    text = f"{rounded:.{decimals}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def entered_unit(text: str) -> str | None:
    """The unit of a quantity as typed ("20 psi" -> "psi", "80 %" -> "percent"), cleaned of
    our aliases; None for a bare number or text that is not a quantity."""
    m = _NUMBER.match(text.strip())
    if m is None:
        return None
    unit = _clean_unit(m.group(2))
    return unit or None


def display_unit(
    kind: str, site: Mapping[str, str] | None = None, typed: Iterable[str] = ()
) -> str:
    """The unit a value of ``kind`` that nobody typed (computed, or an old row) is shown in:
    the one unit people typed for that kind in the same record (``typed``: units as typed,
    e.g. a TMP computed from feed and retentate typed in psi), else the site's display unit
    for the kind (``site``: kind -> unit), else the kind's default display unit."""
    found = {u for u in typed if u}
    if len(found) == 1:
        unit = found.pop()
        lin = _linear(unit, kind)
        if lin.problem is None and lin.affine:
            return unit
    if site and site.get(kind):
        return site[kind]
    return KINDS[kind].display


def shown(
    value: float,
    kind: str,
    *,
    entered: str | None = None,
    site: Mapping[str, str] | None = None,
    typed: Iterable[str] = (),
    digits: int = 6,
) -> str:
    """One stored SI value as people read it, the one formatter of every screen and record.

    Typed by a person (``entered``, e.g. "0.5 M"): the text as typed, with the SI value beside
    when its unit is not the SI one ("0.5 M (500 mol/m³)"). Otherwise the value in
    :func:`display_unit` with at most ``digits`` significant digits ("500 mbar").
    """
    si = KINDS[kind].si
    if entered:
        typed_unit = entered_unit(entered)
        if typed_unit is None or typed_unit == si or not si:
            return entered
        return f"{entered} ({significant(value, digits)} {SPELLED.get(si, si)})"
    unit = display_unit(kind, site, typed)
    return f"{significant(from_si(value, kind, unit), digits)} {SPELLED.get(unit, unit)}"


def check_display_unit(kind: str, text: str, *, field: str) -> str:
    """``text`` as a display unit for ``kind`` (cleaned); InputError naming ``field``, the value
    and what was expected if it is not a unit of that kind."""
    if kind not in KINDS:
        raise InputError(
            f"{field}: {kind!r} is not a kind of quantity",
            field=field,
            value=kind,
            expected="one of " + ", ".join(sorted(KINDS)),
        )
    expected = f"a unit of {_dimension_word(kind)}, e.g. {KINDS[kind].display}"
    unit = check_unit_text(text.strip(), field=field, shown=text, expected=expected)
    lin = _linear(unit, kind) if unit else Linear(problem="unknown")
    if lin.problem is not None or not lin.affine or lin.a == 0:
        why = "not a unit pint knows" if lin.problem in (None, "unknown") else lin.problem
        raise InputError(
            f"{field}: {text!r} is not a unit of {_dimension_word(kind)} ({why}); "
            f"expected {expected}",
            field=field,
            value=text,
            expected=expected,
        )
    return unit
