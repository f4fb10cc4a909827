"""Work out how a skid wrote its CSV export: encoding, delimiter, decimal mark, the header line
below any preamble, and a row of units under the header. Pure: it looks at bytes only.

What the caller already knows (from the mapping's ``[file]`` table) is passed in and kept;
the rest is detected and named in ``Dialect.detected``. A choice that cannot be made is an
InputError saying what was tried and which ``[file]`` key settles it.
"""

from __future__ import annotations

import codecs
import csv
import io
import re
from dataclasses import dataclass

from ledger.errors import InputError

DELIMITERS = (",", ";", "\t")
SAMPLE_LINES = 50  # data lines after the header looked at for field counts and numbers
_NUMBER_COMMA = re.compile(r"^[+-]?\d+,\d+(?:[eE][+-]?\d+)?$")
_NUMBER = re.compile(r"^[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?$")
_TIMEISH = re.compile(r"\d{1,4}[-/.:]\d{1,2}")


@dataclass(frozen=True)
class Dialect:
    """How one export is written; ``header_line`` is 1-based, ``detected`` names the keys
    that were worked out rather than given."""

    encoding: str = "utf-8"
    delimiter: str = ","
    decimal: str = "."
    header_line: int = 1
    units_row: bool = False
    sheet: str | None = None
    detected: tuple[str, ...] = ()

    @property
    def plain(self) -> bool:
        """True for the common UTF-8, comma, point-decimal export with the header on line 1."""
        return (
            self.encoding in ("utf-8", "utf-8-sig")
            and self.delimiter == ","
            and self.decimal == "."
            and self.header_line == 1
            and not self.units_row
        )


def detect_encoding(data: bytes, source: str | None = None) -> str:
    """utf-8-sig or utf-16 by their byte-order marks, else utf-8 if it decodes, else cp1252,
    else latin-1 (which decodes any bytes). NUL bytes without a BOM (UTF-16 or UTF-32 with
    no mark, or binary data) cannot be decided: an InputError naming ``[file] encoding``."""
    if data.startswith(b"\xef\xbb\xbf"):
        return "utf-8-sig"
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "utf-16"
    if b"\x00" in data:
        raise InputError(
            "cannot tell the encoding: the file holds NUL bytes but no UTF-16 byte-order mark "
            "(tried UTF-8, UTF-16 by its mark, cp1252, latin-1); set [file] encoding in the "
            "mapping",
            field="file.encoding",
            expected="utf-8, utf-8-sig, utf-16, cp1252 or latin-1",
            source=source,
        )
    try:  # incremental: a sample cut inside a multi-byte character is still UTF-8
        codecs.getincrementaldecoder("utf-8")().decode(data, final=False)
        return "utf-8"
    except UnicodeDecodeError:
        pass
    try:
        data.decode("cp1252")
        return "cp1252"
    except UnicodeDecodeError:  # 0x81, 0x8D, 0x8F, 0x90, 0x9D are undefined in cp1252
        return "latin-1"


def decode(data: bytes, encoding: str, source: str) -> str:
    """The text of ``data``; an InputError naming ``[file] encoding`` if it does not decode."""
    try:
        return data.decode(encoding)
    except (UnicodeDecodeError, LookupError) as exc:
        raise InputError(
            f"the file is not text in {encoding} ({exc}); set [file] encoding in the mapping",
            field="file.encoding",
            value=encoding,
            expected="utf-8, utf-8-sig, utf-16, cp1252 or latin-1",
            source=source,
        ) from None


def _rows(lines: list[str], delimiter: str) -> list[list[str]]:
    return [r for r in csv.reader(io.StringIO("\n".join(lines)), delimiter=delimiter) if r]


def find_header(lines: list[str], time_column: str, delimiter: str | None) -> int:
    """0-based index of the first line holding ``time_column`` as a cell (-1: none)."""
    for i, line in enumerate(lines):
        if time_column not in line:
            continue
        for d in (delimiter,) if delimiter else DELIMITERS:
            cells = next(csv.reader([line], delimiter=d), [])
            if time_column in (c.strip() for c in cells):
                return i
    return -1


def detect_delimiter(lines: list[str], header: int, source: str) -> str:
    """The delimiter among , ; tab that splits the header into several fields and most of the
    lines after it into as many (a malformed line is then reported by the reader with its
    line number); two that do equally well, or none, cannot be decided."""
    body = lines[header : header + 1 + SAMPLE_LINES]
    scores: dict[str, int] = {}
    for d in DELIMITERS:
        rows = _rows(body, d)
        if not rows or len(rows[0]) < 2:
            continue
        scores[d] = sum(1 for r in rows[1:] if len(r) == len(rows[0]))
    best = sorted(scores, key=lambda d: -scores[d])
    if len(best) == 1 or (len(best) > 1 and scores[best[0]] > scores[best[1]]):
        return best[0]
    raise InputError(
        "cannot tell the delimiter: "
        + (
            f"{' and '.join(repr(d) for d in best)} split the lines equally well"
            if best
            else "none of ',', ';' or tab splits the header into several fields"
        )
        + "; set [file] delimiter in the mapping",
        field="file.delimiter",
        expected="',', ';' or '\\t'",
        source=source,
        line=header + 1,
    )


def is_number(cell: str) -> bool:
    return bool(_NUMBER.match(cell.strip()))


def detect_decimal(rows: list[list[str]], delimiter: str) -> str:
    """',' when the delimiter is not ',' and number cells are written like 1,25; else '.'."""
    if delimiter == ",":
        return "."
    comma = point = 0
    for row in rows:
        for cell in row:
            c = cell.strip()
            if _NUMBER_COMMA.match(c):
                comma += 1
            elif _NUMBER.match(c) and "." in c:
                point += 1
    return "," if comma > point else "."


def looks_like_units(cells: list[str]) -> bool:
    """A row of unit names: some non-empty cells, none a number or a time."""
    filled = [c.strip() for c in cells if c.strip()]
    if not filled:
        return False
    return not any(is_number(c) or _TIMEISH.search(c) for c in filled)


def sniff(
    data: bytes,
    time_column: str,
    source: str,
    *,
    encoding: str | None = None,
    delimiter: str | None = None,
    decimal: str | None = None,
    header_line: int | None = None,
    units_row: bool | None = None,
) -> tuple[Dialect, str]:
    """The dialect of ``data`` (given keys kept, the others detected) and its decoded text."""
    detected = []
    if encoding is None:
        encoding = detect_encoding(data, source)
        detected.append("encoding")
    text = decode(data, encoding, source)
    lines = text.splitlines()[: 200 + SAMPLE_LINES]
    if header_line is None:
        index = find_header(lines, time_column, delimiter)
        if index < 0:
            read_as = "" if "encoding" in detected else f" (read as {encoding}, from [file])"
            raise InputError(
                f"no line names the time column {time_column!r}{read_as}; set [file] "
                "header_line, or check the column name and the encoding",
                field="file.header_line",
                value=time_column,
                source=source,
            )
        header_line = index + 1
        detected.append("header_line")
    if header_line > len(lines):
        raise InputError(
            f"file.header_line {header_line} is past the lines looked at ({len(lines)}); "
            "expected the line of the column names",
            field="file.header_line",
            value=header_line,
            source=source,
            expected=f"a line from 1 to {len(lines)}",
        )
    if delimiter is None:
        delimiter = detect_delimiter(lines, header_line - 1, source)
        detected.append("delimiter")
    body = _rows(lines[header_line : header_line + 1 + SAMPLE_LINES], delimiter)
    if units_row is None:
        units_row = bool(body) and looks_like_units(body[0])
        detected.append("units_row")
    if decimal is None:
        decimal = detect_decimal(body[1:] if units_row else body, delimiter)
        detected.append("decimal")
    dialect = Dialect(encoding, delimiter, decimal, header_line, units_row, None, tuple(detected))
    return dialect, text


def same_unit(written: str, mapped: str, kind: str) -> bool:
    """True when ``written`` (from a units row) converts to SI exactly as ``mapped`` does
    ("°C" and "degC" are one unit); False for another unit or one that is not understood."""
    from ledger import units

    try:
        a = units.linear(written, kind, field="units_row", shown=written)
    except InputError:
        return False
    b = units.linear(mapped, kind, field="units_row", shown=mapped)
    return a.affine and b.affine and _close(a.a, b.a) and _close(a.b, b.b)


def _close(x: float, y: float) -> bool:
    return abs(x - y) <= 1e-12 * max(abs(x), abs(y), 1.0)


def check_units_row(
    header: list[str],
    row: list[str],
    mapped: dict[str, tuple[str, str]],
    source: str,
    line: int,
) -> None:
    """Refuse a units-row cell that differs from the mapping's unit; ``mapped`` is column ->
    (unit, kind). Blank cells and unmapped columns are not checked."""
    for position, column in enumerate(header):
        if column not in mapped or position >= len(row) or not row[position].strip():
            continue
        unit, kind = mapped[column]
        written = row[position].strip().strip("()[]")
        if not same_unit(written, unit, kind):
            raise InputError(
                f"column {column!r}: the units row says {written!r} but the mapping says "
                f"{unit!r}; expected the same unit",
                field=column,
                value=written,
                expected=unit,
                source=source,
                line=line,
            )
