"""Detecting how a skid export is written: encoding from its bytes, delimiter by even field
counts, decimal comma, preamble above the header and a units row under it."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ledger.errors import InputError
from ledger.runs.dialect import check_units_row, detect_encoding, sniff

HEADER = ["Timestamp", "Step", "PT-01 (°C)", "FT-02"]


def export(delimiter: str, decimal: str, preamble: list[str], units: bool, n: int = 6) -> str:
    rows = [delimiter.join(HEADER)]
    if units:
        rows.append(delimiter.join(["", "", "degC", "mL/min"]))
    for i in range(n):
        value = f"{10 + i}.{25 + i}".replace(".", decimal)
        rows.append(delimiter.join([f"2026-06-01 08:00:0{i}", "run", value, str(60 + i)]))
    return "\r\n".join(preamble + rows) + "\r\n"


@settings(max_examples=60, deadline=None)
@given(
    encoding=st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "cp1252"]),
    delimiter=st.sampled_from([",", ";", "\t"]),
    comma=st.booleans(),
    preamble=st.lists(st.sampled_from(["Skid S-3 export", "Operator: A. Novak", ""]), max_size=3),
    units=st.booleans(),
)
def test_random_dialects_round_trip(
    encoding: str, delimiter: str, comma: bool, preamble: list[str], units: bool
) -> None:
    decimal = "," if comma and delimiter != "," else "."
    text = export(delimiter, decimal, preamble, units)
    found, decoded = sniff(text.encode(encoding), "Timestamp", "log.csv")
    assert decoded.lstrip("\ufeff") == text
    assert found.delimiter == delimiter
    assert found.decimal == decimal
    assert found.header_line == len(preamble) + 1
    assert found.units_row is units
    assert found.plain is (
        delimiter == "," and not preamble and not units and encoding.startswith("utf-8")
    )
    assert {"encoding", "delimiter", "decimal", "header_line", "units_row"} == set(found.detected)


@pytest.mark.parametrize(
    ("data", "encoding"),
    [
        ("°C".encode(), "utf-8"),
        (b"\xef\xbb\xbf" + "°C".encode(), "utf-8-sig"),
        ("°C".encode("utf-16"), "utf-16"),
        (b"\xfe\xff" + "°C".encode("utf-16-be"), "utf-16"),
        ("°C".encode("cp1252"), "cp1252"),
        (b"\x81\xb0C", "latin-1"),  # 0x81 is undefined in cp1252
        ("T,°".encode()[:-1], "utf-8"),  # a sample cut inside the degree sign
    ],
)
def test_encoding_from_bytes(data: bytes, encoding: str) -> None:
    assert detect_encoding(data) == encoding


def test_utf16_without_a_mark_is_undecidable() -> None:
    data = "Timestamp,PT-01\n".encode("utf-16-le")
    with pytest.raises(InputError) as caught:
        sniff(data, "Timestamp", "log.csv")
    assert caught.value.field == "file.encoding" and "tried" in str(caught.value)
    assert caught.value.source == "log.csv"


def test_given_keys_are_kept_and_not_reported_as_detected() -> None:
    text = export(";", ",", [], False)
    found, _ = sniff(text.encode(), "Timestamp", "log.csv", delimiter=";", decimal=",")
    assert (found.delimiter, found.decimal) == (";", ",")
    assert "delimiter" not in found.detected and "decimal" not in found.detected


def test_an_undecidable_delimiter_names_the_key() -> None:
    text = "Timestamp;a,b\n2026-06-01 08:00:00;1,2\n2026-06-01 08:00:01;3,4\n"
    with pytest.raises(InputError) as caught:
        sniff(text.encode(), "Timestamp", "log.csv")
    assert caught.value.field == "file.delimiter"
    assert "[file] delimiter" in str(caught.value) and caught.value.source == "log.csv"


def test_no_line_naming_the_time_column_names_header_line() -> None:
    with pytest.raises(InputError) as caught:
        sniff(b"Time,a\n1,2\n", "Timestamp", "log.csv")
    assert caught.value.field == "file.header_line"


def test_a_given_encoding_that_does_not_decode_names_the_key() -> None:
    with pytest.raises(InputError) as caught:
        sniff("Timestamp,°C\n".encode("cp1252"), "Timestamp", "log.csv", encoding="utf-8")
    assert caught.value.field == "file.encoding"


def test_units_row_agrees_by_pint_equivalence() -> None:
    header = ["Timestamp", "TT-01", "PT-01", "Spare"]
    mapped = {"TT-01": ("degC", "temperature"), "PT-01": ("psi", "pressure")}
    check_units_row(header, ["", "°C", "[psi]", "whatever"], mapped, "log.csv", 2)
    with pytest.raises(InputError) as caught:
        check_units_row(header, ["", "degC", "bar", ""], mapped, "log.csv", 2)
    err = caught.value
    assert "'bar'" in str(err) and "'psi'" in str(err)
    assert (err.field, err.line, err.source) == ("PT-01", 2, "log.csv")
