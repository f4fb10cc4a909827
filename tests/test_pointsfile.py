"""Reading points files with units in their headers; errors carry file and line."""

from __future__ import annotations

from pathlib import Path

import pytest

from ledger.errors import InputError
from ledger.pointsfile import Column, read_points

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
