"""Audit events in words (ledger.audittext): units shown, no float artefacts, nothing cut
without saying where the whole value is."""

from __future__ import annotations

import json

import pint
from hypothesis import given
from hypothesis import strategies as st

from ledger.audittext import MAX_VALUE, describe, label, number, value_text

UREG = pint.UnitRegistry()  # the independent reference for the unit conversions


def test_an_si_concentration_with_a_float_artefact_reads_as_typed() -> None:
    record = {"concentration": 499.99999999999994, "concentration_unit": "mol/m**3"}
    assert value_text("concentration", record["concentration"], record) == "0.5 mol/L"


def test_column_endings_give_the_trades_units() -> None:
    bar = UREG.Quantity(82737.1, "Pa").to("bar").magnitude
    assert value_text("tmp_pa", 82737.1) == f"{bar:.6g} bar"
    c = UREG.Quantity(298.15, "K").to("degC").magnitude
    assert value_text("temperature_k", 298.15) == f"{c:.6g} °C"
    assert value_text("contact_time_s", 3600.0) == "60 min"
    lmh = UREG.Quantity(5e-5, "m/s").to("L/(m^2*h)").magnitude
    assert value_text("flux_m_s", 5e-5) == f"{lmh:.6g} LMH"
    assert value_text("late", True) == "yes" and value_text("note", None) == "—"


def test_a_created_record_is_one_line_of_fields_without_bookkeeping() -> None:
    stored = {"id": 3, "record_hash": "ab" * 32, "created_by": "op.kim",
              "agent": "sodium hydroxide", "temperature_k": 298.15,
              "activity_at": "2026-11-24T01:04:33.000000+00:00", "voided_at": None}  # fmt: skip
    new = json.dumps(stored)
    line = describe(53, "create", None, None, new)
    assert line == ("create: id: 3; agent: sodium hydroxide; temperature: 25 °C; "
                    "activity at: 2026-11-24T01:04:33+00:00")  # fmt: skip


def test_a_change_is_old_to_new_and_a_void_says_its_reason() -> None:
    assert describe(8, "change", "status", '"in_use"', '"awaiting_cleaning"') == (
        "status: in_use → awaiting_cleaning"
    )
    assert describe(9, "void", "void_reason", None, '"wrong file"') == "voided: wrong file"
    assert label("rinse_conductivity_s_m") == "rinse conductivity"


def test_a_long_value_is_cut_at_a_word_and_says_where_the_whole_is() -> None:
    text = " ".join(["word"] * 400)
    line = describe(77, "create", None, None, json.dumps({"description": text}))
    assert len(line) < MAX_VALUE + 120
    assert line.endswith("the whole value: `fluxledger audit show --json`, event 77)")
    assert "wor …" not in line  # not cut inside a word


@given(st.floats(min_value=-1e12, max_value=1e12, allow_nan=False))
def test_numbers_have_at_most_six_significant_digits_and_round_trip_close(x: float) -> None:
    shown = number(x)
    mantissa = shown.lstrip("-").split("e")[0]
    digits = mantissa.replace(".", "").lstrip("0")
    if "." not in mantissa:  # trailing zeros of a whole number are not significant: 1000000
        digits = digits.rstrip("0")
    assert len(digits) <= 6
    assert abs(float(shown) - x) <= abs(x) * 5e-6 + 1e-300
