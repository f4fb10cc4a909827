"""Hostile input for the parsers: quantities, points files, mappings, limits, TOML, skid logs and
user paths. Each parser either returns finite SI values within units.SI_MIN..SI_MAX (or 0), or
raises a LedgerError; any other exception is a bug. The CLI cases check that such input exits
with code 2, one line on stderr naming the field, and no traceback.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterator
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from ledger import units
from ledger.errors import LedgerError
from ledger.pointsfile import Column, read_points
from ledger.runs.limits import parse_limits
from ledger.runs.mapping import parse_mapping
from ledger.runs.skidlog import read_log
from ledger.tomlfile import parse_toml
from ledger.userfiles import read_user_file
from tests.world import invoke as world_invoke

# Characters that have broken parsers: non-ASCII digits (Arabic-Indic, full-width, Devanagari),
# control and invisible characters, pint's comment sign, operators, look-alike symbols.
ODD = [
    *"٣１०", "\x00", "\x1f", "\x7f", "\u200b", "\ufeff", "\u202e", "\u2028", "\ud800",
    *"#%°µμ²³·*/^()[]{}\"'\\,;=", "\t", "\n", "\r", "\u00a0", "\u2212", "∞",
]  # fmt: skip
NUMBER_CHARS = st.sampled_from([*"0123456789.+-eE ", *ODD])
UNITS = [
    "psi", "bar", "Pa", "mbar", "mL/min", "L/h", "degC", "°C", "K", "degF", "LMH", "GFD", "%",
    "1/s", "m^2", "cm^2", "g/L", "mg/mL", "mPa*s", "cP", "s", "min", "h", "m**3/s", "uS/cm",
    "", "psi#x", "9**9**9*psi", "10**10**10*Pa", "psi**99", "psi**-99", "dB", "(psi", "psi)",
    "1/0", "0*psi", "Pa/0", "e", "nan", "inf", "psi psi", "L/(m^2*h*bar)", "(((((psi)))))",
]  # fmt: skip


def exponent_numbers() -> st.SearchStrategy[str]:
    """Numbers at and past the ends of the float range (and of SI_MIN..SI_MAX)."""
    mantissa = st.one_of(st.integers(-(10**20), 10**20).map(str), st.sampled_from(["1.", ".5"]))
    return st.builds(lambda m, e: f"{m}e{e}", mantissa, st.integers(-420, 420))


def numbers() -> st.SearchStrategy[str]:
    return st.one_of(
        st.floats(allow_nan=True, allow_infinity=True).map(repr),
        exponent_numbers(),
        st.text(NUMBER_CHARS, max_size=12),
        st.sampled_from(["NaN", "-inf", "Infinity", "1e308", "1e-320", "5e-324", "0x10", "1_0"]),
    )


def unit_texts() -> st.SearchStrategy[str]:
    return st.one_of(
        st.sampled_from(UNITS),
        st.text(max_size=24),
        st.text(st.sampled_from([*"psiLmMnbarPaKdegC1234567890 */^()-+", *ODD]), max_size=24),
    )


def quantities() -> st.SearchStrategy[str]:
    """What a hostile user could type for a quantity."""
    space = st.sampled_from(["", " ", "  ", "\u00a0", "\u202f", "\x00", "\t"])
    return st.one_of(
        st.text(max_size=40),
        st.builds(lambda n, s, u: n + s + u, numbers(), space, unit_texts()),
        st.text(NUMBER_CHARS, min_size=150, max_size=260),  # around MAX_TEXT
    )


def in_range(value: float) -> bool:
    return math.isfinite(value) and (value == 0 or units.SI_MIN <= abs(value) <= units.SI_MAX)


def check(values: Iterator[float] | list[float]) -> None:
    for v in values:
        assert isinstance(v, float) and in_range(v), v


# --- units -----------------------------------------------------------------------------------


@settings(max_examples=400, deadline=None)
@given(quantities(), st.sampled_from(sorted(units.KINDS)), st.booleans())
def test_parse_gives_a_value_in_range_or_a_ledger_error(
    text: str, kind: str, positive: bool
) -> None:
    try:
        value = units.parse(text, kind, field="--x", positive=positive)
    except LedgerError as err:
        assert err.field == "--x" and str(err).startswith("--x: ")
        return
    check([value])
    assert not positive or value > 0


@settings(max_examples=200, deadline=None)
@given(numbers(), unit_texts(), st.sampled_from(sorted(units.KINDS)))
def test_to_si_gives_a_value_in_range_or_a_ledger_error(number: str, unit: str, kind: str) -> None:
    try:
        value = float(number)
    except ValueError:
        value = 1.0
    try:
        si = units.to_si(value, unit, kind, field="f")
    except LedgerError:
        return
    check([si])


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=60), st.text(max_size=20))
def test_split_header_takes_one_bracketed_unit_at_the_end(name: str, unit: str) -> None:
    got = units.split_header(f"{name} [{unit}]")
    if not any(b in name + unit for b in "[]"):
        assert got == (name.strip(), unit.strip())
    else:  # more brackets: the whole header is a name, which matches no wanted column
        assert got[1] is None or ("[" not in got[1] and "]" not in got[1])


# --- points files ----------------------------------------------------------------------------

SPEC = [Column("concentration", "concentration"), Column("flux", "flux")]
HEADERS = [
    "concentration [g/L],flux [LMH]",
    "flux [LMH],concentration [mg/mL],note",
    "concentration [g/L],flux",
    "concentration [10**10**10*g/L],flux [LMH]",
    "concentration [g/L],flux [psi]",
    "# a comment",
    "",
]
ENCODINGS = ["utf-8", "utf-8-sig", "utf-16", "utf-16-le", "latin-1", "cp1252"]


@pytest.fixture(scope="module")
def workdir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return tmp_path_factory.mktemp("hostile")


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    st.one_of(st.sampled_from(HEADERS), st.text(max_size=40)),
    st.lists(st.lists(st.one_of(numbers(), st.text(max_size=10)), max_size=4), max_size=6),
    st.sampled_from(ENCODINGS),
)
def test_points_files_give_si_values_or_a_ledger_error(
    workdir: Path, header: str, rows: list[list[str]], encoding: str
) -> None:
    text = "\n".join([header, *(",".join(r) for r in rows)]) + "\n"
    path = workdir / "points.csv"
    try:
        raw = text.encode(encoding)
    except UnicodeEncodeError:
        raw = text.encode("utf-8", "surrogatepass")  # a lone surrogate: bytes that are no UTF-8
    path.write_bytes(raw)
    try:
        pts = read_points(path, SPEC)
    except LedgerError:
        return
    for values in pts.columns.values():
        check(values)
        assert len(values) == len(pts)


@settings(max_examples=100, deadline=None)
@given(st.binary(max_size=300))
def test_points_files_of_random_bytes(workdir: Path, raw: bytes) -> None:
    path = workdir / "bytes.csv"
    path.write_bytes(raw)
    try:
        pts = read_points(path, SPEC)
    except LedgerError:
        return
    for values in pts.columns.values():
        check(values)


# --- user paths ------------------------------------------------------------------------------


@settings(max_examples=200, deadline=None)
@given(st.one_of(st.text(max_size=40), st.text(min_size=250, max_size=300)))
def test_user_paths_are_read_or_refused_by_name(workdir: Path, name: str) -> None:
    (workdir / "present.csv").write_text("x\n")
    try:
        data = read_user_file(f"{workdir}/{name}", "--points-file", 1 << 20)
    except LedgerError as err:
        assert err.field == "--points-file" and str(err).startswith("--points-file: ")
        return
    assert isinstance(data, bytes) and len(data) <= 1 << 20


# --- TOML, mappings and limits ---------------------------------------------------------------


def toml_string(text: str) -> str:
    # JSON strings are TOML basic strings; a lone surrogate (\ud800) makes the TOML invalid
    return json.dumps(text)


@settings(max_examples=60, deadline=None)
@given(st.integers(0, 1500), st.sampled_from(["[", "{ a = "]))
def test_toml_of_any_depth_parses_or_is_a_ledger_error(depth: int, opener: str) -> None:
    closer = "]" if opener == "[" else " }"
    text = "x = " + opener * depth + ("1" if opener != "[" else "") + closer * depth
    if depth == 0:
        text = "x = 1"
    try:
        data = parse_toml(text, "t.toml", "mapping", "TOML")
    except LedgerError as err:
        assert err.source == "t.toml" and depth > 30
        return
    assert "x" in data and depth <= 31


@settings(max_examples=300, deadline=None)
@given(
    st.one_of(st.text(max_size=30), st.sampled_from(["Time", "T", ""])),
    st.one_of(
        st.none(),
        st.text(st.sampled_from([*"%dmYHMSfzZjaAbBpyIcxXGVuUw%-: /.T", *ODD]), max_size=16),
    ),
    st.one_of(st.sampled_from(["UTC", "Europe/Dublin", "../../etc/passwd", ""]), st.text()),
    st.one_of(st.none(), quantities()),
    st.sampled_from(sorted(["feed_pressure", "temperature", "permeate_mass", "phase", "nope"])),
    unit_texts(),
    st.one_of(st.none(), quantities()),
)
def test_mappings_parse_or_raise_a_ledger_error(
    column: str,
    fmt: str | None,
    tz: str,
    gap: str | None,
    channel: str,
    unit: str,
    density: str | None,
) -> None:
    lines = ["[time]", f"column = {toml_string(column)}", f"timezone = {toml_string(tz)}"]
    if fmt is not None:
        lines.append(f"format = {toml_string(fmt)}")
    if gap is not None:
        lines.append(f"max_gap = {toml_string(gap)}")
    spec = f"column = {toml_string(column + 'x')}, unit = {toml_string(unit)}"
    if density is not None:
        spec += f", density = {toml_string(density)}"
    lines += ["[channels]", f"{channel} = {{ {spec} }}"]
    try:
        m = parse_mapping("\n".join(lines) + "\n", "m.toml")
    except LedgerError as err:
        assert err.source == "m.toml"
        return
    for c in m.channels.values():
        check([c.scale, c.offset])
    if m.max_gap_s is not None:
        check([m.max_gap_s])


@settings(max_examples=100, deadline=None)
@given(st.text(max_size=200))
def test_arbitrary_text_as_a_mapping(text: str) -> None:
    try:
        parse_mapping(text, "m.toml")
    except LedgerError as err:
        assert err.source == "m.toml"


@settings(max_examples=150, deadline=None)
@given(
    st.sampled_from(["tmp", "feed_flow", "permeate_flux", "nope", ""]),
    st.one_of(st.none(), quantities()),
    st.one_of(st.none(), quantities()),
)
def test_limits_parse_or_raise_a_ledger_error(
    channel: str, low: str | None, high: str | None
) -> None:
    lines = ["[[range]]", f"channel = {toml_string(channel)}"]
    lines += [f"{k} = {toml_string(v)}" for k, v in (("low", low), ("high", high)) if v is not None]
    try:
        ranges = parse_limits("\n".join(lines) + "\n", "l.toml")
    except LedgerError as err:
        assert err.source == "l.toml"
        return
    for r in ranges:
        check([v for v in (r.low, r.high) if v is not None])


# --- skid logs -------------------------------------------------------------------------------

LOG_MAPPING = parse_mapping(
    '[time]\ncolumn = "Time"\n[channels]\nfeed_pressure = { column = "PF", unit = "psi" }\n'
    'temperature = { column = "TT", unit = "degC" }\n',
    "skid.toml",
)
TIMES = st.one_of(
    st.sampled_from(["1500-01-01T00:00:00", "2300-01-01T00:00:00", "1677-09-21T00:00:00Z", ""]),
    st.datetimes().map(lambda d: d.isoformat()),
    st.text(max_size=30),
)


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    st.integers(0, 6),
    st.one_of(st.none(), TIMES),
    st.one_of(st.none(), numbers()),
    st.integers(0, 5),
)
def test_skid_logs_give_si_arrays_or_a_ledger_error(
    workdir: Path, n: int, time: str | None, value: str | None, at: int
) -> None:
    lines = ["Time,PF,TT"] + [f"2026-06-01T08:00:{i:02d},{10 + i},20" for i in range(n)]
    if n and time is not None:
        i = 1 + at % n
        lines[i] = time.replace(",", ";").replace("\n", " ") + lines[i][19:]
    if n and value is not None:
        i = 1 + (at + 1) % n
        t, _, tt = lines[i].split(",")
        lines[i] = f"{t},{value.replace(',', ';')},{tt}"
    path = workdir / "log.csv"
    path.write_bytes(("\n".join(lines) + "\n").encode("utf-8", "surrogatepass"))
    try:
        log = read_log(path, LOG_MAPPING, digest=False)
    except LedgerError:
        return
    for values in log.channels.values():
        check(values.tolist())
    check(log.time_s.tolist())


# --- through the CLI: exit code 2, the field named, no traceback -----------------------------


def invoke(*args: str) -> tuple[int, str, BaseException | None]:
    """Exit code, stderr and any escaped exception (a traceback) of one CLI call, in process
    on the app's command built once (tests/world.py)."""
    result = world_invoke(list(args))
    return result.code, result.stderr, result.exception


DECAY = ["calc", "decay", "--volume", "45 mL", "--rate", "0.05 psi/min", "--operating-tmp",
         "5 psi", "--filtrate-flow", "200 mL/min"]  # fmt: skip
NWP = ["calc", "nwp", "--area", "0.5 m^2", "--permeate-flow", "250 mL/min", "--retentate",
       "10 psi", "--temperature", "20 degC"]  # fmt: skip

OPTION_CASES = [
    ([*DECAY, "--test-pressure", "1e-320 psi"], "--test-pressure"),  # subnormal in Pa
    ([*DECAY, "--test-pressure", "1e308 psi"], "--test-pressure"),  # inf in Pa
    ([*DECAY, "--test-pressure", "1e-304 psi"], "--test-pressure"),  # below SI_MIN
    ([*NWP, "--feed", "٣ psi"], "--feed"),
    ([*NWP, "--feed", "１０ psi"], "--feed"),
    ([*NWP, "--feed", "10 psi#x"], "--feed"),
    ([*NWP, "--feed", "10 psi\x00"], "--feed"),
    ([*NWP, "--feed", "10\u200b psi"], "--feed"),
    ([*NWP, "--feed", "nan psi"], "--feed"),
    ([*NWP, "--feed", "-inf psi"], "--feed"),
    ([*NWP, "--feed", "10 9**9**9*psi"], "--feed"),  # pint alone would not finish
    ([*NWP, "--feed", "1" * 300 + " psi"], "--feed"),
]


@pytest.mark.parametrize(("args", "field"), OPTION_CASES)
def test_hostile_options_exit_2_naming_the_option(args: list[str], field: str) -> None:
    code, stderr, exc = invoke(*args)
    assert exc is None, f"traceback: {exc!r}"
    assert code == 2, stderr
    assert field in stderr and stderr.startswith("error: ") and "Traceback" not in stderr


POINTS_HEADER = "permeate_flow [mL/min],tmp [psi],temperature [degC]\n"


def points_files(base: Path) -> dict[str, tuple[Path | str, str]]:
    """name -> (the file or path given, a word the error must contain)."""
    good = POINTS_HEADER + "200,5,20\n210,6,20\n"
    files: dict[str, tuple[bytes | None, str, str]] = {
        "latin-1": (good.replace("degC", "°C").encode("latin-1"), "latin.csv", "UTF-8"),
        "utf-16 without a BOM": (good.encode("utf-16-le"), "u16.csv", "UTF-16"),
        "a cell over 128 KiB": (
            (POINTS_HEADER + "1" * (130 * 1024) + ",5,20\n").encode(), "cell.csv", "field limit"
        ),
        "a 10 MB line": ((POINTS_HEADER + "1," * (5 << 20)).encode(), "line.csv", "points file"),
        "10,001 rows": (
            (POINTS_HEADER + "200,5,20\n" * 10_001).encode(), "rows.csv", "10,000 data rows"
        ),
        "1e308 in a cell": (
            (POINTS_HEADER + "1e308,5,20\n210,6,20\n").encode(), "big.csv", "permeate_flow"
        ),
        "a NUL in a cell": (
            (POINTS_HEADER + "200\x00,5,20\n210,6,20\n").encode(), "nul.csv", "NUL"
        ),
        "a 300-character name": (None, "p" * 300 + ".csv", "points file"),
        # typer itself refuses a NUL in a path option, naming it: also a clean exit 2
        "a NUL in the path": (None, "a\x00b.csv", "points file|--points-file|--readings-file"),
        "a directory": (None, ".", "points file"),
        "a path of 5,000 bytes": (None, "d/" * 2500, "points file"),
    }  # fmt: skip
    out: dict[str, tuple[Path | str, str]] = {}
    for case, (raw, name, word) in files.items():
        if raw is not None:
            (base / name).write_bytes(raw)
        out[case] = (f"{base}/{name}", word)
    return out


POINTS_CASES = [
    "latin-1", "utf-16 without a BOM", "a cell over 128 KiB", "a 10 MB line", "10,001 rows",
    "1e308 in a cell", "a NUL in a cell", "a 300-character name", "a NUL in the path",
    "a directory", "a path of 5,000 bytes",
]  # fmt: skip


# (a readings file has other columns, so the cases about rows and cells run through nwp only)
COMMAND_CASES = [("nwp", case) for case in POINTS_CASES] + [
    ("decay", case) for case in POINTS_CASES if case not in ("10,001 rows", "1e308 in a cell")
]


@pytest.mark.parametrize(("command", "case"), COMMAND_CASES)
def test_hostile_points_files_exit_2_naming_the_file(
    tmp_path: Path, command: str, case: str
) -> None:
    path, word = points_files(tmp_path)[case]
    if command == "nwp":
        args = ["calc", "nwp", "--area", "0.5 m^2", "--points-file", str(path)]
    else:
        args = ["calc", "decay", "--volume", "45 mL", "--readings-file", str(path)]
    code, stderr, exc = invoke(*args)
    assert exc is None, f"traceback: {exc!r}"
    assert code == 2, stderr
    assert any(w in stderr for w in word.split("|")) and "Traceback" not in stderr, stderr


SKID_MAPPING = (
    '[time]\ncolumn = "Time"\n{time}\n[channels]\nfeed_pressure = { column = "PF", unit = "psi" }\n'
)


def log_cases(base: Path) -> dict[str, tuple[list[str], str]]:
    """name -> (log summarize arguments, a word the error must contain)."""
    rows = [f"2026-06-01T08:00:{i:02d},{10 + i}" for i in range(5)]
    logs = {
        "1e308 psi in a cell": [*rows[:2], "2026-06-01T08:00:02,1e308", *rows[3:]],
        "year 1500": [*rows[:2], "1500-06-01T08:00:02,12", *rows[3:]],
        "year 2300": [*rows[:2], "2300-06-01T08:00:02,12", *rows[3:]],
    }
    mappings = {
        "plain": "",
        "format %d %d": 'format = "%d %d"',
        "deep": "x = " + "[" * 1000 + "]" * 1000,
    }
    for name, lines in logs.items():
        (base / f"{name}.csv").write_text("Time,PF\n" + "\n".join(lines) + "\n")
    (base / "ok.csv").write_text("Time,PF\n" + "\n".join(rows) + "\n")
    for name, time in mappings.items():
        (base / f"{name}.toml").write_text(SKID_MAPPING.replace("{time}", time))
    (base / "deep-limits.toml").write_text("[[range]]\nchannel = " + "[" * 1000 + "]" * 1000)

    def summarize(log: str, mapping: str, *extra: str) -> list[str]:
        return ["log", "summarize", log, "--mapping", mapping, *extra]

    ok, plain = str(base / "ok.csv"), str(base / "plain.toml")
    return {
        "1e308 psi in a cell": (summarize(str(base / "1e308 psi in a cell.csv"), plain), "'PF'"),
        "year 1500": (summarize(str(base / "year 1500.csv"), plain), "1677-09-21"),
        "year 2300": (summarize(str(base / "year 2300.csv"), plain), "2262-04-11"),
        "format %d %d": (summarize(ok, str(base / "format %d %d.toml")), "time.format"),
        "mapping nested 1000 deep": (summarize(ok, str(base / "deep.toml")), "nested"),
        "limits nested 1000 deep": (
            summarize(ok, plain, "--limits", str(base / "deep-limits.toml")),
            "nested",
        ),
        "a 300-character log name": (summarize(str(base / ("l" * 300)), plain), "file"),
        "a 300-character mapping name": (summarize(ok, str(base / ("m" * 300))), "mapping"),
        "a NUL in the mapping path": (summarize(ok, str(base) + "/m\x00.toml"), "mapping"),
        "a directory as the log": (summarize(str(base), plain), "file"),
    }


LOG_CASES = [
    "1e308 psi in a cell", "year 1500", "year 2300", "format %d %d", "mapping nested 1000 deep",
    "limits nested 1000 deep", "a 300-character log name", "a 300-character mapping name",
    "a NUL in the mapping path", "a directory as the log",
]  # fmt: skip


@pytest.mark.parametrize("case", LOG_CASES)
def test_hostile_logs_and_mappings_exit_2_naming_the_field(tmp_path: Path, case: str) -> None:
    args, word = log_cases(tmp_path)[case]
    code, stderr, exc = invoke(*args)
    assert exc is None, f"traceback: {exc!r}"
    assert code == 2, stderr
    assert word in stderr and "Traceback" not in stderr, stderr
