"""Read a small CSV of measured points whose headers carry units, e.g. ``flux [LMH]``.

Each column named in ``spec`` becomes a list of SI floats (via :mod:`ledger.units`). Errors
name the file, the line and the column: a missing column, a header without a unit where one
is needed, a non-number, NaN or infinity, a value whose SI magnitude is out of range. Blank
lines and lines starting with ``#`` are skipped.

The files are small, so the standard library's csv module suffices, within stated limits:
at most MAX_BYTES bytes, MAX_ROWS data rows and cells of the csv module's default limit
(128 KiB). The text is UTF-8 (with or without a BOM) or UTF-16 with a BOM. Each column's
unit is converted once (SI = a·x + b), so a row costs no pint call.
"""

from __future__ import annotations

import codecs
import csv
import io
import os
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

from ledger import units
from ledger.errors import InputError
from ledger.userfiles import read_user_file

MAX_BYTES = 4 << 20  # 4 MiB: MAX_ROWS rows of a few hundred bytes
MAX_ROWS = 10_000  # data rows; a bench test has tens
ENCODINGS = "UTF-8 (with or without a BOM) or UTF-16 with a BOM"


@dataclass(frozen=True)
class Column:
    """A wanted column: its name in the header, the physical kind, whether it is required."""

    name: str
    kind: str | None  # None: a plain number (a count such as a cycle number)
    required: bool = True


@dataclass(frozen=True)
class Points:
    """Columns read from a points file: SI values and the file line of each row."""

    source: str
    columns: dict[str, list[float]]
    lines: list[int]

    def __len__(self) -> int:
        return len(self.lines)

    def has(self, name: str) -> bool:
        """True when the file had the column ``name``."""
        return name in self.columns

    @contextmanager
    def blame(self) -> Iterator[None]:
        """Attribute an InputError raised on these points to the file (and the row's line)."""
        try:
            yield
        except InputError as exc:
            exc.source = self.source
            if exc.index is not None and 0 <= exc.index < len(self.lines):
                exc.line = self.lines[exc.index]
            raise


def decode(raw: bytes, source: str) -> str:
    """The text of a points file: UTF-8 (a BOM is allowed) or UTF-16 with its BOM."""
    if raw.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        encoding = "utf-16"
    else:
        encoding = "utf-8-sig"
    try:
        text = raw.decode(encoding)
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].decode(encoding, errors="replace").count("\n")
        name = "UTF-16" if encoding == "utf-16" else "UTF-8"
        raise InputError(
            f"byte {exc.start + 1} cannot be read as {name} text; save the file as {ENCODINGS}",
            field="encoding",
            value=source,
            expected=ENCODINGS,
            source=source,
            line=line + 1,
        ) from None
    if "\x00" in text:  # valid UTF-8, but no CSV has it: UTF-16 written without its BOM
        raise InputError(
            f"the file contains NUL characters (UTF-16 without a BOM?); save it as {ENCODINGS}",
            field="encoding",
            value=source,
            expected=ENCODINGS,
            source=source,
            line=text[: text.index("\x00")].count("\n") + 1,
        )
    return text


def _rows(text: str, source: str) -> list[tuple[int, list[str]]]:
    """(line, cells) of every line that is neither blank nor a ``#`` comment."""
    rows: list[tuple[int, list[str]]] = []
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        for record in reader:
            if not record or not any(c.strip() for c in record):
                continue
            if record[0].lstrip().startswith("#"):
                continue
            if len(rows) > MAX_ROWS:  # the header and MAX_ROWS data rows are in
                raise InputError(
                    f"the file has more than {MAX_ROWS:,} data rows",
                    field="rows",
                    value=f"> {MAX_ROWS}",
                    expected=f"at most {MAX_ROWS:,} rows",
                    source=source,
                    line=reader.line_num,
                )
            rows.append((reader.line_num, record))
    except csv.Error as exc:
        raise InputError(
            f"not readable as CSV ({exc})",
            field="line",
            value=None,
            expected=f"CSV text with cells of at most {csv.field_size_limit():,} characters",
            source=source,
            line=max(reader.line_num, 1),
        ) from None
    return rows


def read_points(
    path: str | Path,
    spec: list[Column],
    *,
    minimum: int = 1,
    field: str = "points file",
) -> Points:
    """Read ``path`` and return the columns in ``spec`` converted to SI; ``field`` (the
    option that named the file) is named when the path itself is unusable."""
    source = os.fspath(path)
    rows = _rows(decode(read_user_file(path, field, MAX_BYTES), source), source)
    if not rows:
        raise InputError("the file is empty; expected a header line", source=source, line=1)
    header_line, header = rows[0]
    found: dict[str, tuple[int, str | None]] = {}
    for pos, cell in enumerate(header):
        name, unit = units.split_header(cell)
        found[name.strip().lower()] = (pos, unit)
    index: dict[str, tuple[int, str | None]] = {}
    conversions: dict[str, units.Linear | None] = {}
    for col in spec:
        key = col.name.lower()
        if key not in found:
            if col.required:
                have = ", ".join(repr(h[:40]) for h in header[:20])
                raise InputError(
                    f"missing column {col.name!r}; the header has {have}",
                    field=col.name,
                    value=header,
                    expected=f"a column {col.name!r}",
                    source=source,
                    line=header_line,
                )
            continue
        pos, unit = found[key]
        if col.kind is not None and col.kind != "fraction" and not unit:
            example = units.KINDS[col.kind].example.split(",")[0].split()[-1]
            raise InputError(
                f"column {col.name!r} has no unit; write it as '{col.name} [{example}]'",
                field=col.name,
                value=header[pos],
                expected=f"a {col.kind.replace('_', ' ')} unit in brackets",
                source=source,
                line=header_line,
            )
        conversions[col.name] = None
        if col.kind is not None and unit:
            try:
                conversions[col.name] = units.linear(
                    unit, col.kind, field=f"column {col.name!r}", shown=header[pos]
                )
            except InputError as exc:
                raise InputError(
                    exc.message,
                    field=col.name,
                    value=header[pos],
                    expected=exc.expected,
                    source=source,
                    line=header_line,
                ) from None
        index[col.name] = (pos, unit)
    columns: dict[str, list[float]] = {name: [] for name in index}
    lines: list[int] = []
    for line, row in rows[1:]:
        for col in spec:
            if col.name not in index:
                continue
            pos, unit = index[col.name]
            cell = row[pos].strip() if pos < len(row) else ""
            if not cell:
                raise InputError(
                    f"column {col.name!r} is empty",
                    field=col.name,
                    value="",
                    expected="a number",
                    source=source,
                    line=line,
                )
            try:
                value = _value(cell, col, unit, conversions[col.name])
            except InputError as exc:
                raise InputError(
                    exc.message,
                    field=col.name,
                    value=cell,
                    expected=exc.expected,
                    source=source,
                    line=line,
                ) from None
            columns[col.name].append(value)
        lines.append(line)
    if len(lines) < minimum:
        raise InputError(
            f"the file has {len(lines)} data row(s); at least {minimum} are needed",
            field="rows",
            value=len(lines),
            expected=f"at least {minimum} rows",
            source=source,
        )
    return Points(source=source, columns=columns, lines=lines)


def _value(cell: str, col: Column, unit: str | None, conversion: units.Linear | None) -> float:
    """One cell in SI: a plain number, a number in the header's unit, or a quantity."""
    field = f"column {col.name!r}"
    if col.kind is None or unit:
        number, extra = units.split_number(cell, field=field, expected="a number")
        if extra:
            why = " (the unit is in the header)" if unit else ""
            raise InputError(f"{field}: {cell!r} is not a number{why}", field=col.name, value=cell)
        if col.kind is None:
            return units.check_si(number, "number", field=field, shown=cell)
        assert unit is not None and conversion is not None
        shown = f"{cell} {unit}"
        if not conversion.affine:
            return units.to_si(number, unit, col.kind, field=field, raw=shown)
        si = conversion.a * number + conversion.b
        return units.check_si(si, col.kind, field=field, shown=shown)
    return units.parse(cell, col.kind, field=field)
