"""The logbook mapping and sheet reader: cells converted to SI (checked against a stock pint
UnitRegistry, the outside source), rows numbered as the spreadsheet shows them, bad cells
rejected by row, field and column, hostile sheets refused. Values are invented."""

from __future__ import annotations

from pathlib import Path

import pint
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ledger.entries.logbook_mapping import load_mapping, mapping_from, read_logbook
from ledger.errors import InputError

UREG = pint.UnitRegistry()
COLUMNS = {
    "serial": "SN",
    "activity_time": "When",
    "stage": "Stage",
    "feed": {"column": "Feed", "unit": "psi"},
    "retentate": {"column": "Ret", "unit": "kPa"},
    "flow": {"column": "Q", "unit": "mL/min"},
    "temperature": {"column": "T", "unit": "degF"},
}
HEADER = "SN,When,Stage,Feed,Ret,Q,T\n"


def _sheet(tmp_path: Path, body: str, name: str = "s.csv") -> Path:
    p = tmp_path / name
    p.write_text(HEADER + body, encoding="utf-8")
    return p


def _si(value: float, unit: str, si: str) -> float:
    # The outside source: pint's own conversion of the same value.
    return float(UREG.Quantity(value, unit).to(si).magnitude)


finite = st.floats(min_value=0.01, max_value=1e4, allow_nan=False, allow_infinity=False)


@settings(max_examples=40, deadline=None)
@given(feed=finite, ret=finite, q=finite, t=st.floats(min_value=35, max_value=200))
def test_cells_become_si_as_pint_converts_them(
    tmp_path_factory: pytest.TempPathFactory, feed: float, ret: float, q: float, t: float
) -> None:
    tmp = tmp_path_factory.mktemp("h")
    m = mapping_from({"kind": "water_flux", "columns": COLUMNS}, "m.toml")
    p = _sheet(tmp, f"QMB-1,2026-01-05T08:00-05:00,baseline,{feed!r},{ret!r},{q!r},{t!r}\n")
    rows = read_logbook(m, p)
    assert not rows.rejected and rows.rows == [2]
    assert rows.quantities["feed"][0] == pytest.approx(_si(feed, "psi", "Pa"), rel=1e-12)
    assert rows.quantities["retentate"][0] == pytest.approx(_si(ret, "kPa", "Pa"), rel=1e-12)
    assert rows.quantities["flow"][0] == pytest.approx(_si(q, "mL/min", "m**3/s"), rel=1e-12)
    assert rows.quantities["temperature"][0] == pytest.approx(_si(t, "degF", "K"), rel=1e-12)
    assert rows.at[0].isoformat() == "2026-01-05T13:00:00+00:00"
    assert rows.entered[0]["feed"] == f"{feed!r} psi"


def test_a_cell_may_carry_its_own_unit(tmp_path: Path) -> None:
    m = mapping_from({"kind": "water_flux", "columns": {**COLUMNS, "feed": "Feed"}}, "m.toml")
    rows = read_logbook(m, _sheet(tmp_path, "QMB-1,2026-01-05T08:00Z,baseline,1.2 bar,1,1,70\n"))
    assert rows.quantities["feed"] == [pytest.approx(_si(1.2, "bar", "Pa"))]
    bare = read_logbook(m, _sheet(tmp_path, "QMB-1,2026-01-05T08:00Z,baseline,1.2,1,1,70\n"))
    assert [(r.row, r.field) for r in bare.rejected] == [(2, "feed")]
    assert "has no unit" in bare.rejected[0].message


# NUL is left out: a NUL byte anywhere refuses the whole file (test_import_logbook in tests/cli).
CELL = st.text(min_size=1, max_size=30).filter(lambda s: not set(s) & set(',\n\r"\x00'))


@given(junk=CELL)
@settings(max_examples=60, deadline=None)
def test_junk_in_a_quantity_cell_is_a_rejection_or_a_value_never_a_crash(
    tmp_path_factory: pytest.TempPathFactory, junk: str
) -> None:
    tmp = tmp_path_factory.mktemp("j")
    m = mapping_from({"kind": "water_flux", "columns": COLUMNS}, "m.toml")
    rows = read_logbook(m, _sheet(tmp, f"QMB-1,2026-01-05T08:00Z,baseline,{junk},1,1,70\n"))
    if rows.rejected:
        assert {(r.row, r.field) for r in rows.rejected} == {(2, "feed")}
        assert "column 'Feed'" in rows.rejected[0].message
    elif rows.rows:
        value = rows.quantities["feed"][0]
        assert value is None or isinstance(value, float)
    else:
        assert rows.blank == [2]


def test_rows_are_numbered_as_the_sheet_shows_them(tmp_path: Path) -> None:
    m = mapping_from({"kind": "water_flux", "columns": COLUMNS}, "m.toml")
    body = (
        "QMB-1,2026-01-05T08:00Z,baseline,10,70,100,70\n"
        ",,,,,,\n"
        "QMB-1,2026-01-06T08:00Z,pre-use,ten,70,100,70\n"
        "QMB-2,2026-01-06T08:00Z,baseline,10,70,100,7\x01\n"
        "QMB-3,yesterday,baseline,10,70,100,70\n"
    )
    rows = read_logbook(m, _sheet(tmp_path, body))
    assert rows.rows == [2] and rows.blank == [3]
    assert [(r.row, r.field) for r in rows.rejected] == [
        (4, "feed"), (5, "temperature"), (6, "activity_time")
    ]  # fmt: skip
    assert "U+0001" in rows.rejected[1].message


def test_naive_times_take_the_mapping_offset(tmp_path: Path) -> None:
    m = mapping_from({"kind": "water_flux", "utc_offset": "+02:00", "columns": COLUMNS}, "m")
    rows = read_logbook(m, _sheet(tmp_path, "QMB-1,2026-01-05 08:00,baseline,10,70,100,70\n"))
    assert rows.at[0].isoformat() == "2026-01-05T06:00:00+00:00"


def test_xlsx_sheet(tmp_path: Path) -> None:
    from datetime import datetime

    import xlsxwriter  # the test dependency tests/reference/dialect_writers.py also uses

    p = tmp_path / "old.xlsx"
    book = xlsxwriter.Workbook(str(p))
    ws = book.add_worksheet("binder")
    date = book.add_format({"num_format": "yyyy-mm-dd hh:mm"})
    ws.write_row(0, 0, ["SN", "When", "Stage", "Feed", "Ret", "Q", "T"])
    ws.write_row(1, 0, ["QMB-1", None, "baseline", 10.5, 70, 100, 70])
    ws.write_datetime(1, 1, datetime(2026, 1, 5, 8, 0), date)
    book.close()
    m = mapping_from({"kind": "water_flux", "utc_offset": "Z", "columns": COLUMNS}, "m")
    rows = read_logbook(m, p)
    assert rows.rows == [2] and rows.at[0].isoformat() == "2026-01-05T08:00:00+00:00"
    assert rows.quantities["feed"][0] == pytest.approx(_si(10.5, "psi", "Pa"))


@pytest.mark.parametrize(
    ("data", "field"),
    [
        ({"kind": "water_flux", "columns": {**COLUMNS, "pressure": "P"}}, "columns.pressure"),
        ({"kind": "water_flux", "columns": {**COLUMNS, "serial": {"unit": "x"}}}, "columns.serial"),
        (
            {"kind": "water_flux", "columns": {**COLUMNS, "stage": {"column": "S", "unit": "psi"}}},
            "columns.stage.unit",
        ),
        (
            {
                "kind": "water_flux",
                "columns": {**COLUMNS, "feed": {"column": "F", "unit": "furlong"}},
            },
            "columns.feed.unit",
        ),
        ({"kind": "water_flux", "columns": COLUMNS, "utc_offset": "soon"}, "utc_offset"),
        ({"kind": "water_flux", "columns": COLUMNS, "sheet": 1}, "sheet"),
        ({"kind": "pressure_decay", "columns": {"serial": "SN"}}, "columns.activity_time"),
    ],
)
def test_bad_mappings_name_the_key(data: dict[str, object], field: str) -> None:
    with pytest.raises(InputError) as err:
        mapping_from(data, "m.toml")
    assert err.value.field == field


def test_a_huge_cell_and_a_missing_column(tmp_path: Path) -> None:
    m = mapping_from({"kind": "water_flux", "columns": COLUMNS}, "m.toml")
    rows = read_logbook(m, _sheet(tmp_path, f"QMB-1,2026-01-05T08:00Z,{'x' * 5000},1,1,1,70\n"))
    assert [(r.row, r.field) for r in rows.rejected] == [(2, "stage")]
    p = tmp_path / "short.csv"
    p.write_text("SN,When\n")
    with pytest.raises(InputError, match="no column 'Stage'"):
        read_logbook(m, p)
    j = tmp_path / "m.json"
    j.write_text("[" * 100_000)
    with pytest.raises(InputError, match="JSON"):
        load_mapping(j)
