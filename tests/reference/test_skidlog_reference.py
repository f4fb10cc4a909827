"""`fluxledger log summarize` on skid logs it has never seen, against known ground truth.

The logs are generated at test time into a temporary folder by tests/reference/skidsim.py, an
independent simulator that imports nothing from fluxledger (six invented skid formats: see
``skidsim.CASES``; each with a few noise seeds). Its truth comes from the continuous model, not
from the samples: closed forms of the gel-polarization flux law (the exponential-integral
solution of the concentration ODE), scipy.integrate.quad time averages, and the injected
excursions. The first tests check the simulator itself against independent numerical
integration (solve_ivp, quad); the rest run the CLI and require, as the issue does: durations,
permeate volume, diavolumes, concentration factor and mean TMP within 0.5 % of the truth
(diavolumes of a phase without a real wash, truth < 0.5 DV, within 0.005 DV: 0.5 % of one
diavolume), every injected excursion found with its start and duration within one sample, and
no spurious excursion.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy import integrate
from typer.testing import CliRunner

from ledger.cli.main import app
from tests.reference import skidsim
from tests.reference.skidsim import CASES

SEEDS = (1, 2, 3)
RUNS = [(case, seed) for case in CASES for seed in SEEDS]


def _ids(run: tuple[str, int]) -> str:
    return f"{run[0]}-s{run[1]}"


Summarized = Callable[[str, int], tuple[dict[str, Any], dict[str, Any], str]]


@pytest.fixture(scope="module")
def summarized(tmp_path_factory: pytest.TempPathFactory) -> Summarized:
    """(truth, `log summarize --json` output, SHA-256 of the CSV as written) of a case,
    generated and summarized once per module."""
    runner = CliRunner()
    done: dict[tuple[str, int], tuple[dict[str, Any], dict[str, Any], str]] = {}

    def run(case: str, seed: int) -> tuple[dict[str, Any], dict[str, Any], str]:
        if (case, seed) not in done:
            paths = skidsim.generate(case, seed, tmp_path_factory.mktemp(f"{case}-s{seed}"))
            written = hashlib.sha256(paths.csv.read_bytes()).hexdigest()
            result = runner.invoke(app, ["log", "summarize", *paths.args])
            assert result.exit_code == 0, (result.stdout, result.stderr, result.exception)
            assert hashlib.sha256(paths.csv.read_bytes()).hexdigest() == written  # unchanged
            truth = json.loads(paths.truth.read_text(encoding="utf-8"))
            done[case, seed] = truth, json.loads(result.stdout), written
        return done[case, seed]

    return run


# --- the simulator against independent integration ------------------------------------------


def _model(case: str) -> skidsim.Model:
    spec = skidsim.case_spec(case, 1)
    return skidsim.Model(spec.process, spec.fmt.dt_s)


@pytest.mark.parametrize("case", CASES)
def test_simulator_volumes_match_solve_ivp(case: str) -> None:
    # Independent computation: scipy.integrate.solve_ivp (LSODA, rtol 1e-12) of
    # dV/dt = -A k0 e^(-t/tau) ln(Cg V/M) through each concentration phase, against the
    # simulator's exponential-integral closed form (brentq) and its Newton-sampled V(t).
    m = _model(case)
    for i, step in enumerate(m.p.steps):
        if step.kind != "concentrate":
            continue
        t1, t2 = float(m.bounds[i]), float(m.bounds[i + 1])
        sol = integrate.solve_ivp(m.rhs, (t1, t2), [m.v_start[i]], method="LSODA",
                                  rtol=1e-12, atol=1e-16, dense_output=True)  # fmt: skip
        v_end = m.v_end if i + 1 == len(m.p.steps) else m.v_start[i + 1]
        assert v_end == pytest.approx(sol.y[0, -1], rel=1e-8)
        t = np.linspace(t1, t2, 50)[:-1]
        np.testing.assert_allclose(m.volume(t), sol.sol(t)[0], rtol=1e-8)


@pytest.mark.parametrize("case", CASES)
def test_simulator_permeate_and_mass_balance_match_quad(case: str) -> None:
    # Independent computation: scipy.integrate.quad of the permeate flow Qp(t) = A k(t) u(V)
    # (V from solve_ivp in concentration phases; the valve ramp in recovery) against the
    # simulator's closed-form phase volumes; then the retentate mass balance
    # V0 - Vf = permeate - buffer, with buffer = quad of Qp over the constant-volume phases.
    m = _model(case)
    spec = skidsim.case_spec(case, 1)
    truth = skidsim.truth_of(spec, skidsim.simulate(spec, 1))
    total = buffer = 0.0
    for i, step in enumerate(m.p.steps):
        t1, t2 = float(m.bounds[i]), float(m.bounds[i + 1])
        if step.kind == "concentrate":
            sol = integrate.solve_ivp(m.rhs, (t1, t2), [m.v_start[i]], method="LSODA",
                                      rtol=1e-12, atol=1e-16, dense_output=True)  # fmt: skip

            def qp(t: float, sol: Any = sol) -> float:
                return float(-m.rhs(t, sol.sol(t)[0]))
        else:

            def qp(t: float) -> float:
                arr = np.array([t])
                return float(m.permeate_flow(arr, m.volume(arr))[0])

        points = [t1 + step.ramp_s] if step.kind == "recover" else None
        perm, _ = integrate.quad(qp, t1, t2, points=points, epsrel=1e-12, limit=500)
        assert truth["phases"][i]["permeate_volume_m3"] == pytest.approx(perm, rel=1e-8)
        total += perm
        if step.kind != "concentrate":
            buffer += perm
    assert truth["run"]["permeate_volume_m3"] == pytest.approx(total, rel=1e-8)
    assert m.p.v0_m3 - m.v_end == pytest.approx(total - buffer, rel=1e-9)


@pytest.mark.parametrize("case", CASES)
def test_simulator_mean_tmp_quad_matches_closed_form(case: str) -> None:
    # Independent computation: the exact integral of the TMP model — trapezoid over the knots
    # of its piecewise-linear part (exact for a linear function), a P/(2 pi) (cos - cos) for
    # the pulsation, and each excursion rectangle's (value x width - base integral) — against
    # the truth's scipy.integrate.quad.
    spec = skidsim.case_spec(case, 1)
    sampled = skidsim.simulate(spec, 1)
    truth = skidsim.truth_of(spec, sampled)
    m, dt = sampled.model, spec.fmt.dt_s
    a_p, period = m.p.pulsation_pa, m.p.pulsation_period_s

    def base(x: float, y: float) -> float:
        ts = np.unique(np.r_[x, m.knots_t[(m.knots_t > x) & (m.knots_t < y)], y])
        linear = float(np.trapezoid(np.interp(ts, m.knots_t, m.knots_p), ts))
        w = 2 * np.pi / period
        return linear + a_p / w * (np.cos(w * x) - np.cos(w * y))

    limits = {lim.name: lim for lim in spec.limits}
    rects = [((i0 - 0.5) * dt, (i0 + k - 0.5) * dt, inj.value)
             for inj, (name, i0, k) in zip(spec.injected, sampled.excursion_rows, strict=True)
             if limits[name].channel == "tmp"]  # fmt: skip
    for ph in [*truth["phases"], truth["run"]]:
        x, y = ph["start_s"], ph["end_s"]
        exact = base(x, y) + sum(v * (b - a) - base(a, b) for a, b, v in rects if x <= a < y)
        assert ph["tmp_mean_pa"] == pytest.approx(exact / (y - x), rel=1e-9)


@pytest.mark.parametrize("run", RUNS, ids=_ids)
def test_reference_cases_are_fair(run: tuple[str, int], tmp_path: Path) -> None:
    # The agreed definitions applied in plain numpy to the written, noisy CSV reach the truth
    # within 0.25 % (half the tolerance), and noise makes or hides no excursion.
    case, seed = run
    spec = skidsim.case_spec(case, seed)
    sampled = skidsim.simulate(spec, seed)
    written = skidsim.write_csv(spec, sampled, tmp_path / "log.csv")
    truth = skidsim.truth_of(spec, sampled)
    assert skidsim.check_case(spec, sampled, written, truth) == []


# --- `log summarize` against the truth ------------------------------------------------------


@pytest.mark.parametrize("run", RUNS, ids=_ids)
def test_actuals_agree_with_truth(run: tuple[str, int], summarized: Summarized) -> None:
    truth, result, sha256 = summarized(*run)
    checks, _, _ = skidsim.compare(truth, result)
    # Each check carries its truth's source (skidsim.SOURCES): durations and start/end times
    # from the simulator's clock; permeate volume from the closed forms of the flux law
    # (exponential-integral solution, brentq); diavolumes = closed-form buffer / quad mean
    # volume; concentration factor from the closed-form volumes; mean TMP from
    # scipy.integrate.quad of the continuous TMP(t).
    assert {c.quantity for c in checks} >= set(skidsim.CHECKED)
    failed = [str(c) for c in checks if not c.ok]
    assert not failed, "\n".join(failed)
    assert result["rows"] == truth["rows"]
    # The recorded digest is hashlib's SHA-256 of the file as the simulator wrote it.
    assert result["sha256"] == sha256


@pytest.mark.parametrize("run", RUNS, ids=_ids)
def test_every_excursion_found_with_its_duration(
    run: tuple[str, int], summarized: Summarized
) -> None:
    truth, result, _ = summarized(*run)
    _, excursions, spurious = skidsim.compare(truth, result)
    # Truth: the injected rectangles (k samples from t_i, lasting k dt; worst = the value held,
    # within 5 noise sd). Start and duration within one sample, the side right, none spurious.
    assert len(excursions) == len(truth["excursions"]) > 0
    bad = [str(e) for e in excursions if not e.ok]
    assert not bad, "\n".join(bad)
    assert spurious == []
