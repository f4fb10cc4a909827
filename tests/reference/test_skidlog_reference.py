"""`log summarize` against skid logs with known truth from an independent simulator.

The logs are generated at test time into a temporary folder by tests/reference/skidsim.py,
which imports nothing from fluxledger and computes its truth in closed form. Tolerances: 0.5 %
for durations, permeate volume, diavolumes, concentration factor and mean TMP (the issue's
acceptance); excursions must all be found, none spurious, durations within one sample.
"""

from __future__ import annotations

import json
from datetime import datetime
from pathlib import Path

import pytest
from typer.testing import CliRunner

from ledger.cli.main import app
from ledger.units import registry
from tests.reference.skidsim import CASES, Case, generate

REL = 0.005  # the 0.5 %


def si(q: dict[str, float], unit: str) -> float:
    return float(registry().Quantity(q["value"], q["unit"]).to(unit).magnitude)


def summarize(truth: dict[str, object]) -> dict[str, object]:
    args = ["log", "summarize", str(truth["csv"]), "--mapping", str(truth["mapping"]),
            "--limits", str(truth["limits"]), "--json"]  # fmt: skip
    for w in truth["windows"]:  # type: ignore[attr-defined]
        args += ["--phase", w]
    result = CliRunner().invoke(app, args)
    assert result.exit_code == 0, (result.stdout, result.stderr)
    return json.loads(result.stdout)  # type: ignore[no-any-return]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.name)
def test_actuals_agree_with_the_simulators_truth(case: Case, tmp_path: Path) -> None:
    truth = generate(case, tmp_path)
    out = summarize(truth)
    phases = out["phases"]
    assert [p["phase"] for p in phases] == ["concentrate", "diafilter", "concentrate_2"]
    for i, p in enumerate(phases):
        # Durations: the simulator's phase lengths (exact by construction).
        assert si(p["duration"], "s") == pytest.approx(truth["durations"][i], rel=REL)
        # Permeate: closed-form ∫Qp dt of each phase (balance noise 0.05 g ≪ 0.5 %).
        assert si(p["permeate_volume"], "m**3") == pytest.approx(truth["permeate"][i], rel=REL)
        # Mean TMP: closed-form time average of c0 + c1·sin(ωt) plus the spike's plateau.
        tmp = si(p["channels"]["tmp"]["mean"], "Pa")
        assert tmp == pytest.approx(truth["mean_tmp"][i], rel=REL)
        # Volumes and factor from the mass balance dV/dt = −Qp (level noise 0.5 mL, line fit).
        _, end = truth["volumes"][i]
        assert si(p["final_volume"], "m**3") == pytest.approx(end, rel=REL)
        assert p["concentration_factor"] == pytest.approx(truth["factor"][i], rel=REL)
    # Diavolumes: buffer added (= permeate at constant volume) over the working volume.
    assert phases[1]["diavolumes"] == pytest.approx(truth["diavolumes"], rel=REL)
    run = out["run"]
    assert si(run["duration"], "s") == pytest.approx(sum(truth["durations"]), rel=REL)
    assert si(run["permeate_volume"], "m**3") == pytest.approx(truth["run_permeate"], rel=REL)
    assert run["concentration_factor"] == pytest.approx(truth["run_factor"], rel=REL)
    assert si(run["channels"]["tmp"]["mean"], "Pa") == pytest.approx(truth["run_mean_tmp"], rel=REL)


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.name)
def test_every_excursion_is_found_with_its_duration(case: Case, tmp_path: Path) -> None:
    truth = generate(case, tmp_path)
    out = summarize(truth)
    found = out["excursions"]
    expected = truth["excursions"]
    assert len(found) == len(expected), found  # none missed, none spurious
    start = datetime.fromisoformat(str(truth["start"]))
    step = float(truth["step_s"])  # type: ignore[arg-type]
    for want in expected:  # type: ignore[attr-defined]
        got = next(e for e in found if e["channel"] == want["channel"])
        offset = (datetime.fromisoformat(got["start"]) - start).total_seconds()
        assert abs(offset - want["start_s"]) <= step
        assert abs(si(got["duration"], "s") - want["duration_s"]) <= step
        assert got["samples"] == want["samples"]
