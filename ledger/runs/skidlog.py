"""Read a skid's CSV data log through its mapping into SI arrays (pandas, pyarrow engine).

Only the mapped columns are read, and the file is never changed (its SHA-256 is recorded).
The header is line 1, so data row i (from 0) is line i + 2 (blank lines, which are skipped,
are counted when a line is named). Every problem is an InputError naming the file, the line
and the column: a missing column, text or an empty cell in a number column, a bad, repeated
or backwards timestamp, a gap longer than the mapping allows, an empty file.

Times: ISO 8601 unless the mapping gives a strptime format; a time without a UTC offset is
local time in the mapping's time zone (daylight-saving changes are placed by the order of the
samples). Times must lie in the range of nanosecond timestamps (1677-09-21 to 2262-04-11).
Values are SI: Pa (gauge), m³/s, kg, m³, K, each finite with a magnitude of 0 or within
ledger.units.SI_MIN..SI_MAX. All of it is vectorized (numpy), with no Python object per row.
"""

from __future__ import annotations

import csv
import dataclasses
import hashlib
import io
import itertools
import threading
from collections.abc import Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any, Protocol

import numpy as np
from numpy.typing import NDArray

from ledger import units
from ledger.errors import InputError
from ledger.runs.dialect import Dialect, check_units_row, decode, detect_encoding, sniff
from ledger.runs.mapping import CHANNEL_KINDS, DEFAULT_DENSITY, ChannelMap, Mapping
from ledger.userfiles import check_user_file

# Cells read as missing: the default NA strings of pandas.read_csv (as its documentation
# lists them), which the importer used before it called pyarrow's reader itself.
NULL_VALUES = [
    "", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND",
    "1.#QNAN", "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null",
]  # fmt: skip
GAP_FACTOR = 5.0  # a step over 5 median sample intervals is a gap, unless the mapping says
CHUNK = 1 << 20  # bytes per read when hashing
EPOCH = datetime(1970, 1, 1, tzinfo=UTC)
MAX_BYTES = 1 << 30  # 1 GiB: a 24 h log at 1 Hz is about 10 MB
MAX_TIME_TEXT = 64  # characters in one timestamp
_NS_MAX = 2**63 - 1  # int64 nanoseconds; -2**63 is pandas' NaT
_PER_UNIT_NS = {"s": 10**9, "ms": 10**6, "us": 10**3, "ns": 1}


@dataclass(frozen=True)
class LogFile:
    """One file of a log: its name, SHA-256 (None when not hashed), data rows and dialect."""

    name: str
    sha256: str | None
    rows: int
    dialect: Dialect | None

    def to_record(self) -> dict[str, Any]:
        d = self.dialect
        return {
            "name": self.name,
            "sha256": self.sha256,
            "rows": self.rows,
            "dialect": None
            if d is None
            else {
                "encoding": d.encoding,
                "delimiter": d.delimiter,
                "decimal": d.decimal,
                "header_line": d.header_line,
                "units_row": d.units_row,
                "sheet": d.sheet,
                "detected": list(d.detected),
            },
        }


@dataclass
class SkidLog:
    """A log in SI: ``time_s`` in s since ``start`` (aware UTC), mapped channels only."""

    source: str
    sha256: str | None
    rows: int
    start: datetime
    time_s: NDArray[np.float64]
    channels: dict[str, NDArray[np.float64]]
    phases: NDArray[np.object_] | None  # str labels, one per row (shared str objects)
    assumptions: list[str] = field(default_factory=list)
    density_kg_m3: float = DEFAULT_DENSITY  # of the permeate, for a balance
    median_step_s: float | None = None  # median sample interval; worked out when not given
    phase_codes: NDArray[np.intp] | None = None  # equal codes = equal labels; worked out
    dialect: Dialect | None = None  # of the (first) file
    unmapped_labels: list[str] = field(default_factory=list)  # step labels [phases] lacks
    files: list[LogFile] = field(default_factory=list)  # in the order they were joined
    # A SHA-256 still being computed on another thread (read_log(wait=False)); settle() waits.
    pending: Any = field(default=None, repr=False, compare=False)

    def settle(self) -> SkidLog:
        """Wait for a pending SHA-256 and fill it in (here and in the one file); the log."""
        if self.pending is not None:
            value = self.pending.result()
            self.pending = None
            self.stamp([value])
        return self

    def stamp(self, digests: Sequence[str]) -> None:
        """Set the files' SHA-256 (in order) and the log's: the file's own for one file, for
        several a SHA-256 over their SHA-256s, one per line."""
        self.files = [dataclasses.replace(f, sha256=d) for f, d in zip(self.files, digests,
                                                                        strict=True)]  # fmt: skip
        self.sha256 = joined_sha256(digests)

    def __post_init__(self) -> None:
        if self.median_step_s is None:
            self.median_step_s = float(np.median(np.diff(self.time_s))) if self.rows > 1 else 0.0
        if self.phases is not None and self.phase_codes is None:
            _, codes = np.unique(self.phases.astype(str), return_inverse=True)
            self.phase_codes = codes.reshape(-1)


def joined_sha256(digests: Sequence[str | None]) -> str | None:
    """The SHA-256 of a log: its one file's, or one over several files' SHA-256s."""
    if len(digests) == 1:
        return digests[0]
    return hashlib.sha256("\n".join(d or "" for d in digests).encode()).hexdigest()


def file_sha256(path: Path) -> str:
    """SHA-256 (hex) of the file's bytes, read in 1 MiB chunks."""
    h = hashlib.sha256()
    with path.open("rb") as f:
        while chunk := f.read(CHUNK):
            h.update(chunk)
    return h.hexdigest()


class _Digest(threading.Thread):
    """file_sha256 of ``path`` on a daemon thread; :meth:`result` waits for it."""

    def __init__(self, path: Path) -> None:
        super().__init__(daemon=True)
        self.path = path
        self.value: str | None = None
        self.error: OSError | None = None
        self.start()

    def run(self) -> None:
        try:
            self.value = file_sha256(self.path)
        except OSError as exc:  # the file went away after it was read
            self.error = exc

    def result(self) -> str:
        self.join()
        if self.value is None:
            raise InputError(f"cannot read the skid log: {self.error}", field="file",
                             source=str(self.path))  # fmt: skip
        return self.value


@dataclass
class _Text:
    """The CSV as the reader sees it: the file itself (the common dialect: UTF-8, commas,
    decimal points, header on line 1), or its text transcoded to UTF-8 in memory with any
    preamble and units row taken out. ``line(k)`` is the file's own line of body line k."""

    path: Path
    dialect: Dialect
    body: bytes | None = None  # None: read the file itself
    units: list[str] | None = None  # the units row's cells

    def line(self, body_line: int) -> int:
        first = self.dialect.header_line - 1
        return first + body_line + (1 if self.dialect.units_row and body_line >= 2 else 0)

    def open(self) -> Any:
        """A text stream of the body (header first), for the csv module."""
        if self.body is None:
            return self.path.open(newline="", encoding="utf-8-sig")
        return io.TextIOWrapper(io.BytesIO(self.body), encoding="utf-8", newline="")

    def buffer(self) -> Any:
        """What pandas reads: the path, or the body's bytes."""
        return self.path if self.body is None else io.BytesIO(self.body)

    def reader(self, f: Any) -> Any:
        return csv.reader(f, delimiter=self.dialect.delimiter)


class _Namer(Protocol):
    """Names where data row i of a column is in the file (a CSV line or a sheet row)."""

    def cell(self, row: int, column: str) -> tuple[int, str | None]: ...

    def error(self, row: int, column: str, message: str) -> InputError: ...


class _Where:
    """Names file lines: the physical line of data row i and the text of one of its cells.

    Only used once something is wrong, so it may read the file again with the csv module.
    """

    def __init__(self, text: _Text, header: list[str]) -> None:
        self.text = text
        self.path = text.path
        self.header = header

    def cell(self, row: int, column: str) -> tuple[int, str | None]:
        index = self.header.index(column)
        try:
            with self.text.open() as f:
                reader = self.text.reader(f)
                next(reader, None)
                seen = -1
                for record in reader:
                    if not record:  # a blank line: pyarrow skips it, so it is no data row
                        continue
                    seen += 1
                    if seen == row:
                        line = self.text.line(reader.line_num)
                        return line, record[index] if index < len(record) else None
        # a cell over the csv module's size limit, bytes that are not UTF-8, the file gone:
        # the error is still named, at the line counted without blank lines
        except (OSError, UnicodeDecodeError, csv.Error):
            pass
        return self.text.line(row + 2), None

    def error(self, row: int, column: str, message: str) -> InputError:
        """An InputError at data row ``row``; "{text}" in ``message`` becomes the cell's text."""
        line, text = self.cell(row, column)
        shown = repr(text) if text is not None else "the cell"
        return InputError(
            f"column {column!r}: " + message.replace("{text}", shown),
            field=column,
            value=text,
            source=str(self.path),
            line=line,
        )


def read_log(
    path: str | Path, mapping: Mapping, *, digest: bool = True, wait: bool = True
) -> SkidLog:
    """Read the log at ``path`` through ``mapping``; ``digest`` records its SHA-256. With
    ``wait`` False the SHA-256 is still being computed when the log is returned, so that it
    overlaps what the caller does next (summarize settles it at its end)."""
    path = check_user_file(path, "file", MAX_BYTES, as_source=True)
    where: _Namer
    if _is_workbook(path):
        from ledger.runs.workbook import read_sheet

        frame, dialect, where = read_sheet(path, mapping)
        failure = None
    else:
        text = _text_of(path, mapping)
        dialect = text.dialect
        header = _header(text)
        where = _Where(text, header)
        _check_columns(text, header, mapping)
        if text.units is not None:
            _check_units(text, header, mapping)
        frame, failure = _read(text, header, mapping)
    # Hash on another thread while this one converts: hashlib releases the GIL, and pyarrow,
    # which used both cores for the parse, is done.
    hashing = _Digest(path) if digest else None
    n = len(frame)
    if n == 0:
        raise InputError(
            "the file has a header but no data rows",
            field="rows",
            source=str(path),
            line=where.cell(0, mapping.time_column)[0],
            expected="one data row per sample",
        )
    ns = _times(_joined_times(frame, mapping), mapping, where)
    channels: dict[str, NDArray[np.float64]] = {}
    phases = codes = None
    unmapped: list[str] = []
    for name, cmap in mapping.channels.items():
        col = frame[cmap.column]
        if name == "phase":
            phases, codes = _labels(col, cmap.column, where)
            phases, codes, unmapped = _translate(phases, codes, mapping)
            continue
        if dialect.decimal == "," and not _is_numeric(col):
            # pyarrow kept the column as text (a bad cell): read its other cells as numbers
            col = col.astype("str").str.replace(",", ".", regex=False).where(col.notna())
        values = _numbers(col, cmap.column, where)
        with np.errstate(over="ignore", under="ignore"):
            si = np.multiply(values, cmap.scale)
            if cmap.offset:
                np.add(si, cmap.offset, out=si)
        _check_si(si, cmap, where)
        channels[name] = si
    del frame
    if failure is not None:  # read as text, every cell passed: say what pandas said
        raise _unparseable(text, header, failure)
    t = (ns - ns[0]).astype(np.float64) / 1e9
    median = _check_gaps(t, mapping, where)
    assumptions = []
    density = DEFAULT_DENSITY
    if "permeate_mass" in mapping.channels:
        given = mapping.channels["permeate_mass"].density_kg_m3
        if given is None:
            assumptions.append("permeate density 1.0 g/mL assumed (the mapping gives none)")
        else:
            density = given
    sha256 = hashing.result() if hashing and wait else None
    return SkidLog(
        source=str(path),
        sha256=sha256,
        rows=n,
        start=EPOCH + timedelta(microseconds=int(ns[0]) // 1000),
        time_s=t,
        channels=channels,
        phases=phases,
        assumptions=assumptions,
        density_kg_m3=density,
        median_step_s=median,
        phase_codes=codes,
        dialect=dialect,
        unmapped_labels=unmapped,
        files=[LogFile(path.name, sha256, n, dialect)],
        pending=hashing if hashing and not wait else None,
    )


def _read(text: _Text, header: list[str], mapping: Mapping) -> tuple[Any, Exception | None]:
    """The mapped columns, their types as pyarrow infers them (so that "true" or "12 psi" in
    a number column stays text and is refused below, not cast to a number).

    pyarrow's own CSV reader, then its conversion to a pandas frame: the same columns and
    types as ``pandas.read_csv(engine="pyarrow")``, without the cost pandas adds for
    ``usecols``. If a column cannot be converted (an integer column with an empty cell),
    every column is read as text instead, so that the checks below name the first bad cell
    and its line; the exception comes back with it.
    """
    import pyarrow as pa  # type: ignore[import-untyped]
    import pyarrow.csv as pacsv  # type: ignore[import-untyped]

    wanted = [mapping.time_column] + [c.column for c in mapping.channels.values()]
    if mapping.date_column:
        wanted.append(mapping.date_column)
    wanted = list(dict.fromkeys(wanted))
    # (phase labels need no string type: _labels takes labels of any type)
    types: dict[str, Any] = {}
    if mapping.time_format or mapping.date_column:
        types[mapping.time_column] = pa.string()  # or pyarrow would guess ISO 8601 itself
    if mapping.date_column:
        types[mapping.date_column] = pa.string()
    d = text.dialect
    parse = pacsv.ParseOptions(delimiter=d.delimiter)

    def read(column_types: dict[str, Any]) -> Any:
        convert = pacsv.ConvertOptions(
            include_columns=wanted, column_types=column_types, decimal_point=d.decimal,
            strings_can_be_null=True, null_values=NULL_VALUES,
        )  # fmt: skip
        source = text.buffer()
        table = pacsv.read_csv(source if not isinstance(source, Path) else str(source),
                               parse_options=parse, convert_options=convert)  # fmt: skip
        return table.to_pandas()

    try:
        return read(types), None
    # pyarrow reports bad cells and malformed CSV with several error types
    except Exception as exc:
        try:
            return read(dict.fromkeys(wanted, pa.string())), exc
        except Exception:
            raise _unparseable(text, header, exc) from None


def _is_numeric(col: Any) -> bool:
    import pandas as pd

    return bool(pd.api.types.is_numeric_dtype(col.dtype))


def _joined_times(frame: Any, mapping: Mapping) -> Any:
    """The time column, or date and time joined by one space when they are apart."""
    col = frame[mapping.time_column]
    if not mapping.date_column:
        return col
    date = frame[mapping.date_column]
    return date.str.strip().str.cat(col.str.strip(), sep=" ")


def _is_workbook(path: Path) -> bool:
    """An Excel workbook (.xlsx/.xlsm): by its name or its zip signature."""
    if path.suffix.lower() in (".xlsx", ".xlsm"):
        return True
    try:
        with path.open("rb") as f:
            return f.read(4) == b"PK\x03\x04"
    except OSError:
        return False


SAMPLE_BYTES = 1 << 16  # the start of a file that the dialect is worked out from


def _text_of(path: Path, mapping: Mapping) -> _Text:
    """The file's dialect (the mapping's [file] keys, the rest detected) and, unless it is
    the common one, its body transcoded to UTF-8 without preamble or units row."""
    given = mapping.file
    try:
        with path.open("rb") as f:
            head = f.read(SAMPLE_BYTES)
    except OSError as exc:
        raise InputError(
            f"cannot read the skid log: {exc.strerror}", field="file", value=str(path),
            source=str(path), expected="a readable CSV file",
        ) from None  # fmt: skip
    if not head.strip():
        raise InputError("the file is empty", field="header", source=str(path), line=1,
                         expected="a header line of column names, then data rows")  # fmt: skip
    sample = head
    if given.encoding is None and len(head) == SAMPLE_BYTES:
        sample = _whole_lines(head)
    dialect, _ = sniff(
        sample, mapping.time_column, str(path),
        encoding=given.encoding, delimiter=given.delimiter, decimal=given.decimal,
        header_line=given.header_line, units_row=given.units_row,
    )  # fmt: skip
    utf8 = dialect.encoding in ("utf-8", "utf-8-sig")
    if dialect.plain or (utf8 and dialect.header_line == 1 and not dialect.units_row):
        return _Text(path, dialect)  # pyarrow reads the file itself, with its delimiter
    data = path.read_bytes()
    if utf8 and b"\r" not in data[:SAMPLE_BYTES]:
        try:
            return _utf8_body(path, dialect, data)
        except UnicodeDecodeError:
            pass  # not UTF-8 after all: detect again below
    if dialect.encoding in ("utf-8", "utf-8-sig") and given.encoding is None:
        # the sample was UTF-8; the rest of the file may not be
        try:
            whole = data.decode(dialect.encoding)
        except UnicodeDecodeError:
            dialect = dataclasses.replace(dialect, encoding=detect_encoding(data, str(path)))
            whole = decode(data, dialect.encoding, str(path))
    else:
        whole = decode(data, dialect.encoding, str(path))
    lines = whole.splitlines(keepends=True)
    h = dialect.header_line - 1
    units = None
    rest = lines[h + 1 :]
    if dialect.units_row and rest:
        units = next(csv.reader([rest[0]], delimiter=dialect.delimiter), [])
        rest = rest[1:]
    body = "".join(lines[h : h + 1] + rest).lstrip("\ufeff").encode("utf-8")
    return _Text(path, dialect, body, units)


def _utf8_body(path: Path, dialect: Dialect, data: bytes) -> _Text:
    """A UTF-8 body cut out of the bytes (no decoding of the whole file): from the header
    line on, without the units row. UnicodeDecodeError if the file is not UTF-8 after all."""
    start = 0
    for _ in range(dialect.header_line - 1):
        start = data.index(b"\n", start) + 1
    header_end = data.index(b"\n", start) + 1 if b"\n" in data[start:] else len(data)
    rest = header_end
    units = None
    if dialect.units_row and rest < len(data):
        units_end = data.find(b"\n", rest)
        units_end = len(data) if units_end < 0 else units_end + 1
        row = data[rest:units_end].decode("utf-8").rstrip("\r\n")
        units = next(csv.reader([row], delimiter=dialect.delimiter), [])
        rest = units_end
    data[header_end:].decode("utf-8")  # the whole body must be UTF-8, or detect again
    head = data[start:header_end].decode("utf-8").lstrip("\ufeff").encode("utf-8")
    return _Text(path, dialect, head + data[rest:], units)


def _whole_lines(head: bytes) -> bytes:
    """``head`` up to its last line break (a sample never ends inside a character)."""
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):  # UTF-16: two bytes a character
        text = head[: len(head) - len(head) % 2].decode("utf-16", errors="ignore")
        cut = text.rfind("\n")
        return (text[: cut + 1] if cut > 0 else text).encode("utf-16")
    cut = head.rfind(b"\n")
    return head[: cut + 1] if cut > 0 else head


def _check_units(text: _Text, header: list[str], mapping: Mapping) -> None:
    """The units row against the mapping's units (a different unit names both)."""
    mapped = {
        c.column: (c.unit, CHANNEL_KINDS[c.channel] or "")
        for c in mapping.channels.values()
        if c.unit is not None
    }
    check_units_row(header, text.units or [], mapped, str(text.path), text.dialect.header_line + 1)


def _translate(
    names: NDArray[np.object_], codes: NDArray[np.intp], mapping: Mapping
) -> tuple[NDArray[np.object_], NDArray[np.intp], list[str]]:
    """Step labels as template phases through the mapping's [phases] ("" for an ignored
    label, which belongs to no phase); labels it does not list stay as they are and are
    returned, so the importer can warn about them."""
    if not mapping.phase_labels and not mapping.ignored_labels:
        return names, codes, []
    import pandas as pd

    uniques, first = np.unique(codes, return_index=True)
    labels = [str(names[i]) for i in first]
    translated = []
    unmapped = []
    for label in labels:
        if label in mapping.ignored_labels:
            translated.append("")
        elif label in mapping.phase_labels:
            translated.append(mapping.phase_labels[label])
        else:
            translated.append(label)
            unmapped.append(label)
    lookup = np.empty(int(uniques.max()) + 1, dtype=object)
    lookup[uniques] = translated
    out = lookup[codes]
    new_codes, _ = pd.factorize(out)
    return out, new_codes.astype(np.intp, copy=False), unmapped


def _header(text: _Text) -> list[str]:
    path = text.path
    try:
        with text.open() as f:
            header = next(text.reader(f), None)
    except OSError as exc:
        raise InputError(
            f"cannot read the skid log: {exc.strerror}",
            field="file",
            value=str(path),
            source=str(path),
            expected="a readable CSV file",
        ) from None
    except (UnicodeDecodeError, csv.Error) as exc:
        raise InputError(
            f"the header is not CSV text in {text.dialect.encoding} ({exc})",
            field="header",
            source=str(path),
            line=text.dialect.header_line,
        ) from None
    if not header or not any(h.strip() for h in header):
        raise InputError(
            "the file is empty",
            field="header",
            source=str(path),
            line=text.dialect.header_line,
            expected="a header line of column names, then data rows",
        )
    return [h.strip() for h in header] if text.body is not None else header


def _check_columns(text: _Text, header: list[str], mapping: Mapping) -> None:
    path = text.path
    _check_duplicates(path, header, text.dialect.header_line)
    wanted = [("time.column", mapping.time_column)] + [
        (f"channels.{n}.column", c.column) for n, c in mapping.channels.items()
    ]
    if mapping.date_column:
        wanted.append(("time.date_column", mapping.date_column))
    for key, column in wanted:
        if column not in header:
            raise InputError(
                f"column {column!r} (from {key} of {mapping.source}) is not in the header; "
                f"the file's columns are: {', '.join(repr(h) for h in header)}",
                field=column,
                value=column,
                source=str(path),
                line=text.dialect.header_line,
            )


def _check_duplicates(path: Path, header: list[str], line: int = 1) -> None:
    """Refuse a header naming one column twice (pyarrow would silently read the first)."""
    first: dict[str, int] = {}
    for position, name in enumerate(header, start=1):
        if not name.strip():
            continue  # unnamed columns are never mapped; several may be blank
        if name in first:
            raise InputError(
                f"the header names column {name!r} twice, as columns {first[name]} and "
                f"{position}; expected each column name once",
                field="header",
                value=name,
                source=str(path),
                line=line,
            )
        first[name] = position


def _unparseable(text: _Text, header: list[str], exc: Exception) -> InputError:
    """Find the first line whose field count differs from the header's (csv module)."""
    path = text.path
    try:
        with text.open() as f:
            reader = text.reader(f)
            next(reader, None)
            for record in reader:
                if record and len(record) != len(header):
                    return InputError(
                        f"the line has {len(record)} fields; the header has {len(header)}",
                        field="line",
                        source=str(path),
                        line=text.line(reader.line_num),
                    )
    except (UnicodeDecodeError, csv.Error) as err:
        return InputError(
            f"not CSV text in {text.dialect.encoding} ({err})", field="file", source=str(path)
        )
    first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
    return InputError(f"cannot parse the CSV: {first}", field="file", source=str(path))


def _numbers(col: Any, column: str, where: _Namer) -> NDArray[np.float64]:
    import pandas as pd

    types = pd.api.types
    if types.is_bool_dtype(col.dtype) or not types.is_numeric_dtype(col.dtype):
        coerced = (
            pd.to_numeric(col, errors="coerce") if not types.is_bool_dtype(col.dtype) else None
        )
        if coerced is None:
            raise where.error(0, column, "{text} is not a number; expected a number")
        bad = (coerced.isna() & col.notna()).to_numpy()
        if bad.any():
            raise where.error(int(np.argmax(bad)), column, "{text} is not a number")
        col = coerced
    values = col.to_numpy(dtype=np.float64, na_value=np.nan)
    finite = np.isfinite(values)
    if not finite.all():
        i = int(np.argmin(finite))
        if not np.isnan(values[i]):
            what = "{text} is not finite"
        elif (where.cell(i, column)[1] or "").strip():
            what = "{text} is a missing-value mark"  # NA, n/a, NaN, null... (pyarrow's list)
        else:
            what = "an empty cell"
        raise where.error(i, column, f"{what}; expected a number")
    return values


def _check_si(si: NDArray[np.float64], cmap: ChannelMap, where: _Namer) -> None:
    """Refuse a value whose SI conversion is not finite or outside units.SI_MIN..SI_MAX."""
    magnitude = np.abs(si)
    small = magnitude < units.SI_MIN
    # The common case in two passes: nothing too large (NaN fails <=) and nothing too small.
    if magnitude.max() <= units.SI_MAX and not (small.any() and (si[small] != 0).any()):
        return
    outside = small | (magnitude > units.SI_MAX)
    bad = ~np.isfinite(si) | ((si != 0) & outside)
    if bad.any():
        i = int(np.argmax(bad))
        unit = units.KINDS[CHANNEL_KINDS[cmap.channel] or ""].si
        raise where.error(
            i,
            cmap.column,
            f"{{text}} {cmap.unit} is {si[i]:.3g} {unit} in SI; expected 0 or a magnitude "
            f"from {units.SI_MIN:g} to {units.SI_MAX:g} {unit}",
        )


def _labels(col: Any, column: str, where: _Namer) -> tuple[NDArray[np.object_], NDArray[np.intp]]:
    import pandas as pd

    codes, uniques = pd.factorize(col)
    if (codes < 0).any():
        raise where.error(int(np.argmax(codes < 0)), column, "an empty phase label")
    names = np.array([str(u) for u in uniques], dtype=object)
    return names[codes], codes.astype(np.intp, copy=False)


def _check_gaps(t: NDArray[np.float64], mapping: Mapping, where: _Namer) -> float:
    if t.size < 2:
        return 0.0
    steps = np.diff(t)
    median = float(np.median(steps))
    allowed = mapping.max_gap_s if mapping.max_gap_s is not None else GAP_FACTOR * median
    gap = steps > allowed
    if gap.any():
        i = int(np.argmax(gap))
        how = "time.max_gap" if mapping.max_gap_s is not None else f"{GAP_FACTOR:g} x the median"
        raise where.error(
            i + 1,
            mapping.time_column,
            f"{{text}} is {steps[i]:g} s after the sample before, a gap over "
            f"{allowed:g} s ({how}; time.max_gap in the mapping allows more)",
        )
    return median


def _times(col: Any, mapping: Mapping, where: _Namer) -> NDArray[np.int64]:
    """Timestamps as int64 nanoseconds since the epoch (UTC), strictly increasing."""
    import pandas as pd

    column = mapping.time_column
    if pd.api.types.is_datetime64_any_dtype(col.dtype):
        parsed = col  # pyarrow recognized ISO 8601 itself, or a workbook held date cells
        wanted = "a time"
    elif mapping.time_format:
        _check_length(col, column, where)
        parsed = _strptime(col, mapping.time_format, mapping.source)
        wanted = f"a time in the format {mapping.time_format!r}"
    else:
        _check_length(col, column, where)
        parsed = _iso(col, column, where)
        wanted = "an ISO 8601 time"
    bad = parsed.isna().to_numpy()
    if bad.any():
        i = int(np.argmax(bad))
        what = "an empty cell" if pd.isna(col.iloc[i]) else "{text} is not a time"
        raise where.error(i, column, f"{what}; expected {wanted}")
    index = pd.DatetimeIndex(parsed)
    if index.tz is None:
        index = _localize(index, mapping, where)
    utc = index.tz_convert("UTC").tz_localize(None)
    _check_range(utc, column, where)
    ns = utc.as_unit("ns").asi8
    steps = np.diff(ns)
    back = steps <= 0
    if back.any():
        i = int(np.argmax(back))
        line, _ = where.cell(i, column)
        what = "repeats the time of" if steps[i] == 0 else "is earlier than"
        raise where.error(
            i + 1,
            column,
            f"the time {{text}} {what} line {line}; expected times that increase from line to line",
        )
    return ns


def _check_range(utc: Any, column: str, where: _Namer) -> None:
    """Refuse a time outside int64 nanoseconds (1677-09-21 to 2262-04-11, UTC); pandas may
    hold such times in seconds or microseconds but could not convert them."""
    per_ns = _PER_UNIT_NS[utc.unit]
    limit = _NS_MAX // per_ns
    values = utc.asi8
    bad = (values < -limit) | (values > limit)
    if bad.any():
        raise where.error(
            int(np.argmax(bad)),
            column,
            "the time {text} is outside the years a log can hold; expected a time from "
            "1677-09-21 00:12:44 to 2262-04-11 23:47:16 UTC",
        )


def _check_length(col: Any, column: str, where: _Namer) -> None:
    """Refuse a timestamp over MAX_TIME_TEXT characters before any pattern is applied."""
    lengths = col.astype("str").str.len().to_numpy()
    long = lengths > MAX_TIME_TEXT
    if long.any():
        raise where.error(
            int(np.argmax(long)),
            column,
            f"a time of {int(lengths[np.argmax(long)])} characters; expected at most "
            f"{MAX_TIME_TEXT}",
        )


def _strptime(col: Any, fmt: str, source: str) -> Any:
    """Parse with pyarrow's strptime (fast); if it cannot read every row (e.g. %f, which it
    lacks), pandas parses the column with the full strptime."""
    import pandas as pd
    import pyarrow as pa
    import pyarrow.compute as pc  # type: ignore[import-untyped]

    utc = "%z" in fmt
    try:
        parsed = pc.strptime(pa.array(col), format=fmt, unit="ns", error_is_null=True)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        parsed = None
    if parsed is None or parsed.null_count > col.isna().sum():
        try:
            return pd.to_datetime(col, format=fmt, errors="coerce", utc=utc)
        # pandas compiles the format itself and refuses some that strptime takes, with a
        # ValueError or a re.error
        except Exception as exc:
            raise InputError(
                f"time.format: pandas cannot parse times with {fmt!r} ({exc})",
                field="time.format",
                value=fmt,
                expected='a strptime format such as "%d/%m/%Y %H:%M:%S"',
                source=source,
            ) from None
    return pd.Series(parsed.to_pandas(), index=col.index)


def _iso(col: Any, column: str, where: _Namer) -> Any:
    """ISO 8601 text that pyarrow did not recognize (e.g. mixed offsets): pandas parses it."""
    import pandas as pd

    text = col.astype("str")
    aware = text.str.contains(r"[T ]\d.*(?:[zZ]|[+-]\d\d(?::?\d\d)?)$", regex=True, na=False)
    aware_np = aware.to_numpy()
    known = col.notna().to_numpy()
    if known.any():
        first = aware_np[known][0]
        differs = known & (aware_np != first)
        if differs.any():
            raise where.error(
                int(np.argmax(differs)),
                column,
                "some times have a UTC offset and some do not; expected all "
                "times written the same way",
            )
    return pd.to_datetime(col, format="ISO8601", errors="coerce", utc=bool(aware_np.any()))


def _localize(index: Any, mapping: Mapping, where: _Namer) -> Any:
    """Place local times in the mapping's zone; the fall-back hour by the order of samples."""
    tz = mapping.timezone
    try:
        return index.tz_localize(tz, ambiguous="infer", nonexistent="raise")
    except ValueError:  # pandas: a nonexistent time, or an ambiguous one it cannot place
        probe = index.tz_localize(tz, ambiguous="NaT", nonexistent="NaT")
        bad = probe.isna()
        i = int(np.argmax(bad))
        skipped = index[i : i + 1].tz_localize(tz, ambiguous=True, nonexistent="NaT").isna()[0]
        why = (
            f"does not exist in {tz} (the clocks went forward)"
            if skipped
            else f"falls in the repeated hour when the clocks went back in {tz}, and the order "
            "of the samples does not tell which one"
        )
        raise where.error(
            i,
            mapping.time_column,
            f"the local time {{text}} {why}; write "
            "times with their UTC offset, or check time.timezone",
        ) from None


def read_logs(
    paths: Sequence[str | Path], mapping: Mapping, *, digest: bool = True, wait: bool = True
) -> SkidLog:
    """Several files of one run, read in the order given and joined into one log. A file that
    starts before the one before it ends is refused naming both; the step between files is
    checked like any other (the mapping's max_gap, else 5 x the median interval)."""
    if not paths:
        raise InputError("no skid log file given", field="file", expected="one or more files")
    if len(paths) == 1:
        return read_log(paths[0], mapping, digest=digest, wait=wait)
    logs = [read_log(p, mapping, digest=digest) for p in paths]
    first = logs[0]
    times = [first.time_s]
    for before, log in itertools.pairwise(logs):
        ends = before.start + timedelta(seconds=float(before.time_s[-1]))
        if log.start <= ends:
            raise InputError(
                f"{Path(log.source).name} starts at {log.start.isoformat()}, before "
                f"{Path(before.source).name} ends at {ends.isoformat()}; expected files of one "
                "run in time order that do not overlap",
                field="file", value=log.source, source=log.source,
                expected="the files in time order",
            )  # fmt: skip
        times.append(log.time_s + (log.start - first.start).total_seconds())
    t = np.concatenate(times)
    steps = np.diff(t)
    median = float(np.median(steps))
    allowed = mapping.max_gap_s if mapping.max_gap_s is not None else GAP_FACTOR * median
    joins = np.cumsum([len(x) for x in times[:-1]]) - 1
    for k, j in enumerate(joins):
        if steps[j] > allowed:
            how = (
                "time.max_gap" if mapping.max_gap_s is not None else f"{GAP_FACTOR:g} x the median"
            )
            raise InputError(
                f"{Path(logs[k + 1].source).name} starts {steps[j]:g} s after "
                f"{Path(logs[k].source).name} ends, a gap over {allowed:g} s ({how}; "
                "time.max_gap in the mapping allows more)",
                field="file", value=logs[k + 1].source, source=logs[k + 1].source,
            )  # fmt: skip
    channels = {
        name: np.concatenate([log.channels[name] for log in logs]) for name in first.channels
    }
    phases = None
    if first.phases is not None:
        phases = np.concatenate([log.phases for log in logs if log.phases is not None])
    files = [f for log in logs for f in log.files]
    joined = joined_sha256([f.sha256 for f in files])
    unmapped = sorted({label for log in logs for label in log.unmapped_labels})
    return SkidLog(
        source=" + ".join(log.source for log in logs),
        sha256=joined if digest else None,
        rows=int(t.size),
        start=first.start,
        time_s=t,
        channels=channels,
        phases=phases,
        assumptions=first.assumptions,
        density_kg_m3=first.density_kg_m3,
        median_step_s=median,
        dialect=first.dialect,
        unmapped_labels=unmapped,
        files=files,
    )


def phase_warnings(log: SkidLog, template_phases: Sequence[str]) -> list[str]:
    """What an importer should say at once: a template phase with no samples in the log, and
    a step label of the log that belongs to no phase (neither mapped nor ignored)."""
    present: set[str] = set()
    if log.phases is not None and log.phase_codes is not None and log.rows:
        # one sample per distinct code: never a pass of Python over every row
        _, first = np.unique(log.phase_codes, return_index=True)
        present = {str(log.phases[i]) for i in first}
    present.discard("")
    out = [
        f"template phase {p!r} has no samples in the log (map the skid's step label to it "
        "in the mapping's [phases])"
        for p in template_phases
        if p not in present
    ]
    stray = sorted(present - set(template_phases)) if template_phases else log.unmapped_labels
    out += [
        f"step label {label!r} belongs to no template phase (list it under a phase or under "
        "ignore in the mapping's [phases])"
        for label in stray
    ]
    return out
