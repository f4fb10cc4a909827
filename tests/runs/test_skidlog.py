"""Reading skid logs: SI arrays from the mapped columns, times in UTC, and every bad file an
InputError naming the file, the line and the column."""

from __future__ import annotations

import dataclasses
import hashlib
import os
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest

from ledger.errors import InputError
from ledger.runs.mapping import Mapping, parse_mapping
from ledger.runs.skidlog import read_log

PSI = 6894.757293168  # Pa, exact by definition (NIST SP 811)
BASIC = """
[time]
column = "Timestamp"
{time}
[channels]
feed_pressure = {{ column = "PT-01", unit = "psi" }}
permeate_flow = {{ column = "FT-02", unit = "mL/min" }}
temperature = {{ column = "TT-01", unit = "degC" }}
phase = {{ column = "Step" }}
"""
HEADER = "Timestamp,Step,PT-01,FT-02,TT-01,Spare"


def basic(time: str = "") -> Mapping:
    return parse_mapping(BASIC.format(time=time), "skid.toml")


def write(path: Path, lines: list[str], header: str = HEADER) -> Path:
    path.write_text("\n".join([header, *lines]) + "\n", encoding="utf-8")
    return path


def rows(n: int = 5, start: str = "2026-06-01T08:00:00", step: int = 1) -> list[str]:
    base = np.datetime64(start)
    return [
        f"{base + np.timedelta64(i * step, 's')},run,{10 + i},{60 + i},{20 + i},x" for i in range(n)
    ]


def fails(path: Path, m: Mapping | None = None) -> InputError:
    with pytest.raises(InputError) as caught:
        read_log(path, m or basic())
    err = caught.value
    assert err.source == str(path)  # every error names the file
    return err


def test_iso_times_and_si_values(tmp_path: Path) -> None:
    path = write(tmp_path / "log.csv", rows(5))
    log = read_log(path, basic())
    assert log.rows == 5
    assert log.start == datetime(2026, 6, 1, 8, 0, tzinfo=UTC)  # no offset: the mapping's UTC
    assert log.time_s.tolist() == [0.0, 1.0, 2.0, 3.0, 4.0]
    # psi exact (NIST SP 811); mL/min = 1e-6 m³ / 60 s; K = °C + 273.15 (SI brochure)
    assert log.channels["feed_pressure"] == pytest.approx(np.arange(10, 15) * PSI, rel=1e-12)
    assert log.channels["permeate_flow"] == pytest.approx(np.arange(60, 65) * 1e-6 / 60)
    assert log.channels["temperature"] == pytest.approx(np.arange(20, 25) + 273.15)
    assert set(log.channels) == {"feed_pressure", "permeate_flow", "temperature"}
    assert log.phases is not None and log.phases.tolist() == ["run"] * 5
    assert log.median_step_s == 1.0
    assert log.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


def test_the_file_is_never_changed_and_digest_is_optional(tmp_path: Path) -> None:
    path = write(tmp_path / "log.csv", rows(5))
    before = path.read_bytes()
    os.utime(path, (1_000_000_000, 1_000_000_000))
    log = read_log(path, basic(), digest=False)
    assert log.sha256 is None
    assert path.read_bytes() == before
    assert path.stat().st_mtime == 1_000_000_000


def test_offsets_are_honoured_and_may_change_at_dst(tmp_path: Path) -> None:
    # Europe/Dublin switches from UTC+01:00 to UTC+00:00 at 01:00 UTC on 2026-10-25 (IANA tz)
    lines = [
        "2026-10-25T01:59:58+01:00,a,1,1,1,x",
        "2026-10-25T01:59:59+01:00,a,1,1,1,x",
        "2026-10-25T01:00:00+00:00,a,1,1,1,x",
        "2026-10-25T01:00:01+00:00,a,1,1,1,x",
    ]
    log = read_log(write(tmp_path / "log.csv", lines), basic())
    assert log.start == datetime(2026, 10, 25, 0, 59, 58, tzinfo=UTC)
    assert log.time_s.tolist() == [0.0, 1.0, 2.0, 3.0]


def test_local_times_are_placed_in_the_mapping_zone(tmp_path: Path) -> None:
    # Irish summer time is UTC+01:00 (IANA tz database)
    log = read_log(write(tmp_path / "log.csv", rows(3)), basic('timezone = "Europe/Dublin"'))
    assert log.start == datetime(2026, 6, 1, 7, 0, tzinfo=UTC)


def test_the_repeated_hour_is_placed_by_the_order_of_samples(tmp_path: Path) -> None:
    # Local 01:00-01:59 happens twice on 2026-10-25 in Dublin; 10-min samples through it
    first = [f"2026-10-25 01:{m:02d}:00" for m in range(0, 60, 10)]
    lines = [
        f"{t},a,1,1,1,x" for t in ["2026-10-25 00:50:00", *first, *first, "2026-10-25 02:00:00"]
    ]
    log = read_log(write(tmp_path / "log.csv", lines), basic('timezone = "Europe/Dublin"'))
    assert log.start == datetime(2026, 10, 24, 23, 50, tzinfo=UTC)
    assert np.diff(log.time_s).tolist() == [600.0] * 13  # strictly 10 min apart in UTC


def test_a_time_the_clocks_skipped_names_its_line(tmp_path: Path) -> None:
    # Dublin skips local 01:00-01:59 on 2026-03-29 (IANA tz database)
    lines = ["2026-03-29 00:59:00,a,1,1,1,x", "2026-03-29 01:30:00,a,1,1,1,x"]
    err = fails(write(tmp_path / "log.csv", lines), basic('timezone = "Europe/Dublin"'))
    assert err.line == 3 and err.field == "Timestamp"
    assert "does not exist in Europe/Dublin" in str(err)


def test_an_ambiguous_time_that_cannot_be_placed_names_its_line(tmp_path: Path) -> None:
    lines = ["2026-10-25 00:59:00,a,1,1,1,x", "2026-10-25 01:30:00,a,1,1,1,x"]
    err = fails(write(tmp_path / "log.csv", lines), basic('timezone = "Europe/Dublin"'))
    assert err.line == 3 and "repeated hour" in str(err)


@pytest.mark.parametrize(
    ("fmt", "texts"),
    [
        ("%d/%m/%Y %H:%M:%S", ["01/06/2026 08:00:00", "01/06/2026 08:00:02"]),
        ("%d/%m/%Y %H:%M:%S.%f", ["01/06/2026 08:00:00.250", "01/06/2026 08:00:02.250"]),
        ("%d/%m/%Y %H:%M:%S %z", ["01/06/2026 09:00:00 +0100", "01/06/2026 09:00:02 +0100"]),
    ],
)
def test_a_strptime_format(tmp_path: Path, fmt: str, texts: list[str]) -> None:
    lines = [f"{t},a,1,1,1,x" for t in texts]
    log = read_log(write(tmp_path / "log.csv", lines), basic(f'format = "{fmt}"'))
    assert log.start.replace(microsecond=0) == datetime(2026, 6, 1, 8, 0, tzinfo=UTC)
    assert log.time_s.tolist() == [0.0, 2.0]


def test_blank_lines_are_counted_when_a_line_is_named(tmp_path: Path) -> None:
    lines = rows(4)
    lines[3] = lines[3].replace(",13,", ",thirteen,")
    lines.insert(1, "")
    err = fails(write(tmp_path / "log.csv", lines))
    assert err.line == 6  # header, 1 row, a blank line, 2 rows, then the bad row


def test_integer_columns_bom_and_a_single_row(tmp_path: Path) -> None:
    path = tmp_path / "log.csv"
    path.write_text("\ufeff" + HEADER + "\n2026-06-01T08:00:00,a,3,4,5,x\n", encoding="utf-8")
    log = read_log(path, basic())
    assert log.rows == 1 and log.time_s.tolist() == [0.0]
    assert log.channels["feed_pressure"].tolist() == pytest.approx([3 * PSI])


def test_density_assumption_is_reported(tmp_path: Path) -> None:
    text = """
[time]
column = "Timestamp"
[channels]
permeate_mass = { column = "PT-01", unit = "g" }
"""
    log = read_log(write(tmp_path / "log.csv", rows(3)), parse_mapping(text, "m.toml"))
    assert log.density_kg_m3 == 1000.0
    assert log.assumptions == ["permeate density 1.0 g/mL assumed (the mapping gives none)"]


def edited(row: int, cell: int, text: str, n: int = 6) -> list[str]:
    lines = rows(n)
    cells = lines[row].split(",")
    cells[cell] = text
    lines[row] = ",".join(cells)
    return lines


# (lines of the file, line named, column named, words in the message); data row i is line i + 2
BAD = {
    "text in a number column": (edited(3, 2, "5psi"), 5, "PT-01", "'5psi' is not a number"),
    "an empty number cell": (edited(2, 3, ""), 4, "FT-02", "an empty cell"),
    "a missing-value mark": (edited(4, 4, "n/a"), 6, "TT-01", "'n/a' is a missing-value mark"),
    "an infinite value": (edited(1, 2, "inf"), 3, "PT-01", "not finite"),
    "true/false in a number column": (
        [f"2026-06-01T08:00:0{i},a,{b},1,1,x" for i, b in enumerate(["true", "false", "true"])],
        2,
        "PT-01",
        "'true' is not a number",
    ),
    "a duplicated time": (
        edited(3, 0, "2026-06-01T08:00:02"),
        5,
        "Timestamp",
        "repeats the time of line 4",
    ),
    "a time going backwards": (
        edited(3, 0, "2026-06-01T07:59:00"),
        5,
        "Timestamp",
        "is earlier than line 4",
    ),
    "a gap": (edited(5, 0, "2026-06-01T08:00:30"), 7, "Timestamp", "gap over 5 s"),
    "an unreadable time": (edited(2, 0, "yesterday"), 4, "Timestamp", "'yesterday' is not a time"),
    "an empty time": (edited(2, 0, ""), 4, "Timestamp", "an empty cell"),
    "offsets on some times only": (
        edited(2, 0, "2026-06-01T08:00:02+00:00"),
        4,
        "Timestamp",
        "some times have a UTC offset",
    ),
    "an empty phase label": (edited(2, 1, ""), 4, "Step", "empty phase label"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_each_bad_row_names_file_line_and_column(tmp_path: Path, case: str) -> None:
    lines, line, column, words = BAD[case]
    err = fails(write(tmp_path / "log.csv", lines))
    assert err.line == line
    assert str(err).startswith(f"{tmp_path / 'log.csv'}:{line}: column '{column}': ")
    assert err.field == column
    assert words in str(err), str(err)


def test_max_gap_from_the_mapping(tmp_path: Path) -> None:
    path = write(tmp_path / "log.csv", rows(4, step=20))
    assert read_log(path, basic('max_gap = "30 s"')).rows == 4
    err = fails(path, basic('max_gap = "10 s"'))
    assert err.line == 3 and "gap over 10 s (time.max_gap" in str(err)


def test_a_missing_column_lists_the_files_columns(tmp_path: Path) -> None:
    header = HEADER.replace("FT-02", "FT-2")
    err = fails(write(tmp_path / "log.csv", rows(3), header))
    assert err.line == 1 and err.field == "FT-02"
    assert "channels.permeate_flow.column of skid.toml" in str(err)
    assert "'FT-2'" in str(err) and "'Spare'" in str(err)


@pytest.mark.parametrize(
    ("content", "line", "words"),
    [
        ("", 1, "the file is empty"),
        ("\n\n", 1, "the file is empty"),
        (HEADER + "\n", 2, "no data rows"),
        (
            HEADER + "\n2026-06-01T08:00:00,a,1,1,1,x\n2026-06-01T08:00:01,a,1,1,1,x,extra\n",
            3,
            "7 fields; the header has 6",
        ),
    ],
)
def test_empty_and_malformed_files(tmp_path: Path, content: str, line: int, words: str) -> None:
    path = tmp_path / "log.csv"
    path.write_text(content, encoding="utf-8")
    err = fails(path)
    assert err.line == line and words in str(err), str(err)


def test_an_absent_file(tmp_path: Path) -> None:
    err = fails(tmp_path / "nope.csv")
    assert err.field == "file" and "cannot read" in str(err)


# --- Hostile logs: each an InputError naming the file, the line and the column -----------------


@pytest.mark.parametrize(
    ("cell", "column", "says"),
    [
        # 1 psi = 6894.757 Pa (NIST SP 811): 1e308 psi is past the largest float in Pa
        ("1e308", "PT-01", "'1e308' psi is inf Pa in SI"),
        ("1e299", "PT-01", "'1e299' psi is 6.89e+302 Pa in SI"),
        ("1e-305", "PT-01", "'1e-305' psi is 6.89e-302 Pa in SI"),  # below SI_MIN
        ("-1e308", "FT-02", "'-1e308' mL/min is -1.67e+300 m**3/s in SI"),  # 1e-6/60 m³/s
    ],
)
def test_values_out_of_range_in_si(tmp_path: Path, cell: str, column: str, says: str) -> None:
    lines = rows(5)
    parts = lines[2].split(",")
    parts[HEADER.split(",").index(column)] = cell
    lines[2] = ",".join(parts)
    err = fails(write(tmp_path / "log.csv", lines))
    assert err.line == 4 and err.field == column  # the header is line 1
    assert says in str(err) and "1e+300" in str(err), str(err)


@pytest.mark.parametrize(
    ("time", "fmt"),
    [
        ("1500-06-01T08:00:02", ""),
        ("2300-06-01T08:00:02", ""),
        ("2300-06-01T08:00:02+01:00", "aware"),
        ("1677-09-21T00:00:00Z", "aware"),  # 12 min 43 s before the first nanosecond time
        ("1500-06-01 08:00:02", 'format = "%Y-%m-%d %H:%M:%S"'),
        ("01/06/2300 08:00:02", 'format = "%d/%m/%Y %H:%M:%S"'),
        ("2300-06-01 08:00:02.5", 'format = "%Y-%m-%d %H:%M:%S.%f"'),  # the pandas path
    ],
)
def test_times_outside_nanosecond_range(tmp_path: Path, time: str, fmt: str) -> None:
    lines = rows(5)
    if fmt == "aware":  # every row with its UTC offset
        lines, fmt = [line.replace(",", "Z,", 1) for line in lines], ""
    if fmt:  # every row in the mapping's format
        pattern = fmt.split('"')[1]
        lines = [
            datetime(2026, 6, 1, 8, 0, i).strftime(pattern) + line[19:]
            for i, line in enumerate(lines)
        ]
    lines[2] = time + lines[2][lines[2].index(",") :]
    err = fails(write(tmp_path / "log.csv", lines), basic(fmt))
    assert err.line == 4 and err.field == "Timestamp", str(err)
    assert "outside the years a log can hold" in str(err) and "2262-04-11" in str(err)


def test_the_last_nanosecond_years_are_read(tmp_path: Path) -> None:
    lines = rows(3, start="2262-04-11T23:00:00")
    log = read_log(write(tmp_path / "log.csv", lines), basic())
    assert log.start == datetime(2262, 4, 11, 23, 0, tzinfo=UTC)


def test_a_format_pandas_cannot_compile_names_the_mapping_key(tmp_path: Path) -> None:
    # parse_mapping refuses "%d %d" (see test_mapping); a Mapping built some other way still
    # gets a clean error when pandas, after pyarrow, fails to compile the format
    # (%f, which pyarrow's strptime lacks, sends the column to pandas)
    m = dataclasses.replace(basic('format = "%d"'), time_format="%d %d.%f")
    lines = [f"0{i + 1} 0{i + 1}.5,run,1,1,1,x" for i in range(3)]
    with pytest.raises(InputError) as caught:
        read_log(write(tmp_path / "log.csv", lines), m)
    err = caught.value
    assert err.source == "skid.toml" and err.field == "time.format"  # the mapping's fault
    assert "pandas cannot parse times with '%d %d.%f'" in str(err)


def test_a_long_formatted_time_is_refused_by_length(tmp_path: Path) -> None:
    m = basic('format = "%Y-%m-%d %H:%M:%S.%f"')
    lines = [f"2026-06-01 08:00:0{i}.5,run,1,1,1,x" for i in range(3)]
    assert read_log(write(tmp_path / "ok.csv", lines), m).time_s.tolist() == [0.0, 1.0, 2.0]
    lines[1] = "2026-06-01 08:00:01.5" + "9" * 100 + ",run,1,1,1,x"
    err = fails(write(tmp_path / "log.csv", lines), m)
    assert err.line == 3 and "a time of 121 characters; expected at most 64" in str(err)


def test_a_long_iso_time_is_refused_before_any_pattern(tmp_path: Path) -> None:
    lines = rows(5)
    lines[1] = "T1" * 50_000 + lines[1][lines[1].index(",") :]
    err = fails(write(tmp_path / "log.csv", lines))
    assert err.line == 3 and "a time of 100000 characters" in str(err)


def test_a_huge_cell_before_a_bad_one_still_names_a_line(tmp_path: Path) -> None:
    lines = rows(5)
    lines[0] = lines[0][:-1] + "y" * (200 * 1024)  # the unmapped Spare column, over 128 KiB
    lines[3] = lines[3].replace(",run,13,", ",run,abc,")
    err = fails(write(tmp_path / "log.csv", lines))
    # the csv module cannot re-read the huge line to find the cell's text: the line is still
    # named (blank lines, which this file has none of, would not be counted)
    assert err.field == "PT-01" and err.line == 5
    assert "column 'PT-01': the cell is not a number" in str(err), str(err)


@pytest.mark.parametrize(
    ("name", "says"),
    [
        ("x" * 300 + ".csv", "a part of the path is 304 bytes long"),
        ("a\x00b.csv", "NUL"),
        ("", "the path is empty"),
    ],
)
def test_unusable_log_paths_name_the_field(name: str, says: str) -> None:
    with pytest.raises(InputError) as caught:
        read_log(name, basic())
    assert caught.value.field == "file" and says in str(caught.value)


def test_a_directory_is_not_a_log(tmp_path: Path) -> None:
    err = fails(tmp_path)
    assert err.field == "file" and "it is a directory" in str(err)


@pytest.mark.parametrize("header", [HEADER + ",PT-01", HEADER + ",Spare"])
def test_a_column_named_twice_names_both_positions(tmp_path: Path, header: str) -> None:
    path = write(tmp_path / "log.csv", [r + ",1" for r in rows(3)], header=header)
    err = fails(path)
    name = header.rsplit(",", 1)[1]
    first = HEADER.split(",").index(name) + 1
    assert err.line == 1 and err.value == name
    assert f"columns {first} and 7" in str(err)


def test_a_digest_left_pending_is_settled_by_summarize(tmp_path: Path) -> None:
    """read_log(wait=False) returns before the SHA-256 is done; summarize fills it in, the
    same as hashlib's of the file, in the log, its file entry and the summary."""
    from ledger.runs.actuals import Geometry, summarize

    path = write(tmp_path / "log.csv", rows(5))
    expected = hashlib.sha256(path.read_bytes()).hexdigest()
    log = read_log(path, basic(), wait=False)
    assert log.sha256 is None and log.pending is not None
    summary = summarize(log, Geometry())
    assert summary.sha256 == log.sha256 == log.files[0].sha256 == expected
    assert log.pending is None
