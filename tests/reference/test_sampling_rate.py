"""A phase's start and end values do not depend on how often the skid samples.

The same simulated run (tests/reference/skidsim.py: truth from its continuous model, never
from the samples: the exponential-integral closed form of the concentration ODE with brentq,
closed-form permeate and buffer volumes, scipy.integrate.quad time averages) is written at
1 s, 10 s and 60 s sampling and summarized by `fluxledger log summarize`. Each rate must reach
the truth within the issue's 0.5 % (diavolumes of a phase without a real wash within
0.005 DV), and the rates must agree with each other within 0.5 %.

The lab-scale runs of skidsim lose 7 to 12 % of their volume per minute at the end of a
concentration (the pilot and plant runs 3 to 4.4 %). Sampled once a minute, a phase's last
sample lies one interval before its end, the end value is extrapolated over that minute, and
on the lab runs it misses the curved V(t) by 0.3 to 0.9 % (measured); skidsim's design check,
which asks the agreed definition for 0.25 %, refuses those cases, so they are checked at 1 s
and 10 s only. The pilot and plant runs are checked at all three rates.

A last case puts a 10 min water flush with the reservoir reading 0 L right before the first
concentration: the old rule (a line through the first or last 30 samples) misses there by far
more than 0.5 % at 60 s sampling, the time window does not.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable
from itertools import combinations
from typing import Any

import numpy as np
import pytest
from typer.testing import CliRunner

from ledger.cli.main import app
from ledger.errors import DomainError
from ledger.runs.actuals import Geometry, Summary, summarize
from ledger.runs.skidlog import SkidLog
from tests.reference import skidsim

RATES = (1.0, 10.0, 60.0)
FINE_RATES = (1.0, 10.0)
PILOT = ("pilot-dublin-dst-2s", "dayfirst-kpa-balance-5s", "plant-degf-windows-5s")
LAB = ("bench-psi-iso-1s", "windows-iso-z-1s", "offset-ends-outside-2s")
RUNS = [(c, dt) for c in PILOT for dt in RATES] + [(c, dt) for c in LAB for dt in FINE_RATES]
TOLERANCE = skidsim.TOLERANCE  # the 0.5 %
# (JSON key, SI unit, truth key); None: a plain number
VOLUMES = (
    ("initial_volume", "m**3", "initial_volume_m3"),
    ("final_volume", "m**3", "final_volume_m3"),
    ("permeate_volume", "m**3", "permeate_volume_m3"),
    ("concentration_factor", None, "concentration_factor"),
    ("diavolumes", None, "diavolumes"),
)

Summarized = Callable[[str, float], tuple[dict[str, Any], dict[str, Any]]]


def _ids(run: tuple[str, float]) -> str:
    return f"{run[0]}-{run[1]:g}s"


@pytest.fixture(scope="module")
def summarized(tmp_path_factory: pytest.TempPathFactory) -> Summarized:
    """(truth, `log summarize --json` output) of a case at a sampling interval, once each."""
    runner = CliRunner()
    done: dict[tuple[str, float], tuple[dict[str, Any], dict[str, Any]]] = {}

    def run(case: str, dt: float) -> tuple[dict[str, Any], dict[str, Any]]:
        if (case, dt) not in done:
            spec = skidsim.at_interval(case, dt)
            # generate() runs skidsim's design checks: the agreed definitions in plain numpy
            # reach the truth within 0.25 % at this rate, and no sample leaves a limit
            paths = skidsim.generate(spec, 1, tmp_path_factory.mktemp(spec.name))
            result = runner.invoke(app, ["log", "summarize", *paths.args])
            assert result.exit_code == 0, (result.stdout, result.stderr, result.exception)
            truth = json.loads(paths.truth.read_text(encoding="utf-8"))
            assert truth["sample_interval_s"] == dt
            done[case, dt] = truth, json.loads(result.stdout)
        return done[case, dt]

    return run


def _value(actuals: dict[str, Any], key: str, unit: str | None) -> float:
    got = actuals[key]
    assert got is not None, key
    value = skidsim.q_si(got, unit) if unit else float(got)
    assert value is not None
    return value


def _scopes(
    truth: dict[str, Any], result: dict[str, Any]
) -> list[tuple[str, dict[str, Any], dict[str, Any]]]:
    assert [p["phase"] for p in result["phases"]] == [p["phase"] for p in truth["phases"]]
    return [("run", truth["run"], result["run"])] + [
        (f"{i}:{want['phase']}", want, got)
        for i, (want, got) in enumerate(zip(truth["phases"], result["phases"], strict=True))
    ]


@pytest.mark.parametrize("run", RUNS, ids=_ids)
def test_each_rate_reaches_the_truth(run: tuple[str, float], summarized: Summarized) -> None:
    truth, result = summarized(*run)
    # durations, start and end times, permeate volume, diavolumes, concentration factor and
    # mean TMP against the truth's sources (skidsim.SOURCES), as in test_skidlog_reference
    checks, _, spurious = skidsim.compare(truth, result)
    failed = [str(c) for c in checks if not c.ok]
    assert not failed, "\n".join(failed)
    assert spurious == []  # the rate-varied cases inject no excursion
    # the start and end volumes themselves: exponential-integral closed form (brentq)
    bad = []
    for scope, want, got in _scopes(truth, result):
        for key, unit, truth_key in VOLUMES[:2]:
            value = _value(got, key, unit)
            err = abs(value - want[truth_key]) / want[truth_key]
            if err > TOLERANCE:
                bad.append(f"{scope} {key}: {value:.6g} vs truth {want[truth_key]:.6g} ({err:.2%})")
    assert not bad, "\n".join(bad)


@pytest.mark.parametrize("case", [*PILOT, *LAB])
def test_the_rates_agree_with_each_other(case: str, summarized: Summarized) -> None:
    rates = RATES if case in PILOT else FINE_RATES
    results = {dt: summarized(case, dt) for dt in rates}
    truth = results[rates[0]][0]
    bad = []
    for a, b in combinations(rates, 2):
        for (scope, want, got_a), (_, _, got_b) in zip(
            _scopes(*results[a]), _scopes(*results[b]), strict=True
        ):
            for key, unit, truth_key in VOLUMES:
                x, y = _value(got_a, key, unit), _value(got_b, key, unit)
                # relative, or absolute DV for a phase without a real wash (skidsim's measure)
                _, measure = skidsim.relative_error(key, want[truth_key], y)
                diff = abs(x - y) if measure == "abs DV" else abs(x - y) / abs(x)
                if diff > TOLERANCE:
                    bad.append(f"{scope} {key}: {x:.6g} at {a:g} s, {y:.6g} at {b:g} s")
    assert not bad, "\n".join(bad)
    # every rate samples the same run: its truth, from the continuous model, is the same
    for dt in rates[1:]:
        assert results[dt][0]["phases"] == truth["phases"]
        assert results[dt][0]["run"] == truth["run"]


# --- a flush at 0 L right before the concentration --------------------------------------------

FLUSH_S = 600.0  # a whole number of samples at every rate
FLUSH = {  # SI: the module flushed with water from a line, the reservoir empty
    "feed_pressure": 0.35e5,
    "retentate_pressure": 0.25e5,
    "permeate_pressure": 0.05e5,
    "feed_flow": 2.0e-3 / 60,
    "permeate_flow": 0.8e-3 / 60,
    "retentate_volume": 0.0,
}


def flushed_log(dt: float) -> tuple[SkidLog, skidsim.Case, skidsim.Sampled]:
    """The pilot run sampled every ``dt`` s, after a 10 min flush reading 0 L; the permeate
    from the flow meter (the flush water goes to drain, past the meter, not to the balance)."""
    spec = skidsim.at_interval("pilot-dublin-dst-2s", dt)
    sampled = skidsim.simulate(spec, 1)
    k = round(FLUSH_S / dt)
    rng = np.random.default_rng(5)
    channels: dict[str, np.ndarray] = {}
    for name, value in FLUSH.items():
        flow = skidsim.NOISE["flow_rel"] * value
        noise = {"retentate_volume": 0.0, "feed_flow": flow, "permeate_flow": flow}.get(
            name, skidsim.NOISE["pressure_pa"]
        )
        channels[name] = np.r_[value + rng.normal(0.0, noise, k), sampled.si[name]]
    channels["temperature"] = np.r_[np.full(k, sampled.si["temperature"][0]),
                                    sampled.si["temperature"]]  # fmt: skip
    labels = np.array([s.name for s in spec.process.steps], dtype=object)[sampled.phase]
    log = SkidLog(
        source="flushed.csv",
        sha256=None,
        rows=k + sampled.t.size,
        start=spec.fmt.start_utc,
        time_s=np.r_[np.arange(k) * dt, FLUSH_S + sampled.t],
        channels=channels,
        phases=np.r_[np.array(["FLUSH"] * k, dtype=object), labels],
    )
    return log, spec, sampled


def _geometry(spec: skidsim.Case) -> Geometry:
    p = spec.process
    return Geometry(p.area_m2, p.fibers, p.lumen_diameter_m)


def _conc_truth(sampled: skidsim.Sampled) -> dict[str, float]:
    """The first concentration's truth from skidsim's closed forms; flux k(t) ln(Cg V/M)."""
    m = sampled.model
    t1, t2 = float(m.bounds[0]), float(m.bounds[1])
    v1, v2 = m.v_start[0], m.v_start[1]
    flux = [float(m.permeate_flow(np.array([t]), np.array([v]))[0]) / m.p.area_m2
            for t, v in ((t1, v1), (t2, v2))]  # fmt: skip
    return {"initial": v1, "final": v2, "permeate": m.perm_start[1], "cf": v1 / v2,
            "flux_start": flux[0], "flux_end": flux[1]}  # fmt: skip


def _conc_got(s: Summary) -> dict[str, float]:
    p = s.phases[1]
    assert (p.phase, s.phases[0].phase) == ("CONC", "FLUSH")
    values = {"initial": p.initial_volume_m3, "final": p.final_volume_m3,
              "permeate": p.permeate_volume_m3, "cf": p.concentration_factor,
              "flux_start": p.flux_start_m_s, "flux_end": p.flux_end_m_s,
              "diavolumes": p.diavolumes}  # fmt: skip
    assert all(v is not None for v in values.values())
    return {k: float(v) for k, v in values.items()}  # type: ignore[arg-type]


def sample_count_rule(log: SkidLog, first: bool, i0: int, i1: int, window: int) -> float:
    """The old definition, for contrast: the line (numpy.polyfit) through the first or last
    ``window`` samples of i0..i1-1, at the first sample or at the sample after the last."""
    t, v = log.time_s, log.channels["retentate_volume"]
    m = min(window, i1 - i0)
    sl = slice(i0, i0 + m) if first else slice(i1 - m, i1)
    at = t[i0] if first else t[min(i1, log.rows - 1)]
    return float(np.polyval(np.polyfit(t[sl], v[sl], 1), at))


@pytest.mark.parametrize("dt", RATES)
def test_a_flush_at_zero_before_the_concentration(dt: float) -> None:
    log, spec, sampled = flushed_log(dt)
    s = summarize(log, _geometry(spec))
    want, got = _conc_truth(sampled), _conc_got(s)
    for key in ("initial", "final", "permeate", "cf"):
        assert got[key] == pytest.approx(want[key], rel=TOLERANCE), key
    # a pure concentration: no buffer, so 0 DV within 0.005 DV (skidsim.relative_error)
    assert abs(got["diavolumes"]) <= TOLERANCE
    # flux at the boundaries: flow-meter noise 0.3 % a sample; at 60 s the end value rests on
    # two samples extrapolated one interval (sd sqrt(5) x 0.3 % = 0.7 %): 3 sd = 2 %
    for key in ("flux_start", "flux_end"):
        assert got[key] == pytest.approx(want[key], rel=0.02), key
    # the run's start values come from the flush alone: it read 0 L, water flux 0.8 L/min
    assert s.run.initial_volume_m3 == 0.0
    water = FLUSH["permeate_flow"] / spec.process.area_m2
    assert s.run.flux_start_m_s == pytest.approx(water, rel=0.02)
    assert s.run.final_volume_m3 == pytest.approx(sampled.model.v_end, rel=TOLERANCE)
    if dt == 60.0:  # the windows hold under two samples: the summary says so
        assert any("fewer than two samples within 30 s" in a for a in s.assumptions)
    else:
        assert not any("fewer than two samples" in a for a in s.assumptions)


def test_the_flush_case_defeats_the_sample_count_rule_at_60_s() -> None:
    # The same log under the old definition (30 samples), in plain numpy: the run's start
    # line reaches from the flush (0 L) into the concentration, and the concentration's end
    # line spans 30 min of a curved V(t); both miss the truth by far more than 0.5 %.
    log, _, sampled = flushed_log(60.0)
    want = _conc_truth(sampled)
    k = round(FLUSH_S / 60.0)
    conc_end = k + int(np.count_nonzero(sampled.phase == 0))
    old_final = sample_count_rule(log, False, k, conc_end, 30)
    assert abs(old_final / want["final"] - 1) > 5 * TOLERANCE
    old_run_start = sample_count_rule(log, True, 0, log.rows, 30)
    # truth: the flush's 0 L; off by more than 0.5 % of the volume loaded next
    assert abs(old_run_start) > TOLERANCE * want["initial"]
    new = summarize(log)
    assert new.run.initial_volume_m3 == 0.0
    assert new.phases[1].final_volume_m3 == pytest.approx(want["final"], rel=TOLERANCE)


def test_the_window_length_can_be_set() -> None:
    # at 10 s sampling a 60 s volume window holds 6-7 samples instead of 3-4: the estimate moves
    # (it is a different line) but stays within the tolerance; a window under one sampling
    # interval falls back to the two nearest samples and says so
    log, spec, sampled = flushed_log(10.0)
    want = _conc_truth(sampled)
    base = summarize(log, _geometry(spec))
    wide = summarize(log, _geometry(spec), end_window_s=60.0, flux_window_s=120.0)
    narrow = summarize(log, _geometry(spec), end_window_s=5.0)
    assert wide.phases[1].final_volume_m3 != base.phases[1].final_volume_m3
    for s in (base, wide, narrow):
        assert _conc_got(s)["final"] == pytest.approx(want["final"], rel=TOLERANCE)
    assert any("within 5 s of the boundary" in a for a in narrow.assumptions)
    assert not any("fewer than two samples" in a for a in wide.assumptions)
    with pytest.raises(DomainError) as err:
        summarize(log, end_window_s=0.0)
    assert err.value.field == "end_window_s"
    with pytest.raises(DomainError) as err:
        summarize(log, flux_window_s=math.nan)
    assert err.value.field == "flux_window_s"
