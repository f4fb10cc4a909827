"""`fluxledger demo` builds the invented scenario and writes its outputs."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import pytest

from tests.cli.conftest import Outcome

Run = Callable[..., Outcome]


def test_demo_writes_every_step(cli: Run, tmp_path: Path) -> None:
    out = cli("demo", "--out", str(tmp_path / "demo"), "--json")
    assert out.exception is None and out.code == 0, out.stderr
    summary = out.json()
    assert len(summary["steps"]) == 10
    assert all(s["exit_code"] == 0 for s in summary["steps"])
    data = json.loads((tmp_path / "demo" / "bench_calculations.json").read_text())
    # Baseline points of QMB-0142 (invented) lie on about 900 LMH/bar.
    nwp = data["baseline_nwp"]["report"]["results"]["nwp"]
    assert nwp["unit"] == "L/(m^2*h*bar)" and nwp["value"] == pytest.approx(902, abs=5)
    assert data["integrity_decay"]["report"]["verdict"] == "PASS"
    text = (tmp_path / "demo" / "bench_session.txt").read_text()
    assert "invented" in text and "validated procedures" in text


def test_demo_human_output_lists_files(cli: Run, tmp_path: Path) -> None:
    out = cli("demo", "--out", str(tmp_path))
    assert out.code == 0
    assert "Wrote:" in out.stdout and "bench_session.txt" in out.stdout


def test_demo_refuses_a_folder_without_the_scenario(cli: Run, tmp_path: Path) -> None:
    out = cli("demo", "--out", str(tmp_path / "o"), "--samples", str(tmp_path))
    assert out.code == 2 and "--samples" in out.stderr
    assert not (tmp_path / "o").exists()
