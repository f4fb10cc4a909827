"""Skid-log reading: every bad input names file, line and column; actuals by hand-checkable
cases; unit invariance and additivity of phases (hypothesis)."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ledger.errors import InputError
from ledger.runs.actuals import Geometry, Range, summarize
from ledger.runs.mapping import parse_mapping
from ledger.runs.skidlog import read_log

MAPPING = """
[time]
column = "t"
[channels]
feed_pressure = { column = "pf", unit = "psi" }
retentate_pressure = { column = "pr", unit = "psi" }
permeate_pressure = { column = "pp", unit = "psi" }
permeate_flow = { column = "qp", unit = "mL/min" }
retentate_volume = { column = "v", unit = "mL" }
phase = { column = "step" }
"""
HEAD = "t,step,pf,pr,pp,qp,v"


def rows(n: int = 10, step: int = 1) -> list[str]:
    return [f"2026-11-03T08:00:{i * step:02d}+00:00,c,10,8,1,60,{1000 - i}" for i in range(n)]


def write(tmp_path: Path, lines: list[str], head: str = HEAD) -> Path:
    p = tmp_path / "log.csv"
    p.write_text("\n".join([head, *lines]) + "\n")
    return p


def read(p: Path, mapping: str = MAPPING) -> Any:
    return read_log(p, parse_mapping(mapping, "m.toml"))


@pytest.mark.parametrize(
    ("edit", "line", "column", "needle"),
    [
        (lambda r: r.__setitem__(3, r[3].replace(",60,", ",sixty,")), 5, "qp",
         "'sixty' is not a number"),
        (lambda r: r.__setitem__(4, r[4].replace(",60,", ",,")), 6, "qp", "empty"),
        (lambda r: r.__setitem__(5, r[4]), 7, "t", "repeats the time of line 6"),
        (lambda r: r.__setitem__(5, r[2]), 7, "t", "goes back in time"),
        (lambda r: r.__setitem__(2, r[2].replace("2026-11-03T08", "yesterday")), 4, "t",
         "is not a time"),
    ],
)  # fmt: skip
def test_bad_rows_name_file_line_and_column(
    tmp_path: Path, edit: Any, line: int | None, column: str, needle: str
) -> None:
    r = rows()
    edit(r)
    with pytest.raises(InputError) as err:
        read(write(tmp_path, r))
    e = err.value
    assert e.source == str(tmp_path / "log.csv") and e.field == column, str(e)
    if line is not None:
        assert e.line == line, str(e)
    assert needle in str(e)


def test_gap_is_named_and_can_be_allowed(tmp_path: Path) -> None:
    r = rows()
    r[6:] = [x.replace("08:00:0", "08:01:0") for x in r[6:]]
    with pytest.raises(InputError, match="a gap of 61 s after line 7"):
        read(write(tmp_path, r))
    allowed = MAPPING.replace('column = "t"', 'column = "t"\nmax_gap = "2 min"')
    assert read(write(tmp_path, r), allowed).rows == 10


def test_file_and_mapping_problems(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="has a header but no data rows"):
        read(write(tmp_path, []))
    empty = tmp_path / "empty.csv"
    empty.write_text("")
    with pytest.raises(InputError, match="the file is empty"):
        read(empty)
    with pytest.raises(InputError, match=r"channels\.permeate_flow\.column: column 'qp' is not"):
        read(write(tmp_path, [x.replace(",60,", ",") for x in rows()], "t,step,pf,pr,pp,v"))
    with pytest.raises(
        InputError, match=r"m\.toml: channels\.permeate_flow\.unit: .* is a pressure"
    ):
        parse_mapping(MAPPING.replace('unit = "mL/min"', 'unit = "bar"'), "m.toml")
    with pytest.raises(InputError, match="unknown channel 'feed_presure'"):
        parse_mapping(MAPPING.replace("feed_pressure =", "feed_presure ="), "m.toml")
    with pytest.raises(InputError, match="unknown time zone"):
        parse_mapping(
            MAPPING.replace('column = "t"', 'column = "t"\ntimezone = "Mars/Olympus"'), "m"
        )


def test_hand_checkable_actuals(tmp_path: Path) -> None:
    # 60 mL/min for 9 s (10 samples at 1 s): trapezoid exact for constant flow -> 9 mL.
    # TMP = (10 + 8)/2 − 1 = 8 psi exactly (definition, DESIGN §4).
    log = read(write(tmp_path, rows()))
    s = summarize(log, Geometry(area_m2=0.01), [Range("tmp", "tmp", None, 8 * 6894.757293168 - 1)])
    assert s.run.duration_s == 9.0
    assert s.run.permeate_volume_m3 == pytest.approx(9e-6, rel=1e-12)
    assert s.run.stats["tmp"].mean == pytest.approx(8 * 6894.757293168, rel=1e-12)
    # The level falls 1 mL/s exactly, so the line-fit end values are exact: 1000 and 991 mL.
    assert s.run.initial_volume_m3 == pytest.approx(1e-3, rel=1e-9)
    assert s.run.final_volume_m3 == pytest.approx(0.991e-3, rel=1e-9)
    # Every sample is above the high limit: one excursion of 10 samples lasting 10 s (log ends).
    assert len(s.excursions) == 1 and s.excursions[0].samples == 10
    assert s.excursions[0].duration_s == 10.0
    names = {n.what for n in s.not_computed}
    assert "wall_shear" in names and "tmp" not in names


@settings(max_examples=25, deadline=None)
@given(scale=st.sampled_from([("psi", 1.0), ("bar", 0.0689475729), ("kPa", 6.89475729)]),
       flow=st.sampled_from([("mL/min", 1.0), ("L/h", 0.06)]),
       cut=st.integers(min_value=2, max_value=18))  # fmt: skip
def test_unit_invariance_and_phase_additivity(
    tmp_path_factory: pytest.TempPathFactory,
    scale: tuple[str, float],
    flow: tuple[str, float],
    cut: int,
) -> None:
    tmp = tmp_path_factory.mktemp("inv")
    lines = []
    for i in range(20):
        pf = (10 + math.sin(i)) * scale[1]
        q = (60 + 5 * math.cos(i)) * flow[1]
        lines.append(f"2026-11-03T08:00:{i:02d}+00:00,{'a' if i < cut else 'b'},{pf:.9f},"
                     f"{8 * scale[1]:.9f},{1 * scale[1]:.9f},{q:.9f},{1000 - i}")  # fmt: skip
    mapping = MAPPING.replace('"psi"', f'"{scale[0]}"').replace('"mL/min"', f'"{flow[0]}"')
    s = summarize(read(write(tmp, lines), mapping))
    ref_lines = [
        f"2026-11-03T08:00:{i:02d}+00:00,{'a' if i < cut else 'b'},{10 + math.sin(i):.9f},8,1,"
        f"{60 + 5 * math.cos(i):.9f},{1000 - i}"
        for i in range(20)
    ]
    ref = summarize(read(write(tmp_path_factory.mktemp("ref"), ref_lines)))
    assert s.run.permeate_volume_m3 == pytest.approx(ref.run.permeate_volume_m3, rel=1e-8)
    assert s.run.stats["tmp"].mean == pytest.approx(ref.run.stats["tmp"].mean, rel=1e-8)
    # Phase integrals add up to the run's (each phase closes on the next one's first sample).
    total = sum(p.permeate_volume_m3 for p in s.phases)  # type: ignore[misc]
    assert total == pytest.approx(s.run.permeate_volume_m3, rel=1e-12)
    assert sum(p.duration_s for p in s.phases) == pytest.approx(s.run.duration_s)


def test_record_round_trip(tmp_path: Path) -> None:
    import json

    from ledger.runs.actuals import Summary

    s = summarize(read(write(tmp_path, rows())), ranges=[Range("tmp", "tmp", None, 1.0)])
    again = Summary.from_record(json.loads(json.dumps(s.to_record())))
    assert again == s
