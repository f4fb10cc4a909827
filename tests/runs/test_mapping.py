"""Skid-log mappings: one linear SI conversion per column, and every mistake names file and key."""

from __future__ import annotations

import hashlib
import math
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ledger import units
from ledger.errors import InputError
from ledger.runs.limits import load_limits
from ledger.runs.mapping import load_mapping, parse_mapping
from ledger.tomlfile import parse_toml

SAMPLE = Path(__file__).resolve().parents[2] / "sample_records" / "qf2_skid_mapping.toml"
PSI = 6894.757293168  # Pa; exact by definition (NIST SP 811, appendix B: 1 lbf/in²)

# (unit, kind, scale, offset): SI = scale·x + offset. Factors from the unit definitions
# (NIST SP 811 appendix B): 1 bar = 1e5 Pa, 1 lb = 0.45359237 kg, 1 in = 0.0254 m, the
# Celsius and Fahrenheit scales T/K = t/°C + 273.15 = (t/°F + 459.67)·5/9.
UNITS = [
    ("psi", "pressure", PSI, 0.0),
    ("bar", "pressure", 1e5, 0.0),
    ("kPa", "pressure", 1e3, 0.0),
    ("mbar", "pressure", 100.0, 0.0),
    ("mL/min", "flow", 1e-6 / 60, 0.0),
    ("L/h", "flow", 1e-3 / 3600, 0.0),
    ("L/min", "flow", 1e-3 / 60, 0.0),
    ("g", "mass", 1e-3, 0.0),
    ("kg", "mass", 1.0, 0.0),
    ("lb", "mass", 0.45359237, 0.0),
    ("mL", "volume", 1e-6, 0.0),
    ("L", "volume", 1e-3, 0.0),
    ("degC", "temperature", 1.0, 273.15),
    ("degF", "temperature", 5 / 9, 459.67 * 5 / 9),
    ("K", "temperature", 1.0, 0.0),
]
CHANNEL_OF_KIND = {
    "pressure": "feed_pressure",
    "flow": "permeate_flow",
    "mass": "permeate_mass",
    "volume": "retentate_volume",
    "temperature": "temperature",
}


def mapping(channels: str, time: str = 'column = "T"') -> str:
    return f"[time]\n{time}\n\n[channels]\n{channels}\n"


def error(text: str, source: str = "skid.toml") -> InputError:
    with pytest.raises(InputError) as caught:
        parse_mapping(text, source)
    err = caught.value
    assert err.source == source  # every mapping error names the file
    return err


def test_the_sample_mapping_converts_each_column_to_si() -> None:
    m = load_mapping(SAMPLE)
    assert m.sha256 == hashlib.sha256(SAMPLE.read_bytes()).hexdigest()
    assert m.time_column == "Time Stamp"
    assert m.time_format == "%d/%m/%Y %H:%M:%S"
    assert m.timezone == "Europe/Dublin"
    assert m.max_gap_s is None
    ch = m.channels
    assert ch["feed_pressure"].scale == pytest.approx(PSI, rel=1e-12)
    assert ch["feed_pressure"].offset == 0.0
    assert ch["permeate_flow"].scale == pytest.approx(1e-6 / 60, rel=1e-12)  # mL/min -> m³/s
    assert ch["permeate_mass"].scale == pytest.approx(1e-3, rel=1e-12)  # g -> kg
    assert ch["permeate_mass"].density_kg_m3 == pytest.approx(1000.0, rel=1e-12)  # 1 g/mL
    assert ch["temperature"].scale == pytest.approx(1.0, rel=1e-12)  # a kelvin is a degree C
    assert ch["temperature"].offset == pytest.approx(273.15, rel=1e-12)  # 0 °C (SI brochure)
    assert ch["phase"].unit is None


def test_max_gap_and_defaults() -> None:
    m = parse_mapping(mapping("", 'column = "T"\nmax_gap = "2 min"'), "m.toml")
    assert m.max_gap_s == pytest.approx(120.0)
    assert m.timezone == "UTC" and m.time_format is None and m.channels == {}


@pytest.mark.parametrize(
    ("text", "key", "words"),
    [
        (mapping('pressure_feed = { column = "P", unit = "psi" }'), "channels.pressure_feed",
         "unknown channel"),
        (mapping('feed_pressure = { column = "P", unit = "mL/min" }'),
         "channels.feed_pressure.unit", "is a flow; expected a pressure"),
        (mapping('feed_flow = { column = "F", unit = "psi" }'), "channels.feed_flow.unit",
         "is a pressure; expected a flow"),
        (mapping('temperature = { column = "TT", unit = "furlong" }'),
         "channels.temperature.unit", "expected a temperature"),
        (mapping('feed_pressure = { column = "P", unit = "wibble" }'),
         "channels.feed_pressure.unit", "unknown unit"),
        (mapping('feed_pressure = { column = "P" }'), "channels.feed_pressure.unit", "missing"),
        (mapping('feed_pressure = { column = "P", unit = "psi", scale = 2 }'),
         "channels.feed_pressure.scale", "unknown key"),
        (mapping('feed_pressure = { unit = "psi" }'), "channels.feed_pressure.column", "missing"),
        (mapping('feed_pressure = "P"'), "channels.feed_pressure", "inline table"),
        (mapping('phase = { column = "S", unit = "psi" }'), "channels.phase.unit", "no unit"),
        (mapping('feed_flow = { column = "F", unit = "mL/min", density = "1 g/mL" }'),
         "channels.feed_flow.density", "only permeate_mass"),
        (mapping('permeate_mass = { column = "W", unit = "g", density = "1 bar" }'),
         "channels.permeate_mass.density", "expected a density"),
        (mapping('permeate_mass = { column = "W", unit = "g", density = "0 g/mL" }'),
         "channels.permeate_mass.density", "greater than zero"),
        (mapping('feed_flow = { column = "F", unit = "mL/min" }\n'
                 'permeate_flow = { column = "F", unit = "mL/min" }'),
         "channels.permeate_flow.column", "already mapped by channels.feed_flow.column"),
        (mapping('feed_flow = { column = "T", unit = "mL/min" }'), "channels.feed_flow.column",
         "already mapped by time.column"),
        (mapping("", 'column = "T"\ntimezone = "Europe/Atlantis"'), "time.timezone",
         "unknown time zone"),
        (mapping("", 'column = "T"\nmax_gap = 10'), "time.max_gap", "no unit"),
        (mapping("", 'column = "T"\nmax_gap = "10 psi"'), "time.max_gap", "expected a time"),
        (mapping("", 'column = "T"\nformat = "day-month-year"'), "time.format",
         "not a strptime format"),
        (mapping("", 'column = "T"\nformat = "%d/%m/%Y %Q"'), "time.format", "strptime"),
        (mapping("", 'column = "T"\nzone = "UTC"'), "time.zone", "unknown key"),
        (mapping("", 'format = "%d/%m/%Y"'), "time.column", "missing"),
        ('[channels]\nfeed_flow = { column = "F", unit = "mL/min" }\n', "time.column",
         "missing"),
        (mapping("") + "[limits]\nx = 1\n", "limits", "unknown table"),
    ],
)  # fmt: skip
def test_each_mistake_names_the_key(text: str, key: str, words: str) -> None:
    err = error(text)
    assert err.field == key
    assert words in str(err), str(err)
    assert str(err).startswith(f"skid.toml: {key}: ")


def test_malformed_toml_names_the_line() -> None:
    text = '[time]\ncolumn = "T"\n[channels]\nfeed_flow = { column = "F", unit = }\n'
    err = error(text)
    assert err.line == 4  # the broken inline table is on line 4
    assert str(err).startswith("skid.toml:4: not valid TOML")


def test_an_unreadable_mapping_is_an_input_error(tmp_path: Path) -> None:
    with pytest.raises(InputError) as caught:
        load_mapping(tmp_path / "absent.toml")
    assert caught.value.field == "mapping"
    assert "absent.toml" in str(caught.value)


@settings(max_examples=60, deadline=None)
@given(
    st.sampled_from(UNITS),
    st.text(
        alphabet="ABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789 -_./#()", min_size=1, max_size=24
    ).filter(lambda s: s.strip() and s != "T"),
    st.floats(min_value=-1e6, max_value=1e6, allow_nan=False),
)
def test_the_two_point_conversion_is_pints_conversion(
    spec: tuple[str, str, float, float], column: str, x: float
) -> None:
    unit, kind, scale, offset = spec
    channel = CHANNEL_OF_KIND[kind]
    m = parse_mapping(mapping(f'{channel} = {{ column = "{column}", unit = "{unit}" }}'), "m")
    c = m.channels[channel]
    assert c.column == column and c.unit == unit
    # the unit's definition (NIST SP 811), and pint converting the value itself
    assert c.scale == pytest.approx(scale, rel=1e-12)
    assert c.offset == pytest.approx(offset, rel=1e-12, abs=1e-12)
    # (pint itself, not units.to_si, which now applies the same two-point conversion)
    direct = units.registry().Quantity(x, unit).to(units.KINDS[kind].si).magnitude
    assert math.isclose(c.scale * x + c.offset, direct, rel_tol=1e-12, abs_tol=1e-9)


# --- Hostile mapping and limits files ----------------------------------------------------------


@pytest.mark.parametrize(
    "value",
    [
        "[" * 1000 + "]" * 1000,  # tomllib recurses once per level: a RecursionError
        "{ a = " * 1000 + "1" + " }" * 1000,
        "[" * 40 + "]" * 40,  # parses, but deeper than tomlfile.MAX_DEPTH
    ],
    ids=["arrays-1000", "inline-tables-1000", "arrays-40"],
)
def test_deeply_nested_toml_is_an_input_error(tmp_path: Path, value: str) -> None:
    text = f'[time]\ncolumn = "T"\nx = {value}\n'
    err = error(text)
    assert err.field == "mapping" and "nested more than 32 levels" in str(err)
    path = tmp_path / "limits.toml"
    path.write_text(f"[[range]]\nchannel = {value}\n", encoding="utf-8")
    with pytest.raises(InputError) as caught:
        load_limits(path)
    assert caught.value.field == "limits" and caught.value.source == str(path)
    assert "nested more than 32 levels" in str(caught.value)


def test_toml_nested_to_the_limit_still_parses() -> None:
    # 31 arrays inside the top-level table: depth 32, the most accepted
    data = parse_toml("x = " + "[" * 31 + "]" * 31, "t.toml", "mapping", "TOML")
    assert set(data) == {"x"}


@pytest.mark.parametrize(
    ("raw", "says"),
    [
        ('[time]\ncolumn = "Zeit ä"\n'.encode("latin-1"), "not UTF-8 text"),
        (b"[time]\n" + b"#" * (2 << 20) + b"\n", "the file is 2.0 MiB"),
    ],
)
def test_unreadable_mapping_files_name_the_file(tmp_path: Path, raw: bytes, says: str) -> None:
    path = tmp_path / "skid.toml"
    path.write_bytes(raw)
    with pytest.raises(InputError) as caught:
        load_mapping(path)
    assert caught.value.field == "mapping" and caught.value.source == str(path)
    assert says in str(caught.value)


def test_a_mapping_with_a_bom_is_read(tmp_path: Path) -> None:
    path = tmp_path / "skid.toml"
    path.write_bytes(b"\xef\xbb\xbf" + mapping("").encode("utf-8"))
    assert load_mapping(path).time_column == "T"


@pytest.mark.parametrize(
    ("name", "says"),
    [
        ("m" * 300 + ".toml", "a part of the path is 305 bytes long"),
        ("a\x00b.toml", "NUL"),
        ("", "the path is empty"),
    ],
)
def test_unusable_mapping_paths_name_the_field(name: str, says: str) -> None:
    with pytest.raises(InputError) as caught:
        load_mapping(name)
    assert caught.value.field == "mapping" and says in str(caught.value)


@pytest.mark.parametrize(
    ("fmt", "says"),
    [
        ("%d %d", "not a usable strptime format"),  # strptime: a repeated group (re.error)
        ("%Y %Y", "not a usable strptime format"),
        ("%", "not a usable strptime format"),
        ("%%", "reads no date or time"),
        ("%G-%V", "not a usable strptime format"),  # ISO year without a weekday
        ("%Y" * 60, "at most 100 characters"),
        ("%Y\\u0000", "no NUL"),
    ],
)
def test_unusable_time_formats_name_the_key(fmt: str, says: str) -> None:
    err = error(mapping("", f'column = "T"\nformat = "{fmt}"'))
    assert err.field == "time.format" and says in str(err), str(err)
