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
import hashlib
import threading
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ledger import units
from ledger.errors import InputError
from ledger.runs.mapping import CHANNEL_KINDS, DEFAULT_DENSITY, ChannelMap, Mapping
from ledger.userfiles import check_user_file

GAP_FACTOR = 5.0  # a step over 5 median sample intervals is a gap, unless the mapping says
CHUNK = 1 << 20  # bytes per read when hashing
EPOCH = datetime(1970, 1, 1, tzinfo=UTC)
MAX_BYTES = 1 << 30  # 1 GiB: a 24 h log at 1 Hz is about 10 MB
MAX_TIME_TEXT = 64  # characters in one timestamp
_NS_MAX = 2**63 - 1  # int64 nanoseconds; -2**63 is pandas' NaT
_PER_UNIT_NS = {"s": 10**9, "ms": 10**6, "us": 10**3, "ns": 1}


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

    def __post_init__(self) -> None:
        if self.median_step_s is None:
            self.median_step_s = float(np.median(np.diff(self.time_s))) if self.rows > 1 else 0.0
        if self.phases is not None and self.phase_codes is None:
            _, codes = np.unique(self.phases.astype(str), return_inverse=True)
            self.phase_codes = codes.reshape(-1)


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


class _Where:
    """Names file lines: the physical line of data row i and the text of one of its cells.

    Only used once something is wrong, so it may read the file again with the csv module.
    """

    def __init__(self, path: Path, header: list[str]) -> None:
        self.path = path
        self.header = header

    def cell(self, row: int, column: str) -> tuple[int, str | None]:
        index = self.header.index(column)
        try:
            with self.path.open(newline="", encoding="utf-8-sig") as f:
                reader = csv.reader(f)
                next(reader, None)
                seen = -1
                for record in reader:
                    if not record:  # a blank line: pyarrow skips it, so it is no data row
                        continue
                    seen += 1
                    if seen == row:
                        return reader.line_num, record[index] if index < len(record) else None
        # a cell over the csv module's size limit, bytes that are not UTF-8, the file gone:
        # the error is still named, at the line counted without blank lines
        except (OSError, UnicodeDecodeError, csv.Error):
            pass
        return row + 2, None

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


def read_log(path: str | Path, mapping: Mapping, *, digest: bool = True) -> SkidLog:
    """Read the log at ``path`` through ``mapping``; ``digest`` records its SHA-256."""
    path = check_user_file(path, "file", MAX_BYTES, as_source=True)
    header = _header(path)
    where = _Where(path, header)
    _check_columns(path, header, mapping)
    frame, failure = _read(path, header, mapping)
    # Hash on another thread while this one converts: hashlib releases the GIL, and pyarrow,
    # which used both cores for the parse, is done.
    hashing = _Digest(path) if digest else None
    n = len(frame)
    if n == 0:
        raise InputError(
            "the file has a header but no data rows",
            field="rows",
            source=str(path),
            line=2,
            expected="one data row per sample",
        )
    ns = _times(frame[mapping.time_column], mapping, where)
    channels: dict[str, NDArray[np.float64]] = {}
    phases = codes = None
    for name, cmap in mapping.channels.items():
        col = frame[cmap.column]
        if name == "phase":
            phases, codes = _labels(col, cmap.column, where)
            continue
        values = _numbers(col, cmap.column, where)
        with np.errstate(over="ignore", under="ignore"):
            si = np.multiply(values, cmap.scale)
            if cmap.offset:
                np.add(si, cmap.offset, out=si)
        _check_si(si, cmap, where)
        channels[name] = si
    del frame
    if failure is not None:  # read as text, every cell passed: say what pandas said
        raise _unparseable(path, header, failure)
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
    return SkidLog(
        source=str(path),
        sha256=hashing.result() if hashing else None,
        rows=n,
        start=EPOCH + timedelta(microseconds=int(ns[0]) // 1000),
        time_s=t,
        channels=channels,
        phases=phases,
        assumptions=assumptions,
        density_kg_m3=density,
        median_step_s=median,
        phase_codes=codes,
    )


def _read(path: Path, header: list[str], mapping: Mapping) -> tuple[Any, Exception | None]:
    """The mapped columns, their types as pyarrow infers them (so that "true" or "12 psi" in
    a number column stays text and is refused below, not cast to a number).

    If pandas cannot convert a column (an integer column with an empty cell), read every
    column as text instead, so that the checks below name the first bad cell and its line;
    the exception comes back with it.
    """
    import pandas as pd

    wanted = [mapping.time_column] + [c.column for c in mapping.channels.values()]
    # (phase labels need no "str" dtype: pandas would cast the column again, and _labels
    # takes labels of any type)
    dtypes = {}
    if mapping.time_format:
        dtypes[mapping.time_column] = "str"  # or pyarrow would guess ISO 8601 itself
    try:
        return pd.read_csv(path, engine="pyarrow", usecols=wanted, dtype=dtypes), None
    # pandas and pyarrow report bad cells and malformed CSV with several error types
    except Exception as exc:
        try:
            text = pd.read_csv(path, engine="pyarrow", usecols=wanted, dtype="str")
        except Exception:
            raise _unparseable(path, header, exc) from None
        return text, exc


def _header(path: Path) -> list[str]:
    try:
        with path.open(newline="", encoding="utf-8-sig") as f:
            header = next(csv.reader(f), None)
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
            f"the header is not CSV text in UTF-8 ({exc})", field="header", source=str(path), line=1
        ) from None
    if not header or not any(h.strip() for h in header):
        raise InputError(
            "the file is empty",
            field="header",
            source=str(path),
            line=1,
            expected="a header line of column names, then data rows",
        )
    return header


def _check_columns(path: Path, header: list[str], mapping: Mapping) -> None:
    _check_duplicates(path, header)
    wanted = [("time.column", mapping.time_column)] + [
        (f"channels.{n}.column", c.column) for n, c in mapping.channels.items()
    ]
    for key, column in wanted:
        if column not in header:
            raise InputError(
                f"column {column!r} (from {key} of {mapping.source}) is not in the header; "
                f"the file's columns are: {', '.join(repr(h) for h in header)}",
                field=column,
                value=column,
                source=str(path),
                line=1,
            )


def _check_duplicates(path: Path, header: list[str]) -> None:
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
                line=1,
            )
        first[name] = position


def _unparseable(path: Path, header: list[str], exc: Exception) -> InputError:
    """Find the first line whose field count differs from the header's (csv module)."""
    try:
        with path.open(newline="", encoding="utf-8-sig") as f:
            reader = csv.reader(f)
            next(reader, None)
            for record in reader:
                if record and len(record) != len(header):
                    return InputError(
                        f"the line has {len(record)} fields; the header has {len(header)}",
                        field="line",
                        source=str(path),
                        line=reader.line_num,
                    )
    except (UnicodeDecodeError, csv.Error) as err:
        return InputError(f"not CSV text in UTF-8 ({err})", field="file", source=str(path))
    first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
    return InputError(f"cannot parse the CSV: {first}", field="file", source=str(path))


def _numbers(col: Any, column: str, where: _Where) -> NDArray[np.float64]:
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


def _check_si(si: NDArray[np.float64], cmap: ChannelMap, where: _Where) -> None:
    """Refuse a value whose SI conversion is not finite or outside units.SI_MIN..SI_MAX."""
    magnitude = np.abs(si)
    outside = (magnitude < units.SI_MIN) | (magnitude > units.SI_MAX)
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


def _labels(col: Any, column: str, where: _Where) -> tuple[NDArray[np.object_], NDArray[np.intp]]:
    import pandas as pd

    codes, uniques = pd.factorize(col)
    if (codes < 0).any():
        raise where.error(int(np.argmax(codes < 0)), column, "an empty phase label")
    names = np.array([str(u) for u in uniques], dtype=object)
    return names[codes], codes.astype(np.intp, copy=False)


def _check_gaps(t: NDArray[np.float64], mapping: Mapping, where: _Where) -> float:
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


def _times(col: Any, mapping: Mapping, where: _Where) -> NDArray[np.int64]:
    """Timestamps as int64 nanoseconds since the epoch (UTC), strictly increasing."""
    import pandas as pd

    column = mapping.time_column
    if mapping.time_format:
        _check_length(col, column, where)
        parsed = _strptime(col, mapping.time_format, mapping.source)
        wanted = f"a time in the format {mapping.time_format!r}"
    elif pd.api.types.is_datetime64_any_dtype(col.dtype):
        parsed = col  # pyarrow recognized ISO 8601 itself
        wanted = "an ISO 8601 time"
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


def _check_range(utc: Any, column: str, where: _Where) -> None:
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


def _check_length(col: Any, column: str, where: _Where) -> None:
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
    import pyarrow as pa  # type: ignore[import-untyped]
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


def _iso(col: Any, column: str, where: _Where) -> Any:
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


def _localize(index: Any, mapping: Mapping, where: _Where) -> Any:
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
