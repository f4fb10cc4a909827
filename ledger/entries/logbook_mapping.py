"""The entry of ``import-logbook``: a mapping file (TOML or JSON) and an old logbook sheet (CSV
or .xlsx) in, :class:`ledger.logbook.import_logbook.SheetRows` (SI) out.

The mapping names the record kind and, for each field of the typed command (``test water`` or
``test integrity --start --end --hold-time``: the same field names), the sheet column that
holds it and, for a quantity, the unit of its cells::

    kind = "water_flux"            # or "pressure_decay"
    utc_offset = "+01:00"          # for times written without an offset (optional)
    [columns]
    serial = "Module"
    activity_time = "Tested at"
    stage = "Stage"
    feed = { column = "Feed", unit = "psi" }
    retentate = { column = "Retentate", unit = "psi" }
    flow = { column = "Permeate flow", unit = "mL/min" }
    temperature = { column = "Water T", unit = "degC" }

A quantity column without a unit needs each cell to carry its own ("12 psi"). Cells are
converted with ``ledger.units`` (pint) as a typed option is, then checked again by the service
exactly as a typed entry. A bad cell becomes a :class:`Rejection` naming its sheet row (the
header is row 1), the field, the column and the value; an unusable mapping or sheet (not
UTF-8, too big, a NUL byte, a missing column) is an InputError (exit 2).
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from datetime import UTC, datetime, timezone
from pathlib import Path
from typing import Any

from ledger.entries.fields import Field, Spec, label
from ledger.entries.integrity import INTEGRITY_TEST
from ledger.entries.water import WATER_TEST
from ledger.errors import InputError
from ledger.logbook.import_logbook import KINDS, Rejection, SheetRows
from ledger.tomlfile import decode_utf8, parse_toml
from ledger.userfiles import check_user_file, read_user_file

MAX_MAPPING_BYTES = 1 << 20  # a mapping is a few hundred bytes
MAX_SHEET_BYTES = 256 << 20  # 256 MiB: about 2,000,000 rows of a dozen columns
MAX_ROWS = 2_000_000
MAX_CELL = 1_000  # characters in one cell

# The typed command's fields a sheet row may hold (the others need files or modes a row lacks).
_WATER = ("serial", "activity_time", "stage", "feed", "retentate", "permeate", "flow",
          "volume", "time", "temperature", "water_grade", "note")  # fmt: skip
_DECAY = ("serial", "activity_time", "start", "end", "hold_time", "test_pressure",
          "upstream_volume", "temperature", "note")  # fmt: skip
_REQUIRED = {
    "water_flux": ("serial", "activity_time", "stage", "feed", "retentate", "temperature"),
    "pressure_decay": ("serial", "activity_time", "start", "end", "hold_time"),
}
_EXPECTED_MAPPING = "a logbook mapping: kind = ... and a [columns] table (DEVELOPERS.md)"


def fields_of(kind: str) -> dict[str, Field]:
    """The fields of the typed entry that ``kind`` rows hold, by name."""
    spec: Spec = WATER_TEST if kind == "water_flux" else INTEGRITY_TEST
    names = _WATER if kind == "water_flux" else _DECAY
    return {name: spec.field(name) for name in names}


class Column:
    """One mapped column: the entry field, the sheet header, the unit of its cells (or None)."""

    def __init__(self, f: Field, header: str, unit: str | None) -> None:
        self.field = f
        self.header = header
        self.unit = unit
        self.a, self.b = 1.0, 0.0
        if unit is not None and f.kind not in ("text", "datetime"):
            from ledger import units

            conversion = units.linear(unit, f.kind, field=f"columns.{f.name}.unit", shown=unit)
            self.a, self.b = (conversion.a, conversion.b) if conversion.affine else (1.0, 0.0)
            self.affine = conversion.affine
        else:
            self.affine = True


class Mapping:
    """A checked logbook mapping: the kind, the columns, the offset of naive times."""

    def __init__(
        self, kind: str, columns: dict[str, Column], offset: timezone | None, source: str
    ) -> None:
        self.kind = kind
        self.columns = columns
        self.offset = offset
        self.source = source


def _bad_mapping(source: str, message: str, field: str, value: object = None) -> InputError:
    return InputError(message, field=field, value=value, expected=_EXPECTED_MAPPING, source=source)


def _offset(text: object, source: str) -> timezone:
    raw = str(text).strip()
    try:
        parsed = datetime.fromisoformat(f"2000-01-01T00:00{raw.replace('Z', '+00:00')}")
    except ValueError:
        parsed = None
    if parsed is None or parsed.utcoffset() is None:
        raise _bad_mapping(source, f"utc_offset {raw!r} is not an offset such as +01:00",
                           "utc_offset", raw)  # fmt: skip
    delta = parsed.utcoffset()
    assert delta is not None
    return timezone(delta)


def mapping_from(data: dict[str, Any], source: str) -> Mapping:
    """A checked mapping from parsed TOML or JSON ``data``; an InputError names the key."""
    if not isinstance(data, dict):
        raise _bad_mapping(source, "the mapping is not a table", "mapping")
    unknown = sorted(set(data) - {"kind", "columns", "utc_offset"})
    if unknown:
        raise _bad_mapping(source, f"unknown key {unknown[0]!r} in the mapping", unknown[0],
                           unknown[0])  # fmt: skip
    kind = data.get("kind")
    if kind not in KINDS:
        raise InputError(
            f"kind {kind!r} is not a logbook record kind", field="kind", value=kind,
            expected=" or ".join(KINDS), source=source,
        )  # fmt: skip
    fields = fields_of(kind)
    given = data.get("columns")
    if not isinstance(given, dict) or not given:
        raise _bad_mapping(source, "the mapping has no [columns] table", "columns")
    columns: dict[str, Column] = {}
    for name, spec in given.items():
        where = f"columns.{name}"
        if name not in fields:
            raise InputError(
                f"{where}: {name!r} is not a field of a {kind} row", field=where, value=name,
                expected=", ".join(fields), source=source,
            )  # fmt: skip
        if isinstance(spec, str):
            header, unit = spec, None
        elif isinstance(spec, dict) and set(spec) <= {"column", "unit"} and "column" in spec:
            header, unit = spec["column"], spec.get("unit")
        else:
            raise _bad_mapping(source, f"{where} must be a column name or "
                               "{ column = ..., unit = ... }", where, spec)  # fmt: skip
        if not isinstance(header, str) or not header.strip() or len(header) > MAX_CELL:
            raise _bad_mapping(source, f"{where}: the column name must be text", where, header)
        if unit is not None and not isinstance(unit, str):
            raise _bad_mapping(source, f'{where}.unit must be text such as "psi"', where, unit)
        f = fields[name]
        if unit is not None and f.kind in ("text", "datetime"):
            raise _bad_mapping(source, f"{where}: {name} is not a quantity; it takes no unit",
                               f"{where}.unit", unit)  # fmt: skip
        try:
            columns[name] = Column(f, header.strip(), unit)
        except InputError as err:
            err.source = source
            raise
    missing = [n for n in _REQUIRED[kind] if n not in columns]
    if kind == "water_flux" and "flow" not in columns and not {"volume", "time"} <= set(columns):
        missing.append("flow (or volume and time)")
    if missing:
        raise _bad_mapping(source, f"the mapping names no column for {', '.join(missing)}",
                           f"columns.{missing[0].split()[0]}")  # fmt: skip
    offset = _offset(data["utc_offset"], source) if "utc_offset" in data else None
    return Mapping(kind, columns, offset, source)


def load_mapping(path: str | os.PathLike[str]) -> Mapping:
    """Read the mapping file at ``path`` (.json is JSON, anything else TOML)."""
    source = os.fspath(path)
    raw = read_user_file(path, "mapping", MAX_MAPPING_BYTES, as_source=True)
    text = decode_utf8(raw, source, "mapping", _EXPECTED_MAPPING)
    if source.lower().endswith(".json"):
        try:
            data = json.loads(text)
        except (ValueError, RecursionError) as exc:
            raise _bad_mapping(source, f"not valid JSON: {exc}", "mapping") from None
    else:
        data = parse_toml(text, source, "mapping", _EXPECTED_MAPPING)
    return mapping_from(data, source)


# Reading the sheet ---------------------------------------------------------------------------


def _csv_rows(path: Path, source: str) -> list[list[Any]]:
    raw = read_user_file(path, "file", MAX_SHEET_BYTES, as_source=True)
    if b"\x00" in raw:
        line = raw[: raw.index(b"\x00")].count(b"\n") + 1
        raise InputError(
            f"the file holds a NUL byte (line {line}); it is not a text "
            "CSV (UTF-16, or a binary file?)", field="file", value=source, source=source,
            expected="a CSV file saved as UTF-8",
        )  # fmt: skip
    text = decode_utf8(raw, source, "file", "a CSV file saved as UTF-8")
    try:
        dialect: Any = csv.Sniffer().sniff(text[:8192], delimiters=",;\t")
    except csv.Error:
        dialect = csv.excel
    rows: list[list[Any]] = []
    reader = csv.reader(io.StringIO(text, newline=""), dialect)
    try:
        for record in reader:
            rows.append(record)
            if len(rows) > MAX_ROWS + 1:
                raise InputError(f"the sheet has more than {MAX_ROWS:,} rows; split it",
                                 field="file", value=source, source=source)  # fmt: skip
    except csv.Error as exc:
        raise InputError(f"row {reader.line_num}: not a readable CSV row: {exc}", field="file",
                         value=source, source=source, line=reader.line_num,
                         expected="a CSV file saved as UTF-8") from None  # fmt: skip
    return rows


def _xlsx_rows(path: Path, source: str) -> list[list[Any]]:
    from python_calamine import CalamineWorkbook

    check_user_file(path, "file", MAX_SHEET_BYTES, as_source=True)
    try:
        book = CalamineWorkbook.from_path(str(path))
        names = list(book.sheet_names)
        if not names:
            raise InputError("the workbook has no sheets", field="file", value=source,
                             source=source)  # fmt: skip
        rows: list[list[Any]] = book.get_sheet_by_name(names[0]).to_python(skip_empty_area=False)
    except InputError:
        raise
    # calamine raises its own error types for a damaged or foreign file
    except Exception as exc:
        raise InputError(f"cannot read the workbook: {exc}", field="file", value=source,
                         source=source, expected="an Excel workbook (.xlsx)") from None  # fmt: skip
    if len(rows) > MAX_ROWS + 1:
        raise InputError(f"the sheet has more than {MAX_ROWS:,} rows; split it", field="file",
                         value=source, source=source)  # fmt: skip
    return rows


def _header_text(cell: Any) -> str:
    return cell.strip() if isinstance(cell, str) else ("" if cell is None else str(cell))


def _control(text: str) -> str | None:
    for char in text:
        if (ord(char) < 32 and char != "\t") or 0x7F <= ord(char) < 0xA0:
            return f"U+{ord(char):04X}"
    return None


def _cell_text(cell: Any) -> str | None:
    if cell is None:
        return None
    if isinstance(cell, bool):
        return str(cell)
    if isinstance(cell, float) and cell.is_integer() and abs(cell) < 1e15:
        return str(int(cell))
    text = str(cell).strip()
    return text or None


def _time(cell: Any, col: Column, offset: timezone | None) -> datetime:
    from ledger.logbook.times import parse_time

    if isinstance(cell, datetime):
        value = cell
    else:
        text = str(cell).strip()
        try:
            value = datetime.fromisoformat(text.replace("Z", "+00:00"))
        except ValueError:
            return parse_time(text, field=col.field.name)  # its error says what is expected
    if value.tzinfo is None:
        if offset is None:
            raise InputError(
                f"{value.isoformat()!r} has no UTC offset (and the mapping gives no utc_offset)",
                field=col.field.name, value=str(cell),
                expected="a time with its offset, or utc_offset = \"+01:00\" in the mapping",
            )  # fmt: skip
        value = value.replace(tzinfo=offset)
    return value.astimezone(UTC)


def _quantity(cell: Any, col: Column) -> tuple[float, str]:
    """(SI value, the cell as entered with its unit)."""
    from ledger import units
    from ledger.entries.fields import parse_field

    f = col.field
    number: float | None = None
    if isinstance(cell, int | float) and not isinstance(cell, bool):
        number = float(cell)
        text = repr(number) if not float(cell).is_integer() else str(int(cell))
    else:
        text = str(cell).strip()
        try:
            number = float(text)
        except ValueError:
            number = None
        if number is not None and not math.isfinite(number):
            number = None  # "nan", "inf": parse_field refuses them with its message
    if number is not None and col.unit is not None and col.affine:
        si = units.check_si(col.a * number + col.b, f.kind, field=label(f.name),
                            shown=f"{text} {col.unit}")  # fmt: skip
        if f.positive and si <= 0:
            raise InputError(f"{text} {col.unit} must be greater than zero", field=f.name,
                             value=text, expected="a value greater than zero")  # fmt: skip
        return si, f"{text} {col.unit}"
    if col.unit is not None and number is not None:
        text = f"{text} {col.unit}"
    value = parse_field(Field(f.name, f.kind, positive=f.positive, default_unit=col.unit), text)
    return float(value), text


def read_logbook(mapping: Mapping, path: str | os.PathLike[str]) -> SheetRows:
    """The rows of the sheet at ``path`` (.xlsx through python-calamine, else CSV), parsed to
    SI by ``mapping``: pressures Pa (gauge), flows m³/s, volumes m³, times s, temperatures K,
    activity times aware UTC. Rows with a bad cell are left out and listed as rejections."""
    source = os.fspath(path)
    p = Path(source)
    rows = _xlsx_rows(p, source) if source.lower().endswith((".xlsx", ".xlsm")) else (
        _csv_rows(p, source))  # fmt: skip
    if not rows:
        raise InputError("the sheet is empty; its first row must be the header", field="file",
                         value=source, source=source)  # fmt: skip
    header = [_header_text(c) for c in rows[0]]
    index: dict[str, int] = {}
    for name, col in mapping.columns.items():
        hits = [k for k, h in enumerate(header) if h == col.header]
        if not hits:
            raise InputError(
                f"the sheet has no column {col.header!r} (columns.{name} of {mapping.source})",
                field=f"columns.{name}", value=col.header, source=source,
                expected="one of its header cells: " + ", ".join(repr(h) for h in header[:20]),
            )  # fmt: skip
        if len(hits) > 1:
            raise InputError(f"the sheet has {len(hits)} columns named {col.header!r}",
                             field=f"columns.{name}", value=col.header, source=source,
                             expected="one column of that name")  # fmt: skip
        index[name] = hits[0]
    sheet = SheetRows(mapping.kind, source)
    quantities = [n for n, c in mapping.columns.items() if c.field.kind not in ("text", "datetime")]
    texts = [n for n, c in mapping.columns.items() if c.field.kind == "text"]
    for name in quantities:
        sheet.quantities[name] = []
    for name in texts:
        sheet.texts[name] = []
    for number, record in enumerate(rows[1:], start=2):
        cells = {n: (record[k] if k < len(record) else None) for n, k in index.items()}
        cells = {n: (None if isinstance(v, str) and not v.strip() else v) for n, v in cells.items()}
        if all(v is None for v in cells.values()):
            sheet.blank.append(number)
            continue
        bad: list[Rejection] = []
        at: datetime | None = None
        values: dict[str, float | None] = {}
        words: dict[str, str | None] = {}
        entered: dict[str, str] = {}
        for name, col in mapping.columns.items():
            cell = cells[name]
            try:
                if isinstance(cell, str):
                    if len(cell) > MAX_CELL:
                        raise InputError(f"the cell holds {len(cell):,} characters",
                                         field=name, value=cell[:40] + "...",
                                         expected=f"at most {MAX_CELL} characters")  # fmt: skip
                    char = _control(cell)
                    if char is not None:
                        raise InputError(f"the cell holds the control character {char}",
                                         field=name, value=cell,
                                         expected="printable text")  # fmt: skip
                if col.field.kind == "datetime":
                    if cell is None:
                        raise InputError("the activity time is missing", field=name, value=None,
                                         expected="ISO 8601 with a UTC offset")  # fmt: skip
                    at = _time(cell, col, mapping.offset)
                elif col.field.kind == "text":
                    words[name] = _cell_text(cell)
                elif cell is None:
                    values[name] = None
                else:
                    values[name], entered[name] = _quantity(cell, col)
            except InputError as err:
                why = err.message.removeprefix(label(name) + ": ")
                bad.append(Rejection(number, name, cell, err.expected or "",
                                     f"column {col.header!r}: {why}"))  # fmt: skip
        if bad:
            sheet.rejected.extend(bad)
            continue
        assert at is not None
        sheet.rows.append(number)
        sheet.at.append(at)
        for name in quantities:
            sheet.quantities[name].append(values[name])
        for name in texts:
            sheet.texts[name].append(words[name])
        sheet.entered.append(entered)
    return sheet
