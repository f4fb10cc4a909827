"""Read a small CSV of measured points whose headers carry units, e.g. ``flux [LMH]``.

Each column named in ``spec`` becomes a list of SI floats (via :mod:`ledger.units`). Errors
name the file, the line and the column: a missing column, a header without a unit where one
is needed, a non-number, NaN or infinity. Blank lines and lines starting with ``#`` are
skipped. The files are small (tens of rows), so the standard library's csv module suffices.
"""

from __future__ import annotations

import csv
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

from ledger import units
from ledger.errors import InputError


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


def read_points(path: str | Path, spec: list[Column], *, minimum: int = 1) -> Points:
    """Read ``path`` and return the columns in ``spec`` converted to SI."""
    source = str(path)
    p = Path(path)
    if not p.is_file():
        raise InputError(f"{source}: no such file", field="points file", value=source, source=None)
    with p.open(newline="", encoding="utf-8-sig") as fh:
        rows = [(i, r) for i, r in enumerate(csv.reader(fh), start=1)]
    rows = [(i, r) for i, r in rows if r and any(c.strip() for c in r)]
    rows = [(i, r) for i, r in rows if not r[0].lstrip().startswith("#")]
    if not rows:
        raise InputError("the file is empty; expected a header line", source=source, line=1)
    header_line, header = rows[0]
    found: dict[str, tuple[int, str | None]] = {}
    for pos, cell in enumerate(header):
        name, unit = units.split_header(cell)
        found[name.strip().lower()] = (pos, unit)
    index: dict[str, tuple[int, str | None]] = {}
    for col in spec:
        key = col.name.lower()
        if key not in found:
            if col.required:
                have = ", ".join(repr(h) for h in header)
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
        if col.kind is not None and unit:
            try:
                units.to_si(1.0, unit, col.kind, field=f"column {col.name!r}", raw=header[pos])
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
            if pos >= len(row) or not row[pos].strip():
                raise InputError(
                    f"column {col.name!r} is empty",
                    field=col.name,
                    value="",
                    expected="a number",
                    source=source,
                    line=line,
                )
            cell = row[pos].strip()
            field = f"column {col.name!r}"
            try:
                if col.kind is None:
                    value, _ = units.split_number(cell, field=field, expected="a number")
                    if _:
                        raise InputError(
                            f"{field}: {cell!r} is not a number", field=col.name, value=cell
                        )
                elif unit:
                    number, extra = units.split_number(cell, field=field, expected="a number")
                    if extra:
                        raise InputError(
                            f"{field}: {cell!r} is not a number (the unit is in the header)",
                            field=col.name,
                            value=cell,
                        )
                    value = units.to_si(number, unit, col.kind, field=field, raw=f"{cell} {unit}")
                else:
                    value = units.parse(cell, col.kind, field=field)
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
