"""The logbook as one JSON file and back: every table in foreign-key order, values lossless.

The file (format ``fluxledger-logbook``, version 1) holds the schema revision, when it was
written, the site key's ID (never the key) and, per table, its columns (name, type, SI unit
read off the column name's suffix) and its rows as lists in column order. Values: integers and
floats as JSON numbers (Python's shortest repr, which reads back to the same double), booleans
as true/false, timestamps as ISO 8601 with their UTC offset, dates as ISO dates, bytes as
base64, JSON columns as the JSON they hold. A JSON column's cell that is SQL NULL (rather than
JSON null) is listed under the table's ``sql_null``, so both come back as they were.

Loading writes the rows verbatim (same ids, record hashes and audit chain) into a database
with no rows; the caller (ledger.logbook.exports) adds the audit event of the import.
"""

from __future__ import annotations

import base64
import binascii
import json
from collections.abc import Iterator
from dataclasses import dataclass, field
from datetime import date, datetime
from typing import Any

from sqlalchemy import (
    JSON,
    Boolean,
    Date,
    Float,
    Integer,
    LargeBinary,
    String,
    Table,
    delete,
    func,
    null,
    select,
    text,
)
from sqlalchemy.engine import Connection
from sqlmodel import SQLModel

from ledger.errors import InputError
from ledger.store.schema import REVISION
from ledger.store.types import UTCDateTime

FORMAT = "fluxledger-logbook"
FORMAT_VERSION = 1
STREAM = 2_000  # rows fetched or inserted at a time

# SI unit of a column by the suffix of its name, longest suffix first (tables.py names them).
SUFFIX_UNITS: tuple[tuple[str, str], ...] = (
    ("_m_s_pa", "m/(s·Pa)"),
    ("_kg_m2", "kg/m²"),
    ("_m3_s", "m³/s"),
    ("_pa_s", "Pa/s"),
    ("_per_m", "1/m"),
    ("_bytes", "byte"),
    ("_s_m", "S/m"),
    ("_m_s", "m/s"),
    ("_m3", "m³"),
    ("_m2", "m²"),
    ("_pa", "Pa"),
    ("_m", "m"),
    ("_k", "K"),
    ("_s", "s"),
)
# Ratios without a suffix: a fraction (0.9 is 90 %).
FRACTIONS = frozenset(
    {"recovery", "recovery_min", "recovery_alert", "damage_ratio", "preuse_band", "r_squared"}
)
FRACTION = "fraction"


def column_unit(name: str) -> str | None:
    """The unit of a numeric column named ``name``: its SI suffix's unit, "fraction", or None
    (a count, an identifier, or a value whose unit another column names)."""
    if name in FRACTIONS:
        return FRACTION
    for suffix, unit in SUFFIX_UNITS:
        if name.endswith(suffix):
            return unit
    return None


def column_kind(column: Any) -> str:
    """The export type of a column: integer, float, boolean, datetime, date, bytes, json, text."""
    t = column.type
    if isinstance(t, UTCDateTime):
        return "datetime"
    t = getattr(t, "impl", t)  # a TypeDecorator (sqlmodel's AutoString) by its stored type
    for cls, kind in ((Boolean, "boolean"), (Integer, "integer"), (Float, "float"),
                      (Date, "date"), (LargeBinary, "bytes"), (JSON, "json"),
                      (String, "text")):  # fmt: skip
        if isinstance(t, cls):
            return kind
    raise TypeError(f"column {column.table.name}.{column.name} has an unexported type {t!r}")


def unit_of(column: Any) -> str | None:
    """The unit of a column in an export (numeric columns only)."""
    return column_unit(column.name) if column_kind(column) in ("integer", "float") else None


def tables() -> list[Table]:
    """Every table of the logbook, in foreign-key order (a table after those it refers to)."""
    from ledger.store.registry import load_all

    load_all()
    return list(SQLModel.metadata.sorted_tables)


def encode(kind: str, value: Any) -> Any:
    """A database value as JSON (see the module docstring)."""
    if value is None:
        return None
    if kind == "datetime":
        return value.isoformat(timespec="microseconds")
    if kind == "date":
        return value.isoformat()
    if kind == "bytes":
        return base64.b64encode(bytes(value)).decode("ascii")
    if kind == "float":
        return float(value)
    return value


def read_rows(conn: Connection, table: Table) -> Iterator[tuple[list[Any], list[str]]]:
    """Each row of ``table`` in primary-key order as JSON values, with the JSON columns whose
    cell is SQL NULL."""
    kinds = [column_kind(c) for c in table.columns]
    json_cols = [c for c in table.columns if column_kind(c) == "json"]
    flags = [c.is_(None).label(f"{c.name}__is_sql_null") for c in json_cols]
    query = select(*table.columns, *flags).order_by(*table.primary_key.columns)
    n = len(kinds)
    for row in conn.execute(query.execution_options(yield_per=STREAM)):
        values = [encode(k, v) for k, v in zip(kinds, row[:n], strict=True)]
        nulls = [c.name for c, flag in zip(json_cols, row[n:], strict=True) if flag]
        yield values, nulls


def dump(conn: Connection, exported_at: datetime, key_id: str | None) -> dict[str, Any]:
    """The whole database as the export document (a dict ready for json.dumps)."""
    out: list[dict[str, Any]] = []
    for table in tables():
        rows: list[list[Any]] = []
        sql_null: dict[str, list[int]] = {}
        for i, (values, nulls) in enumerate(read_rows(conn, table)):
            rows.append(values)
            for name in nulls:
                sql_null.setdefault(name, []).append(i)
        entry: dict[str, Any] = {
            "name": table.name,
            "columns": [
                {"name": c.name, "type": column_kind(c), "unit": unit_of(c)} for c in table.columns
            ],
            "rows": rows,
        }
        if sql_null:
            entry["sql_null"] = sql_null
        out.append(entry)
    return {
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "schema_revision": REVISION,
        "exported_at": exported_at.isoformat(timespec="microseconds"),
        "site_key_id": key_id,
        "tables": out,
    }


def to_json(document: dict[str, Any]) -> bytes:
    """The document as UTF-8 JSON (NaN and infinities refused: the logbook holds none)."""
    return json.dumps(document, ensure_ascii=False, allow_nan=False, indent=1).encode("utf-8")


# --- Reading an export back -------------------------------------------------------------------


@dataclass
class Loaded:
    """A checked export: its header and, per table, rows ready to insert."""

    revision: str
    exported_at: str
    site_key_id: str | None
    rows: dict[str, list[dict[str, Any]]] = field(default_factory=dict)
    sql_null: dict[str, dict[str, set[int]]] = field(default_factory=dict)

    def counts(self) -> dict[str, int]:
        return {name: len(rows) for name, rows in self.rows.items()}


def _bad(what: str, value: Any = None, expected: str = "a fluxledger logbook export") -> InputError:
    return InputError(f"the file is not a usable export: {what}; nothing was written",
                      field="file", value=value, expected=expected)  # fmt: skip


def parse_document(data: bytes) -> dict[str, Any]:
    """The JSON object of ``data``: InputError for invalid UTF-8, invalid or too deeply nested
    JSON, or anything but an object."""
    try:
        body = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise _bad(f"byte {exc.start} is not valid UTF-8", expected="UTF-8 JSON") from None
    try:
        document = json.loads(body)
    except RecursionError:
        raise _bad("its JSON is nested too deeply", expected="an export's JSON") from None
    except json.JSONDecodeError as exc:
        raise _bad(f"not JSON ({exc.msg} at line {exc.lineno} column {exc.colno})") from None
    if not isinstance(document, dict):
        raise _bad(f"its JSON is a {type(document).__name__}, not an object")
    return document


def _decode(kind: str, value: Any, where: str) -> Any:
    def wrong(expected: str) -> InputError:
        shown = value if len(repr(value)) <= 60 else repr(value)[:57] + "..."
        return _bad(f"{where} holds {shown!r}", shown, expected)

    if value is None or kind == "json":
        return value
    if kind == "boolean":
        if not isinstance(value, bool):
            raise wrong("true or false")
        return value
    if kind == "integer":
        if isinstance(value, bool) or not isinstance(value, int):
            raise wrong("an integer")
        return value
    if kind == "float":
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise wrong("a number")
        return float(value)
    if not isinstance(value, str):
        raise wrong(f"a {kind} as text")
    try:
        value.encode("utf-8")
    except UnicodeEncodeError:
        raise wrong("text without lone surrogates") from None
    if kind == "text":
        return value
    if kind == "bytes":
        try:
            return base64.b64decode(value, validate=True)
        except (binascii.Error, ValueError):
            raise wrong("base64") from None
    try:
        if kind == "date":
            return date.fromisoformat(value)
        parsed = datetime.fromisoformat(value)
    except ValueError:
        raise wrong(f"an ISO 8601 {kind}") from None
    if parsed.tzinfo is None:
        raise wrong("an ISO 8601 timestamp with its UTC offset")
    return parsed


def check_header(document: dict[str, Any]) -> None:
    """Refuse a document that is not this format or not this schema revision."""
    if document.get("format") != FORMAT:
        raise _bad(f"its format is {document.get('format')!r}", document.get("format"),
                   f"format {FORMAT!r}")  # fmt: skip
    if document.get("format_version") != FORMAT_VERSION:
        raise _bad(f"its format version is {document.get('format_version')!r}",
                   document.get("format_version"), f"format version {FORMAT_VERSION}")  # fmt: skip
    revision = document.get("schema_revision")
    if revision != REVISION:
        raise InputError(
            f"the export is of schema revision {revision!r}, this software's is {REVISION}: load "
            "it with the fluxledger version that wrote it (then upgrade with `fluxledger init`); "
            "nothing was written",
            field="file",
            value=revision,
            expected=f"an export of schema revision {REVISION}",
        )


def load(document: dict[str, Any]) -> Loaded:
    """The rows of an export document, each value checked against its column's type.

    InputError naming the table, row and column for anything that does not fit this schema.
    """
    check_header(document)
    key_id = document.get("site_key_id")
    exported_at = document.get("exported_at")
    if key_id is not None and not isinstance(key_id, str):
        raise _bad("site_key_id is not text", key_id)
    if not isinstance(exported_at, str):
        raise _bad("exported_at is missing", exported_at)
    given = document.get("tables")
    if not isinstance(given, list) or not all(isinstance(t, dict) for t in given):
        raise _bad("it has no list of tables")
    by_name = {t.get("name"): t for t in given}
    known = tables()
    extra = sorted(str(n) for n in by_name if n not in {t.name for t in known})
    if extra or len(by_name) != len(given):
        raise _bad(f"unknown or repeated tables: {', '.join(extra) or '(repeated)'}")
    out = Loaded(REVISION, exported_at, key_id)
    for table in known:
        entry = by_name.get(table.name)
        if entry is None:
            raise _bad(f"table {table.name} is missing", expected=f"every table of {REVISION}")
        names = [c.name for c in table.columns]
        columns = entry.get("columns")
        listed = [c.get("name") if isinstance(c, dict) else None for c in columns or []]
        if listed != names:
            raise _bad(f"table {table.name} has columns {listed}", listed,
                       f"the columns {names}")  # fmt: skip
        kinds = [column_kind(c) for c in table.columns]
        rows = entry.get("rows")
        if not isinstance(rows, list):
            raise _bad(f"table {table.name} has no list of rows")
        decoded: list[dict[str, Any]] = []
        for i, row in enumerate(rows):
            if not isinstance(row, list) or len(row) != len(names):
                raise _bad(f"table {table.name} row {i + 1} is not a list of {len(names)} values")
            decoded.append({
                n: _decode(k, v, f"{table.name} row {i + 1} column {n}")
                for n, k, v in zip(names, kinds, row, strict=True)
            })  # fmt: skip
        out.rows[table.name] = decoded
        nulls = entry.get("sql_null") or {}
        if not isinstance(nulls, dict):
            raise _bad(f"table {table.name}: sql_null is not an object")
        marked: dict[str, set[int]] = {}
        for name, indexes in nulls.items():
            if name not in names or kinds[names.index(name)] != "json":
                raise _bad(f"table {table.name}: sql_null names {name!r}, not a JSON column")
            if not isinstance(indexes, list) or not all(
                isinstance(i, int) and 0 <= i < len(decoded) and decoded[i][name] is None
                for i in indexes
            ):
                raise _bad(f"table {table.name}: sql_null of {name} lists rows it cannot")
            marked[name] = set(indexes)
        out.sql_null[table.name] = marked
    return out


# --- Writing into an empty database -----------------------------------------------------------


def holding_rows(conn: Connection) -> list[str]:
    """The tables of the database that hold rows (the chain head counts once it has events)."""
    found = []
    for table in tables():
        if table.name == "audit_head":
            seq = conn.execute(text("SELECT max(seq) FROM audit_head")).scalar()
            if seq:
                found.append(table.name)
            continue
        if conn.execute(select(func.count()).select_from(table)).scalar_one():
            found.append(table.name)
    return found


def insert(conn: Connection, loaded: Loaded) -> None:
    """Insert every row as it is, parents first; the chain head replaces the empty one.

    The append-only triggers stay: they refuse UPDATE and DELETE on audit_event, not INSERT."""
    for table in tables():
        rows = loaded.rows[table.name]
        if table.name == "audit_head":
            conn.execute(delete(table))  # a new database's genesis head; no trigger guards it
        marked = loaded.sql_null.get(table.name, {})
        batch: list[dict[str, Any]] = []
        for i, row in enumerate(rows):
            nulls = {name: null() for name, s in marked.items() if i in s}
            if not nulls:
                batch.append(row)
                if len(batch) < STREAM:
                    continue
            if batch:  # in order, so a row referring to an earlier one of its table finds it
                conn.execute(table.insert(), batch)
                batch = []
            if nulls:  # JSON writes None as JSON null; null() writes SQL NULL
                conn.execute(table.insert().values(**{**row, **nulls}))
        if batch:
            conn.execute(table.insert(), batch)
    if conn.dialect.name == "postgresql":
        reset_sequences(conn)


def reset_sequences(conn: Connection) -> None:
    """PostgreSQL: move each id sequence past the largest id inserted."""
    for table in tables():
        keys = list(table.primary_key.columns)
        if len(keys) != 1 or not isinstance(keys[0].type, Integer):
            continue
        name, col = table.name, keys[0].name
        conn.execute(
            text(
                f"SELECT setval(pg_get_serial_sequence(:t, :c), "
                f'COALESCE((SELECT max("{col}") FROM "{name}"), 0) + 1, false)'
            ),
            {"t": name, "c": col},
        )


# --- Tables as spreadsheets (CSV, xlsx): for people, not for loading back ---------------------

XLSX_MAX_ROWS = 1_048_576  # rows of one worksheet, the header included (Excel's limit)
XLSX_MAX_CELL = 32_767  # characters of one cell (Excel's limit)
NOT_SHOWN = "(not shown)"  # a redacted column's cell (a password hash, a template's source)


def header(column: Any) -> str:
    """A column's heading: its name without the unit suffix and the unit in brackets
    ("nwp [m/(s·Pa)]", "recovery [fraction]"), or the bare name when it has no unit."""
    unit = unit_of(column)
    if unit is None:
        return str(column.name)
    name = str(column.name)
    for suffix, suffix_unit in SUFFIX_UNITS:
        if suffix_unit == unit and name.endswith(suffix) and len(name) > len(suffix):
            name = name[: -len(suffix)]
            break
    return f"{name} [{unit}]"


def redacted_columns(table: Table) -> frozenset[str]:
    """The columns of ``table`` a spreadsheet leaves out (as the audit trail does)."""
    from ledger.store.tables import RECORDS

    for cls in RECORDS.values():
        if cls.__table__ is table:  # type: ignore[attr-defined]
            return frozenset(cls.redacted)
    if table.name == "user_account":
        return frozenset({"password_hash"})
    return frozenset()


def cells(conn: Connection, table: Table) -> Iterator[list[Any]]:
    """Each row of ``table`` in primary-key order as spreadsheet cells: numbers as floats or
    ints, booleans as bool, SQL NULL as None, everything else as text (JSON as its JSON)."""
    hidden = redacted_columns(table)
    kinds = [column_kind(c) for c in table.columns]
    shown = [c.name not in hidden for c in table.columns]
    for values, _nulls in read_rows(conn, table):
        row: list[Any] = []
        for kind, keep, value in zip(kinds, shown, values, strict=True):
            if not keep:
                row.append(None if value is None else NOT_SHOWN)
            elif kind == "json":
                row.append(None if value is None else json.dumps(value, ensure_ascii=False))
            else:
                row.append(value)
        yield row


def _csv_text(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    return str(value)


def write_csv(conn: Connection, table: Table, out: Any) -> int:
    """``table`` as CSV into the text stream ``out`` (opened with newline=""): a header row of
    headings with units, then one line per row. Returns the number of rows."""
    import csv

    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow([header(c) for c in table.columns])
    n = 0
    for row in cells(conn, table):
        writer.writerow([_csv_text(v) for v in row])
        n += 1
    return n


def sheet_names() -> dict[str, str]:
    """The worksheet of each table: its name, cut to Excel's 31 characters (kept unique)."""
    names: dict[str, str] = {}
    taken: set[str] = set()
    for table in tables():
        name, i = table.name[:31], 1
        while name.casefold() in taken:
            i += 1
            name = f"{table.name[: 31 - len(str(i)) - 1]}~{i}"
        taken.add(name.casefold())
        names[table.name] = name
    return names


def _column_letters(index: int) -> str:
    letters = ""
    index += 1
    while index:
        index, rest = divmod(index - 1, 26)
        letters = chr(ord("A") + rest) + letters
    return letters


_XML_BAD = dict.fromkeys(
    [*range(0x00, 0x09), 0x0B, 0x0C, *range(0x0E, 0x20), 0xFFFE, 0xFFFF], "\ufffd"
)


def _xml_text(value: str) -> str:
    from xml.sax.saxutils import escape

    text_ = value.translate(_XML_BAD)
    if len(text_) > XLSX_MAX_CELL:
        text_ = text_[: XLSX_MAX_CELL - 1] + "…"
    return escape(text_)


def _xlsx_cell(ref: str, value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return f'<c r="{ref}" t="b"><v>{int(value)}</v></c>'
    if isinstance(value, int | float):
        return f'<c r="{ref}"><v>{value!r}</v></c>'
    shown = _xml_text(str(value))
    return f'<c r="{ref}" t="inlineStr"><is><t xml:space="preserve">{shown}</t></is></c>'


def _xlsx_row(number: int, letters: list[str], values: list[Any]) -> bytes:
    line = "".join(_xlsx_cell(f"{c}{number}", v) for c, v in zip(letters, values, strict=True))
    return f'<row r="{number}">{line}</row>'.encode()


_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_PKG = "http://schemas.openxmlformats.org/package/2006"


def write_xlsx(conn: Connection, out: Any) -> dict[str, int]:
    """Every table as one worksheet of an Office Open XML workbook written to the binary
    stream ``out``: a header row of headings with units, then the rows (numbers as numbers,
    timestamps as ISO 8601 text). Returns the rows per table.

    InputError (field ``format``) when a table has more rows than a worksheet holds."""
    import zipfile

    names = sheet_names()
    counts: dict[str, int] = {}
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as book:
        for number, table in enumerate(tables(), start=1):
            with book.open(f"xl/worksheets/sheet{number}.xml", "w") as sheet:
                sheet.write(f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
                            f'<worksheet xmlns="{_MAIN}"><sheetData>'.encode())  # fmt: skip
                letters = [_column_letters(i) for i in range(len(table.columns))]
                heads = [header(c) for c in table.columns]
                rows = 0
                sheet.write(_xlsx_row(1, letters, heads))
                for r, row in enumerate(cells(conn, table), start=2):
                    if r > XLSX_MAX_ROWS:
                        raise InputError(
                            f"--format xlsx: table {table.name} has more rows than a worksheet "
                            f"holds ({XLSX_MAX_ROWS - 1}); export it as csv or json; nothing "
                            "was written",
                            field="format",
                            value="xlsx",
                            expected="csv or json for a logbook this large",
                        )
                    sheet.write(_xlsx_row(r, letters, row))
                    rows += 1
                sheet.write(b"</sheetData></worksheet>")
            counts[table.name] = rows
        n = len(names)
        overrides = "".join(
            f'<Override PartName="/xl/worksheets/sheet{i}.xml" ContentType="application/'
            'vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>'
            for i in range(1, n + 1)
        )
        book.writestr("[Content_Types].xml", (
            f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Types xmlns="{_PKG}/'
            'content-types"><Default Extension="rels" ContentType="application/vnd.openxml'
            'formats-package.relationships+xml"/><Default Extension="xml" ContentType='
            '"application/xml"/><Override PartName="/xl/workbook.xml" ContentType="application/'
            'vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>'
            f"{overrides}</Types>"
        ))  # fmt: skip
        book.writestr("_rels/.rels", (
            f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns='
            f'"{_PKG}/relationships"><Relationship Id="rId1" Type="{_REL}/officeDocument" '
            'Target="xl/workbook.xml"/></Relationships>'
        ))  # fmt: skip
        sheets = "".join(
            f'<sheet name="{_xml_text(names[t.name])}" sheetId="{i}" r:id="rId{i}"/>'
            for i, t in enumerate(tables(), start=1)
        )
        book.writestr("xl/workbook.xml", (
            f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<workbook xmlns='
            f'"{_MAIN}" xmlns:r="{_REL}"><sheets>{sheets}</sheets></workbook>'
        ))  # fmt: skip
        rels = "".join(
            f'<Relationship Id="rId{i}" Type="{_REL}/worksheet" Target="worksheets/sheet{i}.xml"/>'
            for i in range(1, n + 1)
        )
        book.writestr("xl/_rels/workbook.xml.rels", (
            f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<Relationships xmlns='
            f'"{_PKG}/relationships">{rels}</Relationships>'
        ))  # fmt: skip
    return counts
