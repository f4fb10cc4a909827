"""Read a skid export saved as an Excel workbook (.xlsx) through python-calamine.

python-calamine (Rust's calamine) was chosen over openpyxl on speed: it reads a sheet of
86,400 rows in a fraction of the time openpyxl takes (bench/skidlog.py measures our import
against calamine's own bare read). The sheet is the mapping's ``[file] sheet`` or the first;
the header is ``[file] header_line`` or the first row holding the mapped time column, any
rows above it a preamble; a row of units under it is checked against the mapping as in a
CSV. Date cells arrive as datetimes, numbers as floats; everything else is text and is
refused by the same checks as a CSV cell, naming the sheet and row.
"""

from __future__ import annotations

from datetime import date, datetime, time
from pathlib import Path
from typing import Any

from ledger.errors import InputError
from ledger.runs.dialect import Dialect, check_units_row, looks_like_units
from ledger.runs.mapping import CHANNEL_KINDS, Mapping

MAX_ROWS = 2_000_000  # rows of one sheet (a 24 h log at 1 Hz has 86,400)


class SheetWhere:
    """Names sheet rows (1-based, as a spreadsheet shows them) and cell text for errors."""

    def __init__(self, path: Path, sheet: str, header: list[str], first_row: int,
                 rows: list[list[Any]]) -> None:  # fmt: skip
        self.path = path
        self.sheet = sheet
        self.header = header
        self.first_row = first_row  # sheet row of data row 0
        self.rows = rows

    def cell(self, row: int, column: str) -> tuple[int, str | None]:
        index = self.header.index(column)
        if 0 <= row < len(self.rows):
            record = self.rows[row]
            value = record[index] if index < len(record) else None
            return self.first_row + row, None if value is None else str(value)
        return self.first_row + row, None

    def error(self, row: int, column: str, message: str) -> InputError:
        line, text = self.cell(row, column)
        shown = repr(text) if text is not None else "the cell"
        return InputError(
            f"sheet {self.sheet!r}, column {column!r}: " + message.replace("{text}", shown),
            field=column,
            value=text,
            source=str(self.path),
            line=line,
        )


def read_sheet(path: Path, mapping: Mapping) -> tuple[Any, Dialect, SheetWhere]:
    """The mapped columns of the sheet as a pandas frame, the dialect found and the namer."""
    import pandas as pd
    from python_calamine import CalamineWorkbook

    source = str(path)
    try:
        book = CalamineWorkbook.from_path(str(path))
    # calamine raises its own error types for a damaged or foreign file
    except Exception as exc:
        raise InputError(f"cannot read the workbook: {exc}", field="file", value=source,
                         source=source, expected="an Excel workbook (.xlsx)") from None  # fmt: skip
    names = list(book.sheet_names)
    wanted_sheet = mapping.file.sheet
    if wanted_sheet is not None and wanted_sheet not in names:
        raise InputError(
            f"the workbook has no sheet {wanted_sheet!r} (from file.sheet of {mapping.source}); "
            f"its sheets are: {', '.join(repr(n) for n in names)}",
            field="file.sheet", value=wanted_sheet, source=source,
        )  # fmt: skip
    if not names:
        raise InputError("the workbook has no sheets", field="file", source=source)
    sheet = wanted_sheet or names[0]
    rows = book.get_sheet_by_name(sheet).to_python(skip_empty_area=False)
    if len(rows) > MAX_ROWS:
        raise InputError(f"sheet {sheet!r} has {len(rows)} rows; at most {MAX_ROWS} are read",
                         field="rows", source=source)  # fmt: skip
    detected = []
    if mapping.file.header_line is not None:
        h = mapping.file.header_line - 1
    else:
        h = next(
            (i for i, r in enumerate(rows) if mapping.time_column in (_text(c) for c in r)), -1
        )
        detected.append("header_line")
        if h < 0:
            raise InputError(
                f"no row of sheet {sheet!r} names the time column {mapping.time_column!r}; "
                "set [file] header_line",
                field="file.header_line", value=mapping.time_column, source=source,
            )  # fmt: skip
    if h >= len(rows):
        raise InputError(f"sheet {sheet!r} has no row {h + 1}", field="file.header_line",
                         value=h + 1, source=source)  # fmt: skip
    header = [_text(c) for c in rows[h]]
    body = rows[h + 1 :]
    units_row = mapping.file.units_row
    if units_row is None:
        units_row = bool(body) and looks_like_units([_text(c) for c in body[0]])
        detected.append("units_row")
    if units_row and body:
        mapped = {c.column: (c.unit, CHANNEL_KINDS[c.channel] or "")
                  for c in mapping.channels.values() if c.unit is not None}  # fmt: skip
        check_units_row(header, [_text(c) for c in body[0]], mapped, source, h + 2)
        body = body[1:]
    first_row = h + 2 + (1 if units_row else 0)
    body = [r for r in body if any(_text(c) for c in r)]  # blank rows are no samples
    from ledger.runs.skidlog import _check_duplicates  # one rule for CSV and sheets

    _check_duplicates(path, header, h + 1)
    where = SheetWhere(path, sheet, header, first_row, body)
    columns = [mapping.time_column] + [c.column for c in mapping.channels.values()]
    if mapping.date_column:
        columns.append(mapping.date_column)
    data: dict[str, Any] = {}
    for column in columns:
        if column not in header:
            raise InputError(
                f"column {column!r} is not in the header of sheet {sheet!r}; its columns "
                f"are: {', '.join(repr(c) for c in header if c)}",
                field=column, value=column, source=source, line=h + 1,
            )  # fmt: skip
        i = header.index(column)
        cells = [r[i] if i < len(r) else None for r in body]
        data[column] = _series(cells, column, mapping)
    frame = pd.DataFrame(data)
    dialect = Dialect("xlsx", ",", ".", h + 1, bool(units_row), sheet, tuple(detected))
    return frame, dialect, where


def _text(cell: Any) -> str:
    return cell.strip() if isinstance(cell, str) else ("" if cell is None else str(cell))


def _series(cells: list[Any], column: str, mapping: Mapping) -> Any:
    """One column: datetimes for a time column of date cells, floats where every cell is a
    number, else text (which the reader's checks refuse or parse, naming the row)."""
    import pandas as pd

    timey = column in (mapping.time_column, mapping.date_column)
    if timey and cells and all(isinstance(c, datetime) for c in cells) and not mapping.date_column:
        return pd.Series(pd.to_datetime(cells))
    if timey:
        return pd.Series([_time_text(c) for c in cells], dtype="object")
    if all(isinstance(c, int | float) and not isinstance(c, bool) for c in cells):
        return pd.Series(cells, dtype="float64")
    return pd.Series([None if c in (None, "") else c for c in cells], dtype="object")


def _time_text(cell: Any) -> str | None:
    """A date or time cell as text the mapping's format reads (ISO 8601 order)."""
    if cell is None or cell == "":
        return None
    if isinstance(cell, datetime):
        return cell.strftime("%Y-%m-%d %H:%M:%S")
    if isinstance(cell, date):
        return cell.strftime("%Y-%m-%d")
    if isinstance(cell, time):
        return cell.strftime("%H:%M:%S")
    return str(cell)
