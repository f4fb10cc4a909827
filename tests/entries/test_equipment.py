"""Skid entries: fields as typed in, checked values out, errors naming the field."""

from __future__ import annotations

from datetime import date
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.entries import equipment
from ledger.errors import InputError
from tests.world import SAMPLES

MAPPING = SAMPLES / "qf2_skid_mapping.toml"


def _instrument(**changes: object) -> dict[str, object]:
    fields: dict[str, object] = {"code": "TFF-SKID-2", "tag": "PT-101",
                                 "measures": "feed_pressure",
                                 "calibration_due": "2026-10-01"}  # fmt: skip
    fields.update(changes)
    return fields


def test_an_instrument_entry_reads_its_date() -> None:
    e = equipment.instrument(_instrument(measures=" feed_pressure "))
    assert e.calibration_due == date(2026, 10, 1) and e.measures == "feed_pressure"
    assert e.reason is None


@pytest.mark.parametrize("text", ["2026-13-01", "01.10.2026", "soon", "2026-02-30"])
def test_a_malformed_due_date_names_the_field(text: str) -> None:
    with pytest.raises(InputError) as err:
        equipment.instrument(_instrument(calibration_due=text))
    assert err.value.field == "calibration_due" and "--calibration-due" in str(err.value)


@given(st.dates())
def test_any_iso_date_reads_back(day: date) -> None:
    assert equipment.instrument(_instrument(calibration_due=day.isoformat())).calibration_due == day


@given(st.text(max_size=40))
def test_any_text_is_a_date_or_an_error_on_the_field(text: str) -> None:
    try:
        e = equipment.instrument(_instrument(calibration_due=text))
    except InputError as err:
        assert err.field == "calibration_due"
    else:
        assert e.calibration_due == date.fromisoformat(text.strip())


def test_missing_fields_are_named() -> None:
    with pytest.raises(InputError, match="--description") as err:
        equipment.skid({"code": "TFF-SKID-2"})
    assert err.value.field == "description"


def test_a_mapping_entry_keeps_the_file_text() -> None:
    e = equipment.mapping({"code": "TFF-SKID-2", "file": str(MAPPING)})
    assert e.text == MAPPING.read_text(encoding="utf-8") and e.source == str(MAPPING)


@pytest.mark.parametrize(
    "content", [b"\xff\xfe\x00bad", b"x" * ((1 << 20) + 1)], ids=["not-utf8", "too-big"]
)
def test_an_unreadable_mapping_file_names_the_field(tmp_path: Path, content: bytes) -> None:
    path = tmp_path / "m.toml"
    path.write_bytes(content)
    with pytest.raises(InputError) as err:
        equipment.mapping({"code": "TFF-SKID-2", "file": str(path)})
    assert err.value.field == "file"


def test_a_missing_mapping_file_names_the_field(tmp_path: Path) -> None:
    with pytest.raises(InputError) as err:
        equipment.mapping({"code": "TFF-SKID-2", "file": str(tmp_path / "none.toml")})
    assert err.value.field == "file"
