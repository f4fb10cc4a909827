"""Parsing quantities at the boundary (pint)."""

from __future__ import annotations

import math

import pint
import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger import units
from ledger.errors import InputError

# Conversion factors: NIST SP 811 (2008), Appendix B (psi = 6894.757 Pa, gallon = 3.785412 L,
# foot = 0.3048 m exactly).
CASES = [
    ("20 psi", "pressure", 20 * 6894.757293168),
    ("1.38 bar", "pressure", 138000.0),
    ("138 kPa", "pressure", 138000.0),
    ("250 mL/min", "flow", 250e-6 / 60),
    ("15 L/h", "flow", 15e-3 / 3600),
    ("15 degC", "temperature", 288.15),
    ("59 degF", "temperature", 288.15),
    ("0.5 m^2", "area", 0.5),
    ("1200 cm^2", "area", 0.12),
    ("4000 1/s", "shear_rate", 4000.0),
    ("0.5 mm", "length", 0.5e-3),
    ("99.9 %", "fraction", 0.999),
    ("30 LMH", "flux", 30e-3 / 3600),
    ("18 GFD", "flux", 18 * 3.785411784e-3 / (0.3048**2 * 86400)),
    ("15 °C", "temperature", 288.15),
    ("0.5 mg/mL", "concentration", 0.5),
]


@pytest.mark.parametrize(("text", "kind", "si"), CASES)
def test_parses_what_people_type(text: str, kind: str, si: float) -> None:
    assert units.parse(text, kind, field="--x") == pytest.approx(si, rel=1e-9)


def test_one_gfd_is_about_1_7_lmh() -> None:
    # Common-practice conversion quoted in membrane texts: 1 GFD ≈ 1.70 LMH.
    assert units.parse("1 GFD", "flux", field="f") / units.parse("1 LMH", "flux", field="f") == (
        pytest.approx(1.6976, rel=1e-4)
    )


@pytest.mark.parametrize(
    ("text", "kind", "says"),
    [
        ("20", "pressure", "has no unit"),
        ("20 L/min", "pressure", "expected a pressure"),
        ("fast", "flow", "is not a number"),
        ("nan psi", "pressure", "not a finite number"),
        ("inf bar", "pressure", "not a finite number"),
        ("-inf bar", "pressure", "not a finite number"),
        ("20 furlongs-per-bar", "pressure", "unknown unit"),
        ("1e999 bar", "pressure", "not a finite number"),
        ("", "pressure", "is not a number"),
        ("0]", "pressure", "unknown unit"),  # found by hypothesis: pint raised TokenError
        ("3 (psi", "pressure", "unknown unit"),
    ],
)
def test_bad_input_names_option_value_and_dimension(text: str, kind: str, says: str) -> None:
    with pytest.raises(InputError) as err:
        units.parse(text, kind, field="--feed")
    msg = str(err.value)
    assert msg.startswith("--feed:")
    assert says in msg
    assert repr(text) in msg
    assert err.value.field == "--feed"


def test_default_unit_only_when_stated() -> None:
    assert units.parse("2640", "u_constant", field="--u", default_unit="K") == 2640.0


@given(
    st.floats(min_value=-1e6, max_value=1e6, allow_nan=False),
    st.sampled_from([("psi", 6894.757293168), ("bar", 1e5), ("kPa", 1e3), ("mbar", 100.0)]),
)
def test_pressure_invariant_under_units(value: float, unit: tuple[str, float]) -> None:
    name, factor = unit
    assert units.parse(f"{value!r} {name}", "pressure", field="p") == pytest.approx(
        value * factor, rel=1e-9, abs=1e-9
    )


@given(st.floats(min_value=-50, max_value=150, allow_nan=False))
def test_temperature_scales_agree(celsius: float) -> None:
    k = units.parse(f"{celsius!r} degC", "temperature", field="t")
    f = units.parse(f"{celsius * 9 / 5 + 32!r} degF", "temperature", field="t")
    assert k == pytest.approx(f, abs=1e-9)


@given(st.text(max_size=20))
def test_parser_never_crashes_on_garbage(text: str) -> None:
    try:
        value = units.parse(text, "pressure", field="p")
    except InputError:
        return
    assert math.isfinite(value)


@pytest.mark.parametrize(
    ("header", "name", "unit"),
    [
        ("flux [LMH]", "flux", "LMH"),
        ("permeate_flow [mL/min]", "permeate_flow", "mL/min"),
        ("cycle", "cycle", None),
        (" tmp [ psi ] ", "tmp", "psi"),
    ],
)
def test_header_split(header: str, name: str, unit: str | None) -> None:
    assert units.split_header(header) == (name, unit)


@pytest.mark.parametrize("kind", sorted(units.KINDS))
def test_every_display_unit_parses_in_a_stock_pint_registry(kind: str) -> None:
    # DEVELOPERS.md: the JSON unit string must be one that pint parses, without our definitions.
    k = units.KINDS[kind]
    stock = pint.UnitRegistry()
    shown = stock.Quantity(1.0, k.display)
    if k.si:
        assert shown.dimensionality == stock.Quantity(1.0, k.si).dimensionality
    else:
        assert shown.dimensionless
