"""Reading points files with units in their headers; errors carry file and line."""

from __future__ import annotations

from pathlib import Path

import pytest

from ledger.errors import InputError
from ledger.pointsfile import MAX_ROWS, Column, read_points

SPEC = [Column("concentration", "concentration"), Column("flux", "flux")]


def write(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "points.csv"
    p.write_text(text, encoding="utf-8")
    return p


def test_reads_columns_in_si(tmp_path: Path) -> None:
    p = write(tmp_path, "# scouting\nconcentration [g/L],flux [LMH]\n1,36\n\n2,18\n")
    pts = read_points(p, SPEC)
    assert pts.columns["concentration"] == pytest.approx([1.0, 2.0])
    assert pts.columns["flux"] == pytest.approx([1e-5, 5e-6])
    assert pts.lines == [3, 5]


@pytest.mark.parametrize(
    ("text", "line", "says"),
    [
        ("concentration [g/L]\n1\n", 1, "missing column 'flux'"),
        ("concentration [g/L],flux\n1,2\n", 1, "has no unit"),
        ("concentration [g/L],flux [psi]\n1,2\n", 1, "expected a flux"),
        ("concentration [g/L],flux [LMH]\n1,2\n2,abc\n", 3, "is not a number"),
        ("concentration [g/L],flux [LMH]\n1,2\n2,nan\n", 3, "not a finite number"),
        ("concentration [g/L],flux [LMH]\n1,\n", 2, "is empty"),
        ("concentration [g/L],flux [LMH]\n1,2 LMH\n", 2, "the unit is in the header"),
    ],
)
def test_errors_name_file_line_and_column(tmp_path: Path, text: str, line: int, says: str) -> None:
    p = write(tmp_path, text)
    with pytest.raises(InputError) as err:
        read_points(p, SPEC)
    assert err.value.line == line
    assert str(err.value).startswith(f"{p}:{line}: ")
    assert says in str(err.value)


def test_too_few_rows(tmp_path: Path) -> None:
    p = write(tmp_path, "concentration [g/L],flux [LMH]\n1,2\n")
    with pytest.raises(InputError, match="at least 3"):
        read_points(p, SPEC, minimum=3)


def test_empty_and_missing_file(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="empty"):
        read_points(write(tmp_path, "\n\n"), SPEC)
    with pytest.raises(InputError, match="no such file"):
        read_points(tmp_path / "nope.csv", SPEC)


# --- Encodings, limits and paths ---------------------------------------------------------------

TEXT = "concentration [g/L],flux [LMH]\n1,36\n2,18\n"


@pytest.mark.parametrize("encoding", ["utf-8", "utf-8-sig", "utf-16", "utf-16-le", "utf-16-be"])
def test_utf8_and_utf16_with_a_bom_are_read(tmp_path: Path, encoding: str) -> None:
    p = tmp_path / "points.csv"
    data = TEXT.replace("g/L", "µg/mL")  # a non-ASCII character, so the encoding matters
    raw = data.encode(encoding)
    if encoding in ("utf-16-le", "utf-16-be"):  # Python writes these without a BOM: add it
        raw = ("\ufeff" + data).encode(encoding)
    p.write_bytes(raw)
    pts = read_points(p, SPEC)
    # 1 µg/mL = 1 mg/L = 1e-3 kg/m³; 1 LMH = 1e-3 m³ / (m² · 3600 s)
    assert pts.columns["concentration"] == pytest.approx([1e-3, 2e-3])
    assert pts.columns["flux"] == pytest.approx([1e-5, 5e-6])


@pytest.mark.parametrize(
    ("raw", "says"),
    [
        (TEXT.replace("g/L", "µg/mL").encode("latin-1"), "cannot be read as UTF-8"),
        (TEXT.encode("utf-16-le"), "NUL characters (UTF-16 without a BOM?)"),
        (b"\xff\xfe" + b"\x00\xd8" + "x".encode("utf-16-le"), "cannot be read as UTF-16"),
    ],
)
def test_other_encodings_are_refused_naming_the_accepted_ones(
    tmp_path: Path, raw: bytes, says: str
) -> None:
    p = tmp_path / "points.csv"
    p.write_bytes(raw)
    with pytest.raises(InputError) as err:
        read_points(p, SPEC)
    assert says in str(err.value) and "UTF-16 with a BOM" in str(err.value)
    assert err.value.source == str(p) and err.value.field == "encoding"


def test_a_cell_over_128_kib_names_its_line(tmp_path: Path) -> None:
    p = write(tmp_path, "concentration [g/L],flux [LMH]\n1,36\n" + "1" * (130 * 1024) + ",2\n")
    with pytest.raises(InputError) as err:
        read_points(p, SPEC)
    assert err.value.line == 3 and "field larger than field limit" in str(err.value)


def test_a_file_over_the_byte_limit_is_refused_before_it_is_read(tmp_path: Path) -> None:
    p = write(tmp_path, "concentration [g/L],flux [LMH]\n" + "1," * (5 << 20) + "\n")  # 10 MiB
    with pytest.raises(InputError) as err:
        read_points(p, SPEC, field="--points-file")
    assert err.value.field == "--points-file"
    assert "the file is 10.0 MiB" in str(err.value) and "at most 4.0 MiB" in str(err.value)


def test_more_rows_than_the_limit_are_refused(tmp_path: Path) -> None:
    body = "".join(f"{i + 1},{i + 2}\n" for i in range(MAX_ROWS + 1))
    p = write(tmp_path, "concentration [g/L],flux [LMH]\n" + body)
    with pytest.raises(InputError) as err:
        read_points(p, SPEC)
    assert f"more than {MAX_ROWS:,} data rows" in str(err.value)
    assert err.value.line == MAX_ROWS + 2  # the header is line 1


def test_the_row_limit_itself_is_read_in_si(tmp_path: Path) -> None:
    body = "".join(f"{i + 1},{i + 2}\n" for i in range(MAX_ROWS))
    pts = read_points(write(tmp_path, "concentration [g/L],flux [LMH]\n" + body), SPEC)
    assert len(pts) == MAX_ROWS
    assert pts.columns["concentration"][-1] == pytest.approx(MAX_ROWS)  # g/L = kg/m³
    assert pts.columns["flux"][-1] == pytest.approx((MAX_ROWS + 1) * 1e-3 / 3600)


@pytest.mark.parametrize(
    ("cell", "says"),
    [
        ("1e308", "outside the accepted range"),  # 1e308 LMH = 2.8e302 m/s > SI_MAX
        ("1e999", "not a finite number"),
        ("1e-300", "outside the accepted range"),  # 2.8e-307 m/s < SI_MIN
        ("٣", "write its digits as 0-9"),
        ("3\u200b", "U+200B"),
        ("3#x", "not a number"),
    ],
)
def test_hostile_cells_name_file_line_and_column(tmp_path: Path, cell: str, says: str) -> None:
    p = write(tmp_path, f"concentration [g/L],flux [LMH]\n1,2\n2,{cell}\n")
    with pytest.raises(InputError) as err:
        read_points(p, SPEC)
    assert str(err.value).startswith(f"{p}:3: column 'flux'") and says in str(err.value)
    assert err.value.field == "flux"


def test_a_nul_in_a_cell_names_its_line(tmp_path: Path) -> None:
    p = write(tmp_path, "concentration [g/L],flux [LMH]\n1,2\n2,3\x00\n")
    with pytest.raises(InputError, match="NUL characters") as err:
        read_points(p, SPEC)
    assert err.value.line == 3 and err.value.source == str(p)


def test_a_plain_number_column_is_range_checked(tmp_path: Path) -> None:
    p = write(tmp_path, "cycle,flux [LMH]\n1e301,2\n")
    with pytest.raises(InputError, match="outside the accepted range") as err:
        read_points(p, [Column("cycle", None), Column("flux", "flux")])
    assert err.value.line == 2


@pytest.mark.parametrize(
    ("name", "says"),
    [
        ("x" * 300 + ".csv", "a part of the path is 304 bytes long"),
        ("a\x00b.csv", "NUL"),
        ("", "the path is empty"),
        ("/".join(["d"] * 2100), "the path is 4199 bytes long"),
    ],
)
def test_unusable_paths_name_the_field(tmp_path: Path, name: str, says: str) -> None:
    with pytest.raises(InputError) as err:
        read_points(name, SPEC, field="--points-file")
    assert err.value.field == "--points-file"
    assert str(err.value).startswith("--points-file: cannot read") and says in str(err.value)


def test_a_directory_is_not_a_points_file(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="it is a directory") as err:
        read_points(tmp_path, SPEC)
    assert err.value.field == "points file"
