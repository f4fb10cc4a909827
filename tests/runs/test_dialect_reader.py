"""The reader in other dialects: what the mapping's [file], [time] date_column and [phases]
change, and each bad case an InputError naming the file and line (or both files)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from ledger.errors import InputError
from ledger.runs.actuals import segments
from ledger.runs.mapping import parse_mapping
from ledger.runs.skidlog import phase_warnings, read_log, read_logs

PSI = 6894.757293168  # Pa, exact by definition (NIST SP 811)
MAPPING = """
[time]
column = "Time"
{extra}
[channels]
feed_pressure = {{ column = "PT-01", unit = "psi" }}
temperature = {{ column = "TT-01", unit = "degC" }}
phase = {{ column = "Step" }}
{tables}
"""


def mapping(extra: str = "", tables: str = "") -> object:
    return parse_mapping(MAPPING.format(extra=extra, tables=tables), "skid.toml")


def lines(n: int = 6, start: int = 0, steps: tuple[str, ...] = ("CONC1",)) -> list[str]:
    out = []
    for i in range(start, start + n):
        step = steps[min(i * len(steps) // (start + n), len(steps) - 1)]
        out.append(f"2026-06-01T08:00:{i:02d}Z;{step};{10 + i},5;{20 + i},0")
    return out


def write(path: Path, body: list[str], header: str = "Time;Step;PT-01;TT-01",
          encoding: str = "utf-8", above: tuple[str, ...] = ()) -> Path:  # fmt: skip
    path.write_text("\n".join([*above, header, *body]) + "\n", encoding=encoding)
    return path


def test_semicolons_decimal_commas_and_a_preamble_are_detected(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", lines(), above=("Run export", "Skid;SK-9", ""))
    log = read_log(path, mapping())
    assert log.dialect is not None
    d = log.dialect
    assert (d.delimiter, d.decimal, d.header_line) == (";", ",", 4)
    assert {"delimiter", "decimal", "header_line", "encoding"} <= set(d.detected)
    assert log.channels["feed_pressure"][0] == pytest.approx(10.5 * PSI)


def test_what_the_mapping_states_is_kept_and_not_reported_as_detected(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", lines())
    log = read_log(path, mapping(tables='[file]\ndelimiter = ";"\ndecimal = ","'))
    assert log.dialect is not None
    assert "delimiter" not in log.dialect.detected and "decimal" not in log.dialect.detected


def test_a_units_row_that_disagrees_names_both_units_and_its_line(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", [";;bar;°C", *lines()])
    with pytest.raises(InputError) as err:
        read_log(path, mapping())
    assert err.value.line == 2 and "'bar'" in str(err.value) and "'psi'" in str(err.value)


def test_a_units_row_that_agrees_is_skipped(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", [";;psi;°C", *lines()])
    log = read_log(path, mapping())
    assert log.rows == 6 and log.dialect is not None and log.dialect.units_row


def test_an_error_below_a_preamble_and_units_row_names_the_files_own_line(tmp_path: Path) -> None:
    body = lines()
    body[2] = body[2].replace("12,5", "twelve")
    path = write(tmp_path / "a.csv", [";;psi;°C", *body], above=("Export", ""))
    with pytest.raises(InputError) as err:
        read_log(path, mapping())
    # 2 preamble lines, the header (3), the units row (4), data rows from line 5
    assert err.value.line == 7, str(err.value)


def test_cp1252_is_read_when_the_bytes_are_not_utf8(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", lines(), header="Time;Step;PT-01;TT-01;Temp °C")
    path.write_bytes(path.read_bytes().replace(b"\n", b";1\n").replace(b"C;1", b"C"))
    path.write_bytes(path.read_text(encoding="utf-8").encode("cp1252"))
    log = read_log(path, mapping())
    assert log.dialect is not None and log.dialect.encoding == "cp1252"


def test_step_labels_map_to_phases_and_ignored_steps_belong_to_none(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", lines(9, steps=("FLUSH", "CONC 1", "CONC1")))
    m = mapping(tables='[phases]\nuf1 = ["CONC1", "CONC 1"]\nignore = ["FLUSH"]')
    log = read_log(path, m)
    spans = segments(log, None)
    assert [s[0] for s in spans] == ["uf1"]
    assert spans[0][1] == 3  # the three FLUSH rows are in no phase
    assert log.unmapped_labels == []
    assert phase_warnings(log, ["uf1", "df"]) == [
        "template phase 'df' has no samples in the log (map the skid's step label to it in "
        "the mapping's [phases])"
    ]


def test_a_label_the_mapping_does_not_list_is_kept_and_warned(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", lines(6, steps=("CONC1", "IDLE")))
    log = read_log(path, mapping(tables='[phases]\nuf1 = ["CONC1"]'))
    assert log.unmapped_labels == ["IDLE"]
    assert any("'IDLE' belongs to no template phase" in w for w in phase_warnings(log, ["uf1"]))


def test_a_label_under_two_phases_is_refused_naming_both() -> None:
    with pytest.raises(InputError) as err:
        mapping(tables='[phases]\nuf1 = ["CONC1"]\nuf2 = ["CONC1"]')
    assert "phases.uf2" in str(err.value) and "phases.uf1" in str(err.value)


def test_date_and_time_columns_are_joined(tmp_path: Path) -> None:
    body = [f"01.06.2026;08:00:{i:02d};run;{10 + i};20" for i in range(4)]
    path = write(tmp_path / "a.csv", body, header="Date;Time;Step;PT-01;TT-01")
    m = mapping(extra='date_column = "Date"\nformat = "%d.%m.%Y %H:%M:%S"')
    log = read_log(path, m)
    assert log.start.isoformat() == "2026-06-01T08:00:00+00:00"
    assert np.allclose(log.time_s, [0, 1, 2, 3])


def test_two_files_join_in_order(tmp_path: Path) -> None:
    a = write(tmp_path / "a.csv", lines(4))
    b = write(tmp_path / "b.csv", lines(4, start=4))
    log = read_logs([a, b], mapping())
    assert log.rows == 8 and np.allclose(log.time_s, np.arange(8))
    assert [f.name for f in log.files] == ["a.csv", "b.csv"]
    assert all(f.sha256 for f in log.files) and log.sha256 not in {f.sha256 for f in log.files}


def test_overlapping_files_are_refused_naming_both(tmp_path: Path) -> None:
    a = write(tmp_path / "a.csv", lines(4))
    b = write(tmp_path / "b.csv", lines(4, start=2))
    with pytest.raises(InputError) as err:
        read_logs([a, b], mapping())
    assert "b.csv starts at" in str(err.value) and "a.csv ends at" in str(err.value)


def test_a_gap_between_files_is_a_gap(tmp_path: Path) -> None:
    a = write(tmp_path / "a.csv", lines(4))
    b = write(tmp_path / "b.csv", lines(4, start=40))
    with pytest.raises(InputError) as err:
        read_logs([a, b], mapping())
    assert "a gap over" in str(err.value)


def test_an_undecidable_delimiter_names_the_key_to_set(tmp_path: Path) -> None:
    path = tmp_path / "a.csv"
    path.write_text("Time\n2026-06-01T08:00:00Z\n", encoding="utf-8")
    with pytest.raises(InputError) as err:
        read_log(path, mapping())
    assert "[file] delimiter" in str(err.value)


def test_a_workbook_sheet_is_read_and_a_bad_cell_names_its_row(tmp_path: Path) -> None:
    xlsxwriter = pytest.importorskip("xlsxwriter")
    path = tmp_path / "log.xlsx"
    book = xlsxwriter.Workbook(str(path))
    sheet = book.add_worksheet("Data")
    sheet.write_row(0, 0, ["Time", "Step", "PT-01", "TT-01"])
    for i in range(5):
        pt: object = "n/a" if i == 3 else 10.0 + i
        sheet.write_row(1 + i, 0, [f"2026-06-01T08:00:0{i}Z", "run", pt, 20.0])
    book.close()
    with pytest.raises(InputError) as err:
        read_log(path, mapping())
    assert err.value.line == 5 and "sheet 'Data'" in str(err.value)
    with pytest.raises(InputError) as missing:
        read_log(path, mapping(tables='[file]\nsheet = "Run"'))
    assert "no sheet 'Run'" in str(missing.value)


def test_a_stated_encoding_that_hides_the_header_is_named(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", lines())
    with pytest.raises(InputError) as err:
        read_log(path, mapping(tables='[file]\nencoding = "utf-16"'))
    assert "read as utf-16, from [file]" in str(err.value)


def test_a_header_line_past_the_file_is_named(tmp_path: Path) -> None:
    path = write(tmp_path / "a.csv", lines())
    with pytest.raises(InputError) as err:
        read_log(path, mapping(tables="[file]\nheader_line = 500"))
    assert err.value.field == "file.header_line" and "past the lines" in str(err.value)
