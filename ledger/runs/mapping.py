"""A skid's column mapping (TOML): which column of its CSV export is which of our channels, in
which unit, and how its timestamps are written. Every mistake is an InputError naming the
mapping file and the key (and the line, when the TOML itself is malformed).

Each numeric channel gets one linear conversion to SI, ``si = scale·x + offset``, worked out
once from two points with pint (the offset is non-zero only for temperatures in °C or °F), so
reading a log never calls pint per row.
"""

from __future__ import annotations

import dataclasses
import hashlib
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

from ledger import units
from ledger.errors import InputError
from ledger.tomlfile import parse_toml, read_toml_text

# Our channels and the kind of their values (ledger.units.KINDS); "phase" is a text column.
CHANNEL_KINDS: dict[str, str | None] = {
    "feed_pressure": "pressure",
    "retentate_pressure": "pressure",
    "permeate_pressure": "pressure",
    "feed_flow": "flow",
    "permeate_flow": "flow",
    "permeate_mass": "mass",
    "retentate_volume": "volume",
    "temperature": "temperature",
    "phase": None,
}
TIME_KEYS = ("column", "date_column", "format", "timezone", "max_gap")
FILE_KEYS = ("delimiter", "decimal", "encoding", "header_line", "units_row", "sheet")
DELIMITERS = {",": ",", ";": ";", "\t": "\t", "tab": "\t"}
DECIMALS = (".", ",")
ENCODINGS = {"utf-8": "utf-8", "utf8": "utf-8", "utf-8-sig": "utf-8-sig", "utf-16": "utf-16",
             "cp1252": "cp1252", "windows-1252": "cp1252", "latin-1": "latin-1",
             "iso-8859-1": "latin-1"}  # fmt: skip
IGNORE = "ignore"  # the [phases] key whose labels belong to no phase
MAX_LABELS = 1000  # step labels in [phases]
CHANNEL_KEYS = ("column", "unit", "density")
MAX_FORMAT = 100  # characters in a time format
DEFAULT_DENSITY = 1000.0  # kg/m³ (1.0 g/mL): assumed for a balance when the mapping gives none


@dataclass(frozen=True)
class ChannelMap:
    """One mapped column. ``scale`` and ``offset`` turn its numbers into SI: scale·x + offset."""

    channel: str
    column: str
    unit: str | None
    density_kg_m3: float | None = None
    scale: float = 1.0
    offset: float = 0.0


@dataclass(frozen=True)
class FileOptions:
    """What the mapping's optional ``[file]`` table states; None where it is silent (the
    reader then detects it)."""

    delimiter: str | None = None
    decimal: str | None = None
    encoding: str | None = None
    header_line: int | None = None  # 1-based
    units_row: bool | None = None
    sheet: str | None = None


@dataclass(frozen=True)
class Mapping:
    """A parsed mapping; ``text`` and ``sha256`` keep exactly what was read. ``phase_labels``
    maps a skid's step label to the template phase it belongs to (empty: labels are phase
    names as they are); ``ignored_labels`` belong to no phase."""

    source: str
    text: str
    sha256: str
    time_column: str
    time_format: str | None
    timezone: str
    max_gap_s: float | None
    channels: dict[str, ChannelMap]
    date_column: str | None = None
    file: FileOptions = FileOptions()
    phase_labels: dict[str, str] = dataclasses.field(default_factory=dict)
    ignored_labels: frozenset[str] = frozenset()


def load_mapping(path: str | Path) -> Mapping:
    """Read and validate the mapping file at ``path``."""
    return parse_mapping(read_text(path, "mapping", "a readable TOML mapping file"), str(path))


def read_text(path: str | Path, field: str, expected: str) -> str:
    """A small UTF-8 text file (a mapping, a limits file), at most tomlfile.MAX_BYTES; a bad
    path, an unreadable or oversized file or bytes that are not UTF-8 are an InputError."""
    return read_toml_text(path, field, expected)


def _fail(
    source: str, key: str, message: str, value: object = None, expected: str = ""
) -> InputError:
    return InputError(
        f"{key}: {message}", field=key, value=value, expected=expected or None, source=source
    )


def _text(source: str, key: str, value: object, example: str) -> str:
    if not isinstance(value, str) or not value.strip():
        raise _fail(source, key, f"expected text, got {value!r}", value, example)
    return value


def parse_mapping(text: str, source: str) -> Mapping:
    """Validate a mapping's TOML text; ``source`` (the file name) is named in every error."""
    data = parse_toml(text, source, "mapping", "a TOML mapping with [time] and [channels] tables")
    for key in data:
        if key not in ("time", "channels", "file", "phases"):
            raise _fail(
                source, key, "unknown table", key,
                "the tables [time], [channels] and the optional [file] and [phases]",
            )  # fmt: skip
    time = data.get("time")
    if not isinstance(time, dict) or "column" not in time:
        raise _fail(source, "time.column", "is missing", None, 'the time column, e.g. "Timestamp"')
    for key in time:
        if key not in TIME_KEYS:
            raise _fail(source, f"time.{key}", "unknown key", key, ", ".join(TIME_KEYS))
    time_column = _text(source, "time.column", time["column"], 'e.g. column = "Timestamp"')
    date_column = None
    if "date_column" in time:
        date_column = _text(
            source, "time.date_column", time["date_column"], 'the date column, e.g. "Date"'
        )
        if date_column == time_column:
            raise _fail(source, "time.date_column", "is the time column itself", date_column,
                        "another column, holding the date")  # fmt: skip
    tz = _timezone(source, time.get("timezone", "UTC"))
    fmt = time.get("format")
    if fmt is not None:
        fmt = _time_format(source, fmt)
    max_gap = None
    if "max_gap" in time:
        max_gap = _quantity(source, "time.max_gap", time["max_gap"], "time", positive=True)
    labels, ignored = _phases(source, data["phases"]) if "phases" in data else ({}, frozenset())
    raw = data.get("channels", {})
    if not isinstance(raw, dict):
        raise _fail(source, "channels", "expected a table", raw, "[channels]")
    channels: dict[str, ChannelMap] = {}
    used = {time_column: "time.column"}
    if date_column is not None:
        used[date_column] = "time.date_column"
    for name, spec in raw.items():
        cmap = _channel(source, name, spec)
        key = f"channels.{name}.column"
        if cmap.column in used:
            raise _fail(
                source,
                key,
                f"column {cmap.column!r} is already mapped by {used[cmap.column]}",
                cmap.column,
                "one column per channel",
            )
        used[cmap.column] = key
        channels[name] = cmap
    return Mapping(
        source=source,
        text=text,
        sha256=hashlib.sha256(text.encode("utf-8")).hexdigest(),
        time_column=time_column,
        time_format=fmt,
        timezone=tz,
        max_gap_s=max_gap,
        channels=channels,
        date_column=date_column,
        file=_file(source, data.get("file", {})),
        phase_labels=labels,
        ignored_labels=ignored,
    )


def _file(source: str, raw: object) -> FileOptions:
    """The ``[file]`` table: each key checked against what the reader can do."""
    if not isinstance(raw, dict):
        raise _fail(source, "file", "expected a table", raw, "[file]")
    for key in raw:
        if key not in FILE_KEYS:
            raise _fail(source, f"file.{key}", "unknown key", key, ", ".join(FILE_KEYS))
    got: dict[str, object] = {}
    if "delimiter" in raw:
        d = raw["delimiter"]
        if not isinstance(d, str) or d not in DELIMITERS:
            raise _fail(source, "file.delimiter", f"{d!r} is not a delimiter the reader takes",
                        d, '",", ";" or "\\t"')  # fmt: skip
        got["delimiter"] = DELIMITERS[d]
    if "decimal" in raw:
        m = raw["decimal"]
        if m not in DECIMALS:
            raise _fail(source, "file.decimal", f"{m!r} is not a decimal mark", m, '"." or ","')
        got["decimal"] = m
    if "encoding" in raw:
        e = raw["encoding"]
        if not isinstance(e, str) or e.strip().lower() not in ENCODINGS:
            raise _fail(source, "file.encoding", f"{e!r} is not an encoding the reader takes",
                        e, "utf-8, utf-8-sig, utf-16, cp1252 or latin-1")  # fmt: skip
        got["encoding"] = ENCODINGS[e.strip().lower()]
    if "header_line" in raw:
        h = raw["header_line"]
        if not isinstance(h, int) or isinstance(h, bool) or not 1 <= h <= 10_000:
            raise _fail(source, "file.header_line", f"{h!r} is not a line number", h,
                        "the 1-based line of the header, 1 to 10000")  # fmt: skip
        got["header_line"] = h
    if "units_row" in raw:
        u = raw["units_row"]
        if not isinstance(u, bool):
            raise _fail(source, "file.units_row", f"{u!r} is not true or false", u,
                        "true when a row of units sits under the header")  # fmt: skip
        got["units_row"] = u
    if "sheet" in raw:
        got["sheet"] = _text(source, "file.sheet", raw["sheet"], 'a sheet name, e.g. "Data"')
    if got.get("delimiter") == "," and got.get("decimal") == ",":
        raise _fail(source, "file.decimal", "a decimal comma needs another delimiter", ",",
                    'delimiter = ";" or "\\t" with decimal = ","')  # fmt: skip
    return FileOptions(**got)  # type: ignore[arg-type]


def _phases(source: str, raw: object) -> tuple[dict[str, str], frozenset[str]]:
    """The ``[phases]`` table: template phase -> the skid's step labels; ``ignore`` lists
    labels that belong to no phase. A label under two keys is an error naming both."""
    if not isinstance(raw, dict):
        raise _fail(source, "phases", "expected a table", raw, '[phases] with uf1 = ["CONC1"]')
    labels: dict[str, str] = {}
    ignored: set[str] = set()
    seen: dict[str, str] = {}
    for phase, given in raw.items():
        key = f"phases.{phase}"
        if isinstance(given, str):
            given = [given]
        if not isinstance(given, list) or not given or len(given) > MAX_LABELS:
            raise _fail(source, key, f"expected a list of step labels, got {given!r}", given,
                        '["CONC1", "CONC 1"]')  # fmt: skip
        for label in given:
            if not isinstance(label, str) or not label.strip():
                raise _fail(source, key, f"{label!r} is not a step label", label,
                            "the label as the skid writes it")  # fmt: skip
            if label in seen:
                raise _fail(source, key, f"the label {label!r} is also under {seen[label]}",
                            label, "each label under one phase (or ignore)")  # fmt: skip
            seen[label] = key
            if phase == IGNORE:
                ignored.add(label)
            else:
                labels[label] = phase
    return labels, frozenset(ignored)


def _channel(source: str, name: str, spec: object) -> ChannelMap:
    key = f"channels.{name}"
    if name not in CHANNEL_KINDS:
        raise _fail(
            source, key, f"unknown channel {name!r}", name, "one of " + ", ".join(CHANNEL_KINDS)
        )
    example = '{ column = "PT-01", unit = "psi" }' if name != "phase" else '{ column = "Step" }'
    if not isinstance(spec, dict):
        raise _fail(source, key, f"expected an inline table, got {spec!r}", spec, example)
    for k in spec:
        if k not in CHANNEL_KEYS:
            raise _fail(source, f"{key}.{k}", "unknown key", k, ", ".join(CHANNEL_KEYS))
    if "column" not in spec:
        raise _fail(source, f"{key}.column", "is missing", None, example)
    column = _text(source, f"{key}.column", spec["column"], example)
    kind = CHANNEL_KINDS[name]
    unit = spec.get("unit")
    if kind is None:
        if unit is not None:
            raise _fail(source, f"{key}.unit", "a text column has no unit", unit)
        if "density" in spec:
            raise _fail(source, f"{key}.density", "only permeate_mass takes a density")
        return ChannelMap(name, column, None)
    if unit is None:
        raise _fail(
            source,
            f"{key}.unit",
            "is missing",
            None,
            f"the column's unit, e.g. {units.KINDS[kind].example}",
        )
    unit = _text(source, f"{key}.unit", unit, f"e.g. {units.KINDS[kind].example}")
    offset = _convert(source, f"{key}.unit", 0.0, unit, kind)
    scale = _convert(source, f"{key}.unit", 1.0, unit, kind) - offset
    density = None
    if "density" in spec:
        if name != "permeate_mass":
            raise _fail(source, f"{key}.density", "only permeate_mass takes a density")
        density = _quantity(source, f"{key}.density", spec["density"], "density", positive=True)
    return ChannelMap(name, column, unit, density, scale, offset)


def _convert(source: str, key: str, value: float, unit: str, kind: str) -> float:
    try:
        return units.to_si(value, unit, kind, field=key, raw=unit)
    except InputError as exc:
        # units.to_si already turns pint's own errors into InputError
        raise _fail(
            source, key, exc.message.removeprefix(f"{key}: "), unit, exc.expected or ""
        ) from None


def _quantity(source: str, key: str, value: object, kind: str, *, positive: bool) -> float:
    example = units.KINDS[kind].example.split(",")[0]
    if not isinstance(value, str):
        raise _fail(
            source,
            key,
            f"{value!r} has no unit",
            value,
            f'a quoted {kind} with its unit, e.g. "{example}"',
        )
    try:
        return units.parse(value, kind, field=key, positive=positive)
    except InputError as exc:
        raise _fail(
            source, key, exc.message.removeprefix(f"{key}: "), value, exc.expected or ""
        ) from None


def _timezone(source: str, tz: object) -> str:
    from zoneinfo import ZoneInfo

    expected = "an IANA time zone name such as Europe/Dublin or UTC"
    if not isinstance(tz, str) or not tz.strip():
        raise _fail(source, "time.timezone", f"expected text, got {tz!r}", tz, expected)
    try:
        ZoneInfo(tz)
    # zoneinfo raises ZoneInfoNotFoundError, ValueError or others for a malformed key
    except Exception:
        raise _fail(source, "time.timezone", f"unknown time zone {tz!r}", tz, expected) from None
    return tz


def _time_format(source: str, fmt: object) -> str:
    expected = 'a strptime format such as "%d/%m/%Y %H:%M:%S"'
    if not isinstance(fmt, str) or "%" not in fmt:
        raise _fail(source, "time.format", f"{fmt!r} is not a strptime format", fmt, expected)
    if len(fmt) > MAX_FORMAT or "\x00" in fmt:
        raise _fail(
            source,
            "time.format",
            f"a format of at most {MAX_FORMAT} characters and no NUL is accepted",
            fmt[:MAX_FORMAT] + "...",
            expected,
        )
    # A format must read back what it writes, or it has a directive strptime lacks.
    sample = datetime(2026, 11, 30, 13, 5, 9, tzinfo=UTC)
    try:
        back = datetime.strptime(sample.strftime(fmt), fmt)
    # strptime compiles the format to a regular expression: a repeated directive ("%d %d") is
    # a re.error, a bad one a ValueError; strftime may raise others for odd text
    except Exception as exc:
        raise _fail(
            source, "time.format", f"{fmt!r} is not a usable strptime format ({exc})", fmt, expected
        ) from None
    if back.replace(tzinfo=None) == datetime(1900, 1, 1):
        raise _fail(
            source, "time.format", f"{fmt!r} reads no date or time from a timestamp", fmt, expected
        )
    return fmt
