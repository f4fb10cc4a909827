"""Fields as people type them, turned into checked values: the one parser of every front end.

A front end (the CLI, the web) hands an entry a mapping of field name to text. The field name
is the command-line option without its leading dashes, with ``-`` written ``_``
(``--test-pressure`` is ``test_pressure``; a web form names its input the same). Quantities go
through :mod:`ledger.units` into SI; an error is an :class:`~ledger.errors.InputError` whose
``field`` is that name and whose message names the option as a user of the CLI typed it.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from ledger.errors import InputError


def label(name: str) -> str:
    """How a message names a field: as its option (``test_pressure`` -> ``--test-pressure``)."""
    return "--" + name.replace("_", "-")


@dataclass(frozen=True)
class Field:
    """One field of an entry.

    ``kind`` is a unit kind of :data:`ledger.units.KINDS` (the value becomes an SI float),
    ``"text"``, ``"number"`` (a bare float), ``"integer"``, ``"datetime"`` (ISO 8601 with offset,
    an aware UTC datetime), ``"date"`` (ISO 8601 calendar date) or ``"either"`` (a quantity
    of the first kind in ``kinds`` that fits; the value is ``(SI float, kind)``).
    """

    name: str
    kind: str = "text"
    required: bool = False
    positive: bool = False
    default_unit: str | None = None
    bare_ratio: bool = True
    kinds: tuple[str, ...] = ()
    help: str = ""


@dataclass
class Values:
    """The checked values of one entry: SI floats, texts, times; ``raw`` keeps what was typed."""

    entry: str
    values: dict[str, Any] = field(default_factory=dict)
    raw: dict[str, str] = field(default_factory=dict)
    typed: dict[str, str] = field(default_factory=dict)  # quantities as typed (see entered)

    def __getitem__(self, name: str) -> Any:
        return self.values.get(name)

    def get(self, name: str, default: Any = None) -> Any:
        value = self.values.get(name)
        return default if value is None else value

    def entered(self, *names: str) -> dict[str, str] | None:
        """The quantity fields a person typed (all, or those among ``names``) as they typed
        them, surrounding whitespace stripped: {"concentration": "0.5 M"}; None if there are
        none. A field whose text came from the entry's defaults was not typed (front ends
        leave a field out rather than fill in its default)."""
        out = {k: t for k, t in self.typed.items() if not names or k in names}
        return out or None

    def given(self, *names: str) -> list[str]:
        """The names among ``names`` that were filled in."""
        return [n for n in names if self.values.get(n) is not None]


# "either" fields: the kinds tried in order, the stored unit of each, and how to say it.
EITHER_UNITS = {
    "molarity": "mol/m**3",
    "concentration": "kg/m**3",
    "fraction": "",
    "pressure_rate": "Pa/s",
    "gas_flow": "m**3/s",
}
_EITHER_WORDS = {
    "molarity": "a molarity (0.5 mol/L, 500 mM)",
    "concentration": "a mass concentration (20 g/L)",
    "fraction": "a percentage (0.5 %)",
    "pressure_rate": "a pressure decay rate (0.05 psi/min)",
    "gas_flow": "a gas flow (3 mL/min)",
}


# What a quantity of one of several kinds is called in a message.
_EITHER_NOUNS = {
    ("molarity", "concentration", "fraction"): "a concentration",
    ("pressure_rate", "gas_flow"): "a decay rate or a gas flow",
}


def quantity_of_either(
    text: str, name: str, kinds: Sequence[str], *, noun: str | None = None
) -> tuple[float, str]:
    """A quantity of whichever of ``kinds`` it is, as (SI value, kind); else an error naming all."""
    from ledger import units

    for kind in kinds:
        try:
            return units.parse(text, kind, field=label(name), bare_ratio=False), kind
        except InputError:
            continue
    words = [_EITHER_WORDS.get(k, f"a {k.replace('_', ' ')}") for k in kinds]
    expected = ", ".join(words[:-1]) + " or " + words[-1] if len(words) > 1 else words[0]
    what = noun or _EITHER_NOUNS.get(tuple(kinds), expected)
    raise InputError(
        f"{label(name)}: {text!r} is not {what}",
        field=name,
        value=text,
        expected=expected,
    )


def _number(text: object, name: str, *, integer: bool = False) -> float | int:
    from ledger import units

    if isinstance(text, bool):
        text = str(text)
    if isinstance(text, int | float) and not isinstance(text, bool):
        value = float(text)
        if not math.isfinite(value):
            raise InputError(
                f"{label(name)}: {text!r} is not a finite number",
                field=name,
                value=text,
                expected="a finite number",
            )
        number = value
    else:
        expected = "a whole number" if integer else "a number"
        number, unit = units.split_number(str(text), field=label(name), expected=expected)
        if unit:
            raise InputError(
                f"{label(name)}: {text!r} takes no unit",
                field=name,
                value=text,
                expected=expected,
            )
    if integer:
        if number != int(number):
            raise InputError(
                f"{label(name)}: {text!r} is not a whole number",
                field=name,
                value=text,
                expected="a whole number",
            )
        return int(number)
    return number


def parse_field(f: Field, text: object) -> Any:
    """The checked value of one field from its text (None stays None); an error's ``field`` is
    the field's name."""
    try:
        return _parse(f, text)
    except InputError as err:
        err.field = f.name
        if not err.message.startswith(label(f.name)):
            err.message = f"{label(f.name)}: {err.message}"
            err.args = (err.message,)
        raise


def _parse(f: Field, text: object) -> Any:
    from ledger import units

    if text is None:
        return None
    if f.kind == "text":
        return str(text)
    if f.kind in ("number", "integer"):
        return _number(text, f.name, integer=f.kind == "integer")
    if f.kind == "datetime":
        from ledger.logbook.times import parse_time

        return parse_time(str(text), field=f.name)
    if f.kind == "date":
        from datetime import date

        try:
            return date.fromisoformat(str(text).strip())
        except ValueError:
            raise InputError(
                f"{str(text)!r} is not a date",
                field=f.name,
                value=text,
                expected="a date such as 2026-11-03",
            ) from None
    if f.kind == "either":
        return quantity_of_either(str(text), f.name, f.kinds)
    return units.parse(
        str(text),
        f.kind,
        field=label(f.name),
        default_unit=f.default_unit,
        positive=f.positive,
        bare_ratio=f.bare_ratio,
    )


# Field kinds that are not physical quantities (their text is not kept as entered).
_NOT_QUANTITIES = frozenset({"text", "number", "integer", "datetime", "date"})


@dataclass(frozen=True)
class Spec:
    """An entry's fields: ``parse`` checks each given one and that the required ones are there."""

    name: str
    fields: tuple[Field, ...]

    def field(self, name: str) -> Field:
        return next(f for f in self.fields if f.name == name)

    def parse(self, raw: Mapping[str, object], defaults: Mapping[str, str] | None = None) -> Values:
        """Checked values from ``raw`` (keys that are not fields of this entry are ignored);
        a field left out (None, or blank text) takes its text from ``defaults``.

        Every given field is parsed, even one the chosen mode will not use, so a malformed
        value is never silently ignored.
        """
        out = Values(self.name)
        missing = []
        for f in self.fields:
            text = raw.get(f.name)
            if isinstance(text, str) and f.kind != "text" and not text.strip():
                text = None  # an empty web form field is a field left out
            typed = text is not None
            if text is None and defaults:
                text = defaults.get(f.name)
            if text is None:
                if f.required:
                    missing.append(f.name)
                continue
            out.raw[f.name] = str(text)
            out.values[f.name] = parse_field(f, text)
            if typed and f.kind not in _NOT_QUANTITIES:
                out.typed[f.name] = str(text).strip()  # checked by parse_field just above
        if missing:
            raise InputError(
                f"{self.name} needs {', '.join(label(n) for n in missing)}",
                field=missing[0],
                value=None,
                expected="a value for each",
            )
        return out


# Checks of which fields go together ---------------------------------------------------------


def exactly_one(values: Values, *names: str) -> str:
    """The one of ``names`` that was given; refuse none or several."""
    given = values.given(*names)
    if len(given) != 1:
        shown = ", ".join(label(n) for n in names)
        raise InputError(
            f"give exactly one of {shown} (got {len(given)})",
            field=(given or list(names))[0],
            value=[label(n) for n in given],
            expected=f"one of {shown}",
        )
    return given[0]


def together(values: Values, purpose: str, *names: str) -> bool:
    """True when all ``names`` are given, False when none is; refuse a partial set."""
    given = values.given(*names)
    if not given:
        return False
    missing = [n for n in names if n not in given]
    if missing:
        raise InputError(
            f"{purpose} needs {', '.join(label(n) for n in names)} together; "
            f"{', '.join(label(n) for n in given)} given without "
            f"{', '.join(label(n) for n in missing)}",
            field=missing[0],
            value=None,
            expected="all of them, or none",
        )
    return True


def refuse_with(values: Values, chosen: str, why: str, *names: str) -> None:
    """Refuse any of ``names`` given beside ``chosen`` (options the chosen mode would ignore)."""
    extra = values.given(*names)
    if extra:
        raise InputError(
            f"{label(chosen)} {why}: {', '.join(label(n) for n in extra)} would be ignored",
            field=extra[0],
            value=values.raw.get(extra[0]),
            expected=f"{label(chosen)} without {', '.join(label(n) for n in extra)}",
        )


def when(values: Values, name: str = "activity_time") -> datetime | None:
    """An optional time field."""
    value = values[name]
    return value if isinstance(value, datetime) else None
