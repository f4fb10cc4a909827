"""The entry layer's field parser: SI values out, errors naming the field.

Unit factors: 1 psi = 6 894.757 293 168 Pa and 1 mL = 1e-6 m³ (NIST SP 811, appendix B);
0 °C = 273.15 K by definition of the Celsius scale.
"""

from __future__ import annotations

import math
from datetime import UTC, date, datetime

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.entries.fields import (
    Field,
    Spec,
    exactly_one,
    label,
    quantity_of_either,
    refuse_with,
    together,
)
from ledger.errors import InputError

PSI = 6894.757293168

SPEC = Spec(
    "demo entry",
    (
        Field("serial", required=True),
        Field("feed", "pressure"),
        Field("area", "area", positive=True),
        Field("count", "integer"),
        Field("ph", "number"),
        Field("at", "datetime"),
        Field("received", "date"),
        Field("strength", "either", kinds=("molarity", "concentration", "fraction")),
    ),
)


def test_values_are_si_and_the_typed_text_is_kept() -> None:
    v = SPEC.parse(
        {
            "serial": "QMB-0142",
            "feed": "12 psi",
            "area": "565 cm^2",
            "count": "120",
            "ph": "7.2",
            "at": "2026-11-30T14:05+01:00",
            "received": "2026-11-03",
            "strength": "0.5 mol/L",
            "not_a_field": "ignored",
        }
    )
    assert v["feed"] == pytest.approx(12 * PSI)
    assert v["area"] == pytest.approx(565e-4)
    assert v["count"] == 120 and isinstance(v["count"], int)
    assert v["ph"] == 7.2
    assert v["at"] == datetime(2026, 11, 30, 13, 5, tzinfo=UTC)
    assert v["received"] == date(2026, 11, 3)
    assert v["strength"] == (pytest.approx(500.0), "molarity")  # 0.5 mol/L = 500 mol/m³
    assert v.raw["feed"] == "12 psi"
    assert v.given("feed", "ph", "not_there") == ["feed", "ph"]


def test_a_missing_required_field_is_named() -> None:
    with pytest.raises(InputError) as err:
        SPEC.parse({"feed": "1 bar"})
    assert err.value.field == "serial"
    assert "--serial" in str(err.value)


def test_an_empty_form_field_is_a_field_left_out() -> None:
    v = SPEC.parse({"serial": "QMB-0142", "feed": "  "})
    assert v["feed"] is None


@pytest.mark.parametrize(
    ("name", "text"),
    [
        ("feed", "12"),  # no unit
        ("feed", "12 mL"),  # wrong dimension
        ("feed", "nan psi"),
        ("area", "0 m^2"),  # not positive
        ("count", "1.5"),
        ("count", "3 psi"),
        ("ph", "nan"),
        ("ph", "7 psi"),
        ("at", "2026-11-30T14:05"),  # no offset
        ("received", "3 Nov"),
        ("strength", "5 psi"),
    ],
)
def test_bad_values_name_their_field(name: str, text: str) -> None:
    with pytest.raises(InputError) as err:
        SPEC.parse({"serial": "QMB-0142", name: text})
    assert err.value.field == name
    assert label(name) in str(err.value)


def test_a_float_nan_from_a_front_end_is_refused() -> None:
    with pytest.raises(InputError) as err:
        SPEC.parse({"serial": "x", "ph": math.nan})
    assert err.value.field == "ph"


def test_either_tries_each_kind_in_order() -> None:
    value, kind = quantity_of_either("20 g/L", "c", ("molarity", "concentration"))
    assert (value, kind) == (pytest.approx(20.0), "concentration")
    assert quantity_of_either("0.5 %", "c", ("molarity", "fraction"))[1] == "fraction"
    with pytest.raises(InputError) as err:
        quantity_of_either("3 psi", "limit", ("pressure_rate", "gas_flow"))
    assert err.value.field == "limit"
    assert "a decay rate or a gas flow" in str(err.value)


def test_combination_checks() -> None:
    v = SPEC.parse({"serial": "x", "feed": "1 bar", "area": "1 m^2"})
    assert exactly_one(v, "feed", "ph") == "feed"
    with pytest.raises(InputError) as err:
        exactly_one(v, "feed", "area")
    assert err.value.field == "feed"
    with pytest.raises(InputError) as err:
        exactly_one(v, "ph", "count")
    assert err.value.field == "ph"
    assert together(v, "flux", "feed", "area") is True
    assert together(v, "x", "ph", "count") is False
    with pytest.raises(InputError) as err:
        together(v, "the ALCR", "feed", "ph")
    assert err.value.field == "ph"
    with pytest.raises(InputError) as err:
        refuse_with(v, "feed", "is single-point", "area", "ph")
    assert err.value.field == "area"
    refuse_with(v, "feed", "is single-point", "ph")  # nothing given: no error


@given(st.text(max_size=40))
def test_any_text_gives_a_finite_value_or_an_input_error(text: str) -> None:
    for name in ("feed", "area", "count", "ph", "at", "received", "strength"):
        try:
            v = SPEC.parse({"serial": "x", name: text})
        except InputError as err:
            assert err.field == name
            continue
        value = v[name]
        if isinstance(value, float):
            assert math.isfinite(value)


@given(st.floats(min_value=1e-6, max_value=1e6) | st.floats(min_value=-1e6, max_value=-1e-6))
def test_a_pressure_in_psi_is_the_nist_factor_times_the_number(x: float) -> None:
    v = SPEC.parse({"serial": "x", "feed": f"{x!r} psi"})
    assert v["feed"] == pytest.approx(x * PSI, rel=1e-12, abs=1e-9)
