"""`fluxledger log summarize`: actuals as JSON and tables; every bad input exits 2 with one line
naming the file, the line and the column (or the mapping/limits file and key)."""

from __future__ import annotations

import hashlib
from collections.abc import Callable
from pathlib import Path

import pytest

from tests.cli.conftest import Outcome

CLI = Callable[..., Outcome]
MAPPING = """
[time]
column = "Time"
timezone = "Europe/Dublin"

[channels]
feed_pressure = { column = "PF", unit = "psi" }
retentate_pressure = { column = "PR", unit = "psi" }
permeate_pressure = { column = "PP", unit = "psi" }
feed_flow = { column = "QF", unit = "L/min" }
permeate_flow = { column = "QP", unit = "mL/min" }
retentate_volume = { column = "V", unit = "mL" }
phase = { column = "Step" }
"""
LIMITS = """
[[range]]
channel = "tmp"
high = "1.2 bar"
name = "TMP"
phase = "diafilter"

[[range]]
channel = "feed_flow"
low = "1 L/min"
"""
PSI = 6894.757293168  # Pa (NIST SP 811)


def log_lines(n_concentrate: int = 600, n_diafilter: int = 600) -> list[str]:
    """1 Hz from 10:00 local (Dublin, summer: UTC+1). Concentrate 1000 mL -> 400 mL at
    1 mL/s (60 mL/min), then diafilter at 400 mL with 60 mL/min permeate."""
    lines = ["Time,Step,PF,PR,PP,QF,QP,V,Note"]
    for i in range(n_concentrate + n_diafilter):
        step = "concentrate" if i < n_concentrate else "diafilter"
        v = 1000.0 - min(i, n_concentrate)
        pf = 20.0 if not 700 <= i < 708 else 30.0  # 8 s of high feed pressure in diafilter
        h, rest = divmod(i, 3600)
        m, s = divmod(rest, 60)
        lines.append(f"2026-06-01 {10 + h:02d}:{m:02d}:{s:02d},{step},{pf},10.0,1.0,1.5,60,{v},ok")
    return lines


@pytest.fixture
def files(tmp_path: Path) -> dict[str, Path]:
    log = tmp_path / "run.csv"
    log.write_text("\n".join(log_lines()) + "\n")
    mapping = tmp_path / "skid.toml"
    mapping.write_text(MAPPING)
    limits = tmp_path / "limits.toml"
    limits.write_text(LIMITS)
    return {"log": log, "mapping": mapping, "limits": limits}


def summarize(cli: CLI, files: dict[str, Path], *extra: str) -> Outcome:
    return cli("log", "summarize", str(files["log"]), "--mapping", str(files["mapping"]), *extra)


def test_json_actuals_against_the_scenario(cli: CLI, files: dict[str, Path]) -> None:
    out = summarize(cli, files, "--limits", str(files["limits"]), "--area", "0.1 m^2", "--json")
    assert out.code == 0, out.stderr
    d = out.json()
    assert d["sha256"] == hashlib.sha256(files["log"].read_bytes()).hexdigest()
    assert d["rows"] == 1200
    assert d["start"] == "2026-06-01T09:00:00+00:00"  # 10:00 Irish summer time = UTC+1
    conc, dia = d["phases"]
    assert conc["phase"] == "concentrate" and dia["phase"] == "diafilter"
    # by hand: 600 s at 60 mL/min = 600 mL, constant flow (trapezoid exact)
    assert conc["permeate_volume"] == {"value": pytest.approx(0.6), "unit": "L"}
    assert conc["duration"] == {"value": pytest.approx(10.0), "unit": "min"}
    # linear level: 1000 mL at the start, 400 mL at the next phase's first sample (600 s)
    assert conc["initial_volume"]["value"] == pytest.approx(1.0)
    assert conc["final_volume"]["value"] == pytest.approx(0.4)
    assert conc["concentration_factor"] == pytest.approx(2.5)
    assert conc["diavolumes"] == pytest.approx(0.0, abs=1e-9)  # a pure concentration
    # diafiltration: 599 s x 1 mL/s at 400 mL -> 599/400 diavolumes (mass balance)
    assert dia["diavolumes"] == pytest.approx(599 / 400)
    # 60 mL/min over 0.1 m² = 1e-6 m³/s / 0.1 m² = 36 LMH (1 LMH = 1/3.6e6 m/s)
    assert dia["channels"]["flux"]["mean"]["value"] == pytest.approx(36.0)
    # TMP = (20 + 10)/2 - 1 = 14 psi = 0.9653 bar (psi exact, NIST SP 811)
    assert conc["channels"]["tmp"]["mean"]["value"] == pytest.approx(14 * PSI / 1e5)
    [e] = d["excursions"]  # TMP in the spike: (30 + 10)/2 - 1 = 19 psi > 1.2 bar
    assert (e["name"], e["phase"], e["side"], e["samples"]) == ("TMP", "diafilter", "high", 8)
    assert e["duration"]["value"] == pytest.approx(8 / 60)
    assert e["worst"]["value"] == pytest.approx(19 * PSI / 1e5)
    assert e["start"] == "2026-06-01T09:11:40+00:00"  # sample 700
    assert d["not_computed"] == [
        {"what": "temperature", "why": "not mapped"},
        {
            "what": "wall_shear",
            "why": "needs the fiber count and lumen diameter (--fibers, --lumen-diameter)",
        },
    ]


def test_human_output_fits_100_columns(cli: CLI, files: dict[str, Path]) -> None:
    out = cli(
        "log",
        "summarize",
        str(files["log"]),
        "--mapping",
        str(files["mapping"]),
        "--limits",
        str(files["limits"]),
        env={"COLUMNS": "100"},
    )
    assert out.code == 0, out.stderr
    digest = hashlib.sha256(files["log"].read_bytes()).hexdigest()
    text = out.stdout
    assert digest[:16] in text and "1200" in text
    assert "2026-06-01 09:00:00 UTC" in text and "2026-06-01 09:19:59 UTC" in text
    for title in ("Actuals", "Time-weighted means", "Excursions"):
        assert title in text
    assert "concentrate" in text and "diafilter" in text and "2.50" in text
    assert "not computed: flux, flux_decline" not in text  # grouped by the same reason only
    assert "not computed: flux: needs the membrane area (--area)" in text
    assert max(len(line) for line in text.splitlines()) <= 100


def test_time_windows_and_geometry(cli: CLI, files: dict[str, Path]) -> None:
    out = summarize(
        cli,
        files,
        "--phase",
        "first=2026-06-01T09:00:00Z/2026-06-01T09:05:00Z",
        "--fibers",
        "100",
        "--lumen-diameter",
        "1 mm",
        "--json",
    )
    assert out.code == 0, out.stderr
    d = out.json()
    [p] = d["phases"]
    assert (p["phase"], p["samples"]) == ("first", 300)
    # 1.5 L/min = 2.5e-5 m³/s over 100 fibers of 1 mm: 32·2.5e-7/(π·1e-9) 1/s (Hagen–Poiseuille)
    shear = d["run"]["channels"]["wall_shear"]["mean"]
    assert shear == {
        "value": pytest.approx(32 * 2.5e-7 / (3.141592653589793 * 1e-9)),
        "unit": "1/s",
    }


def test_the_log_is_not_changed(cli: CLI, files: dict[str, Path]) -> None:
    before = files["log"].read_bytes()
    assert summarize(cli, files, "--json").code == 0
    assert files["log"].read_bytes() == before


def edit(lines: list[str], line: int, column: int, text: str) -> list[str]:
    """Set one cell; ``line`` counts from 1 with the header as line 1."""
    cells = lines[line - 1].split(",")
    cells[column] = text
    lines[line - 1] = ",".join(cells)
    return lines


# (file lines, the line and column the message must name)
BAD_LOGS = {
    "text in a number": (edit(log_lines(), 42, 2, "20.1 psi"), 42, "PF"),
    "an empty number": (edit(log_lines(), 17, 6, ""), 17, "QP"),
    "a missing-value mark": (edit(log_lines(), 900, 7, "NaN"), 900, "V"),
    "a duplicated time": (edit(log_lines(), 11, 0, "2026-06-01 10:00:08"), 11, "Time"),
    "a backwards time": (edit(log_lines(), 11, 0, "2026-06-01 09:59:00"), 11, "Time"),
    "a gap": (edit(log_lines(), 1201, 0, "2026-06-01 10:30:00"), 1201, "Time"),
    "an unreadable time": (edit(log_lines(), 5, 0, "soon"), 5, "Time"),
    "an empty phase": (edit(log_lines(), 5, 1, ""), 5, "Step"),
    "a missing column": ([log_lines()[0].replace(",PP,", ",P3,"), *log_lines()[1:]], 1, "PP"),
    "header only": (log_lines()[:1], 2, None),
    "an empty file": ([], 1, None),
}


@pytest.mark.parametrize("case", sorted(BAD_LOGS))
def test_a_bad_log_exits_2_naming_file_line_and_column(
    cli: CLI, files: dict[str, Path], case: str
) -> None:
    lines, line, column = BAD_LOGS[case]
    files["log"].write_text("\n".join(lines) + ("\n" if lines else ""))
    out = summarize(cli, files, "--json")
    assert out.code == 2, out.stdout
    assert out.exception is None and "Traceback" not in out.stderr
    assert out.stdout == ""
    assert len(out.stderr.strip().splitlines()) == 1
    assert out.stderr.startswith(f"error: {files['log']}:{line}: ")
    if column is not None:
        assert f"'{column}'" in out.stderr


BAD_MAPPINGS = {
    "an unknown channel": (
        '[time]\ncolumn = "Time"\n[channels]\nfeed_presure = { column = "PF", unit = "psi" }\n',
        "channels.feed_presure",
        None,
    ),
    "a unit of the wrong dimension": (
        MAPPING.replace('"L/min"', '"psi"'),
        "channels.feed_flow.unit",
        None,
    ),
    "a bad timezone": (MAPPING.replace("Europe/Dublin", "Europe/Dublinn"), "time.timezone", None),
    "bad TOML": (MAPPING.replace('unit = "psi" }', 'unit = "psi"', 1), None, 7),
}


@pytest.mark.parametrize("case", sorted(BAD_MAPPINGS))
def test_a_bad_mapping_exits_2_naming_file_and_key(
    cli: CLI, files: dict[str, Path], case: str
) -> None:
    text, key, line = BAD_MAPPINGS[case]
    files["mapping"].write_text(text)
    out = summarize(cli, files)
    assert out.code == 2 and out.exception is None and "Traceback" not in out.stderr
    where = f"{files['mapping']}:{line}: " if line else f"{files['mapping']}: {key}: "
    assert out.stderr.startswith(f"error: {where}"), out.stderr


@pytest.mark.parametrize(
    ("text", "key"),
    [
        ('[[range]]\nchannel = "tmp"\nhigh = "1.2 L/min"\n', "range[1].high"),
        ('[[range]]\nchannel = "tmpp"\nhigh = "1.2 bar"\n', "range[1].channel"),
        ('[[range]]\nchannel = "tmp"\n', "range[1].low"),
        ('[[range]]\nchannel = "tmp"\nhigh = 1.2\n', "range[1].high"),
        ('[[range]]\nchannel = "tmp"\nlow = "2 bar"\nhigh = "1 bar"\n', "range[1].low"),
        ('[[range]]\nchannel = "tmp"\nhigh = "1 bar"\nside = "x"\n', "range[1].side"),
        (
            '[[range]]\nchannel = "tmp"\nhigh = "1 bar"\n'
            '[[range]]\nchannel = "flux"\nhigh = "1 psi"\n',
            "range[2].high",
        ),
        ("[limits]\n", "limits"),
    ],
)
def test_a_bad_limits_file_exits_2_naming_file_and_key(
    cli: CLI, files: dict[str, Path], text: str, key: str
) -> None:
    files["limits"].write_text(text)
    out = summarize(cli, files, "--limits", str(files["limits"]))
    assert out.code == 2 and out.exception is None
    assert out.stderr.startswith(f"error: {files['limits']}: {key}: "), out.stderr


def test_malformed_limits_toml_names_the_line(cli: CLI, files: dict[str, Path]) -> None:
    files["limits"].write_text('[[range]]\nchannel = "tmp"\nhigh = \n')
    out = summarize(cli, files, "--limits", str(files["limits"]))
    assert out.code == 2 and out.stderr.startswith(f"error: {files['limits']}:3: not valid TOML")


@pytest.mark.parametrize(
    ("args", "words"),
    [
        (["--area", "0.1"], "--area"),
        (["--area", "10 mL"], "--area"),
        (["--fibers", "0"], "--fibers"),
        (["--lumen-diameter", "-1 mm"], "--lumen-diameter"),
        (["--phase", "w=2026-06-01T09:00:00/2026-06-01T09:05:00"], "no UTC offset"),
    ],
)
def test_bad_options_exit_2(cli: CLI, files: dict[str, Path], args: list[str], words: str) -> None:
    out = summarize(cli, files, *args)
    assert out.code == 2 and out.exception is None
    assert words in out.stderr, out.stderr


def test_missing_files_exit_2(cli: CLI, files: dict[str, Path], tmp_path: Path) -> None:
    out = cli("log", "summarize", str(tmp_path / "none.csv"), "--mapping", str(files["mapping"]))
    assert out.code == 2 and "none.csv" in out.stderr and out.exception is None
    out = cli("log", "summarize", str(files["log"]), "--mapping", str(tmp_path / "none.toml"))
    assert out.code == 2 and "none.toml" in out.stderr and out.exception is None
