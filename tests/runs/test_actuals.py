"""Actuals of a skid log against analytic cases, independent integration, and the definitions
in ledger/runs/actuals.py; excursions, phases, not-computed reasons, the record round trip."""

from __future__ import annotations

import json
import math
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import trapezoid

from ledger.runs.actuals import (
    ChannelLimit,
    Geometry,
    PhaseWindow,
    Summary,
    summarize,
    summary_json,
)
from ledger.runs.mapping import parse_mapping
from ledger.runs.skidlog import SkidLog, read_log

T0 = datetime(2026, 6, 1, 8, 0, tzinfo=UTC)


def make(t: object, phases: list[str] | None = None, **channels: object) -> SkidLog:
    time_s = np.asarray(t, dtype=np.float64)
    return SkidLog(
        source="log.csv",
        sha256="0" * 64,
        rows=time_s.size,
        start=T0,
        time_s=time_s,
        channels={k: np.asarray(v, dtype=np.float64) for k, v in channels.items()},
        phases=None if phases is None else np.array(phases, dtype=object),
    )


def test_a_linear_ramp_of_flow_integrates_to_its_volume() -> None:
    # analytic: ∫0^T (a + b·t) dt = a·T + b·T²/2; the trapezoid rule is exact for linear data,
    # also on an uneven time grid
    t = np.cumsum(np.r_[0.0, np.random.default_rng(3).uniform(0.5, 1.5, 999)])
    a, b = 2e-6, 3e-9
    s = summarize(make(t, permeate_flow=a + b * t))
    big_t = t[-1]
    assert s.run.permeate_volume_m3 == pytest.approx(a * big_t + b * big_t**2 / 2, rel=1e-12)
    assert s.run.permeate_source == "permeate_flow"
    assert s.run.duration_s == pytest.approx(big_t)
    # analytic mean of a line over [0, T]: a + b·T/2
    assert s.run.stats["permeate_flow"].mean == pytest.approx(a + b * big_t / 2, rel=1e-12)


def test_the_mean_of_a_sinusoid_over_whole_periods() -> None:
    # analytic: the mean of c + A·sin(2πt/P) over whole periods is c; sampled at P/400 the
    # extremes c ± A are samples (t = P/4, 3P/4)
    t = np.arange(0.0, 1201.0)
    c, amp, period = 1.5e5, 2e4, 400.0
    s = summarize(make(t, feed_pressure=c + amp * np.sin(2 * np.pi * t / period)))
    st_ = s.run.stats["feed_pressure"]
    assert st_.mean == pytest.approx(c, rel=1e-12)
    assert st_.max == pytest.approx(c + amp, rel=1e-12)
    assert st_.min == pytest.approx(c - amp, rel=1e-12)


def test_phases_follow_the_label_column_and_recur_in_order() -> None:
    # definitions: a phase runs from its first sample to the next phase's first sample
    labels = ["a", "a", "b", "b", "b", "a"]
    x = [1.0, 2.0, 9.0, 3.0, 4.0, 5.0]
    s = summarize(make(range(6), labels, feed_pressure=x))
    assert [(p.phase, p.samples, p.duration_s) for p in s.phases] == [
        ("a", 2, 2.0),
        ("b", 3, 3.0),
        ("a", 1, 0.0),  # the last phase ends at the last sample
    ]
    # max over the phase's own samples: the 9 of the first b sample is not the a phase's
    assert s.phases[0].stats["feed_pressure"].max == 2.0
    assert s.phases[1].stats["feed_pressure"].max == 9.0
    # time-weighted mean of the first a phase: trapezoid over samples 0..2 = (1.5 + 5.5)/2
    assert s.phases[0].stats["feed_pressure"].mean == pytest.approx(3.5)
    assert s.phases[0].end == T0 + timedelta(seconds=2)


@settings(max_examples=40, deadline=None)
@given(
    st.lists(
        st.tuples(st.sampled_from("abc"), st.floats(0.1, 10.0), st.floats(0.0, 1e-5)),
        min_size=2,
        max_size=60,
    )
)
def test_phase_integrals_add_up_to_the_run(samples: list[tuple[str, float, float]]) -> None:
    labels = [s[0] for s in samples]
    t = np.cumsum([0.0] + [s[1] for s in samples[1:]])
    q = np.array([s[2] for s in samples])
    s = summarize(make(t, labels, permeate_flow=q))
    total = sum(p.permeate_volume_m3 or 0.0 for p in s.phases)
    assert s.run.permeate_volume_m3 == pytest.approx(trapezoid(q, t), rel=1e-9, abs=1e-18)
    assert total == pytest.approx(s.run.permeate_volume_m3, rel=1e-9, abs=1e-18)
    assert sum(p.duration_s for p in s.phases) == pytest.approx(s.run.duration_s)
    assert sum(p.samples for p in s.phases) == s.rows
    # each phase against scipy's trapezoid over its samples and the next phase's first one
    i0 = 0
    for p in s.phases:
        j = min(i0 + p.samples, s.rows - 1)
        expect = trapezoid(q[i0 : j + 1], t[i0 : j + 1])
        assert p.permeate_volume_m3 == pytest.approx(expect, rel=1e-9, abs=1e-18)
        i0 += p.samples


def test_constant_volume_diafiltration_counts_its_diavolumes() -> None:
    # by hand: at constant volume V the buffer added equals the permeate Q·T, so
    # N = Q·T / V = 2e-7 m³/s · 3000 s / 3e-4 m³ = 2.0, and the concentration factor is 1
    t = np.arange(0.0, 3001.0)
    s = summarize(
        make(t, retentate_volume=np.full(t.size, 3e-4), permeate_flow=np.full(t.size, 2e-7))
    )
    assert s.run.permeate_volume_m3 == pytest.approx(6e-4, rel=1e-12)
    assert s.run.diavolumes == pytest.approx(2.0, rel=1e-12)
    assert s.run.concentration_factor == pytest.approx(1.0, rel=1e-12)


def test_a_pure_concentration_has_no_diavolumes() -> None:
    # mass balance: V(t) = V0 - Q·t, so permeate + final - initial = 0 and CF = V0 / V(T);
    # 1.2 L to 0.3 L at 0.1 mL/s over 9000 s: CF = 4 (least squares is exact on a line)
    t = np.arange(0.0, 9001.0)
    v = 1.2e-3 - 1e-7 * t
    s = summarize(make(t, retentate_volume=v, permeate_flow=np.full(t.size, 1e-7)))
    assert s.run.initial_volume_m3 == pytest.approx(1.2e-3, rel=1e-12)
    assert s.run.final_volume_m3 == pytest.approx(0.3e-3, rel=1e-12)
    assert s.run.concentration_factor == pytest.approx(4.0, rel=1e-12)
    assert s.run.diavolumes == pytest.approx(0.0, abs=1e-9)


def test_end_volumes_are_a_least_squares_line_through_the_end_samples() -> None:
    # independent computation: numpy.polyfit through the samples within 30 s of the start and
    # the end; at 2 s sampling t = 0..30 s and t = 368..398 s, 16 samples each
    rng = np.random.default_rng(11)
    t = np.arange(0.0, 200.0) * 2.0
    v = 1e-3 - 1e-6 * t + rng.normal(0, 2e-6, t.size)
    s = summarize(make(t, retentate_volume=v))
    first = np.polyval(np.polyfit(t[:16], v[:16], 1), t[0])
    last = np.polyval(np.polyfit(t[-16:], v[-16:], 1), t[-1])
    assert s.run.initial_volume_m3 == pytest.approx(first, rel=1e-10)
    assert s.run.final_volume_m3 == pytest.approx(last, rel=1e-10)
    # a phase shorter than the 30 s window (18 s) uses all its samples, evaluated at its start
    # and at its end (the next phase's first sample, t = 20 s)
    labels = ["a"] * 10 + ["b"] * 190
    s = summarize(make(t, labels, retentate_volume=v))
    line = np.polyfit(t[:10], v[:10], 1)
    assert s.phases[0].initial_volume_m3 == pytest.approx(np.polyval(line, t[0]), rel=1e-10)
    assert s.phases[0].final_volume_m3 == pytest.approx(np.polyval(line, t[10]), rel=1e-10)


def test_the_balance_is_preferred_to_the_flow_meter() -> None:
    # by hand: 505 g collected at 1010 kg/m³ is 0.5 L, whatever the flow meter says
    t = np.arange(0.0, 11.0)
    log = make(t, permeate_mass=np.linspace(0.0, 0.505, 11), permeate_flow=np.full(11, 1.0))
    log.density_kg_m3 = 1010.0
    s = summarize(log)
    assert s.run.permeate_source == "permeate_mass"
    assert s.run.permeate_volume_m3 == pytest.approx(5e-4, rel=1e-12)


def test_flux_and_its_decline() -> None:
    # flux J = Qp/A; on a linear decline the end estimates are exact: 1 - J1/J0
    t = np.arange(0.0, 3601.0)
    area = 0.5
    j0, j1 = 30 / 3.6e6, 18 / 3.6e6  # 30 and 18 LMH in m/s (1 LMH = 1e-3 m / 3600 s)
    flux = j0 + (j1 - j0) * t / t[-1]
    s = summarize(make(t, permeate_flow=flux * area), Geometry(area_m2=area))
    assert s.run.flux_start_m_s == pytest.approx(j0, rel=1e-10)
    assert s.run.flux_end_m_s == pytest.approx(j1, rel=1e-10)
    assert s.run.flux_decline == pytest.approx(1 - 18 / 30, rel=1e-9)
    assert s.run.stats["flux"].mean == pytest.approx((j0 + j1) / 2, rel=1e-12)


def test_tmp_pressure_drop_and_wall_shear() -> None:
    n = 5
    log = make(
        range(n),
        feed_pressure=np.full(n, 2.0e5),
        retentate_pressure=np.full(n, 1.0e5),
        permeate_pressure=np.full(n, 0.2e5),
        feed_flow=np.full(n, 1e-5),
    )
    s = summarize(log, Geometry(fibers=100, lumen_diameter_m=1e-3))
    # TMP = (Pf + Pr)/2 - Pp = 1.3e5 Pa; ΔP = Pf - Pr = 1e5 Pa (definitions)
    assert s.run.stats["tmp"].mean == pytest.approx(1.3e5, rel=1e-12)
    assert s.run.stats["pressure_drop"].mean == pytest.approx(1.0e5, rel=1e-12)
    # Hagen–Poiseuille wall shear 32·(Q/N)/(π·D³) = 32·1e-7/(π·1e-9) = 3200/π 1/s
    assert s.run.stats["wall_shear"].mean == pytest.approx(3200 / math.pi, rel=1e-12)
    assert {"tmp", "pressure_drop", "wall_shear"}.isdisjoint(n.what for n in s.not_computed)


def test_what_cannot_be_computed_says_why() -> None:
    log = make(
        range(3),
        feed_pressure=[1.0, 2, 3],
        retentate_pressure=[1.0, 2, 3],
        permeate_flow=[1.0, 1, 1],
    )
    why = {n.what: n.why for n in summarize(log).not_computed}
    assert why["tmp"] == (
        "needs feed, retentate and permeate pressure; permeate_pressure is not mapped"
    )
    assert why["flux"] == "needs the membrane area (--area)"
    assert why["wall_shear"] == (
        "needs feed_flow, which is not mapped; needs the fiber count and lumen diameter "
        "(--fibers, --lumen-diameter)"
    )
    for metric in ("initial_volume", "final_volume", "concentration_factor", "diavolumes"):
        assert why[metric] == "needs retentate_volume, which is not mapped"
    assert "tmp" not in summarize(log).run.stats  # permeate pressure is never assumed 0
    only_time = summarize(make(range(3)))
    assert {n.what for n in only_time.not_computed} >= {"permeate_volume", "pressure_drop"}


def spiky(n: int, at: int, k: int, value: float, base: float = 1.0e5) -> np.ndarray:
    x = np.full(n, base)
    x[at : at + k] = value
    return x


def test_an_excursion_of_k_samples() -> None:
    # injected: 7 samples above the high limit at 1 Hz, the worst in the middle
    x = spiky(100, 40, 7, 1.5e5)
    x[43] = 1.8e5
    s = summarize(
        make(range(100), feed_pressure=x), ranges=[ChannelLimit("PF", "feed_pressure", None, 1.2e5)]
    )
    [e] = s.excursions
    assert (e.name, e.side, e.samples, e.limit, e.worst) == ("PF", "high", 7, 1.2e5, 1.8e5)
    assert e.start == T0 + timedelta(seconds=40)
    assert e.end == T0 + timedelta(seconds=47)  # the first sample back inside
    assert e.duration_s == 7.0


def test_an_excursion_at_the_end_of_the_log_lasts_its_samples() -> None:
    # definition: the last sample + one median interval, so 5 samples at 2 s last 10 s
    x = spiky(50, 45, 5, 0.5e5)
    s = summarize(
        make(np.arange(50) * 2.0, feed_pressure=x),
        ranges=[ChannelLimit("PF", "feed_pressure", 0.8e5, None)],
    )
    [e] = s.excursions
    assert (e.side, e.samples, e.duration_s, e.worst) == ("low", 5, 10.0, 0.5e5)


def test_a_range_of_one_phase_sees_only_its_samples() -> None:
    labels = ["a"] * 10 + ["b"] * 10
    x = np.full(20, 1.0e5)
    x[2:4] = 2e5  # in phase a: ignored by a range for b
    x[17:20] = 3e5  # in phase b, to the end of the log
    x[8:13] = 2.5e5  # across the a -> b boundary: only samples 10..12 count for b
    r = ChannelLimit("PF-b", "feed_pressure", None, 1.5e5, phase="b")
    s = summarize(make(range(20), labels, feed_pressure=x), ranges=[r])
    assert [(e.phase, e.samples, e.duration_s) for e in s.excursions] == [
        ("b", 3, 3.0),
        ("b", 3, 3.0),
    ]
    # unscoped: three runs, each named with the phase it starts in
    s = summarize(
        make(range(20), labels, feed_pressure=x),
        ranges=[ChannelLimit("PF", "feed_pressure", None, 1.5e5)],
    )
    assert [(e.phase, e.samples) for e in s.excursions] == [("a", 2), ("a", 5), ("b", 3)]


def test_ranges_that_cannot_apply_are_reported() -> None:
    log = make(range(5), ["a"] * 5, feed_pressure=np.ones(5))
    s = summarize(
        log,
        ranges=[
            ChannelLimit("TMP", "tmp", None, 1.0),
            ChannelLimit("PF", "feed_pressure", None, 2.0, "zz"),
        ],
    )
    why = {n.what: n.why for n in s.not_computed}
    assert why["range TMP"].startswith("tmp: needs feed, retentate and permeate pressure")
    assert why["range PF"] == "phase 'zz' is not in the log (phases: a)"


def test_time_windows_are_phases() -> None:
    # definition: the samples with start <= t < end; it ends at the first sample after it
    t = np.arange(10.0)
    w = [
        PhaseWindow("w", T0 + timedelta(seconds=2.5), T0 + timedelta(seconds=6)),
        PhaseWindow("empty", T0 + timedelta(seconds=6.2), T0 + timedelta(seconds=6.8)),
    ]
    s = summarize(make(t, ["x"] * 10, permeate_flow=np.ones(10)), windows=w)
    [p] = s.phases
    assert (p.phase, p.samples, p.duration_s, p.permeate_volume_m3) == ("w", 3, 3.0, 3.0)
    assert {n.what: n.why for n in s.not_computed}["phase empty"] == "no samples in its time window"


def demo_summary() -> Summary:
    t = np.arange(0.0, 601.0)
    labels = ["concentrate"] * 300 + ["diafilter"] * 301
    log = make(
        t,
        labels,
        feed_pressure=spiky(t.size, 100, 5, 1.7e5, base=1.5e5),
        retentate_pressure=np.full(t.size, 1.0e5),
        permeate_pressure=np.full(t.size, 0.1e5),
        feed_flow=np.full(t.size, 6e-6),
        permeate_flow=np.full(t.size, 5e-7),
        retentate_volume=1e-3 - 5e-7 * np.minimum(t, 300),
        temperature=np.full(t.size, 293.15),
    )
    log.assumptions.append("permeate density 1.0 g/mL assumed (the mapping gives none)")
    ranges = [ChannelLimit("TMP", "tmp", None, 1.2e5, "concentrate")]
    return summarize(log, Geometry(0.1, 50, 5e-4), ranges)


def test_the_record_round_trips_exactly() -> None:
    s = demo_summary()
    assert s.excursions and s.phases and s.not_computed == []
    record = s.to_record()
    back = Summary.from_record(json.loads(json.dumps(record)))
    assert back == s
    assert back.to_record() == record


def test_metrics_by_name() -> None:
    s = demo_summary()
    assert s.metric("duration") == 600.0
    assert s.metric("duration", "diafilter") == 300.0
    # by hand: 0.5 mL/s for 300 s = 1.5e-4 m³ in the concentration
    assert s.metric("permeate_volume", "concentrate") == pytest.approx(1.5e-4, rel=1e-12)
    assert s.metric("concentration_factor", "concentrate") == pytest.approx(1e-3 / 8.5e-4)
    assert s.metric("temperature.mean") == pytest.approx(293.15)
    assert s.metric("tmp.max") == s.run.stats["tmp"].max
    assert s.metric("diavolumes", "nowhere") is None and s.metric("wibble.mean") is None


def test_summary_json_follows_the_agreed_schema() -> None:
    d = summary_json(demo_summary())
    assert set(d) == {
        "file",
        "files",
        "warnings",
        "sha256",
        "rows",
        "start",
        "end",
        "run",
        "phases",
        "excursions",
        "not_computed",
        "assumptions",
    }
    run = d["run"]
    assert set(run) == {
        "phase",
        "start",
        "end",
        "samples",
        "duration",
        "permeate_volume",
        "permeate_source",
        "initial_volume",
        "final_volume",
        "concentration_factor",
        "diavolumes",
        "flux_start",
        "flux_end",
        "flux_decline",
        "channels",
    }
    assert run["start"] == "2026-06-01T08:00:00+00:00"
    assert run["duration"] == {"value": pytest.approx(10.0), "unit": "min"}  # 600 s
    assert run["permeate_volume"] == {"value": pytest.approx(0.3), "unit": "L"}  # 5e-7·600 m³
    assert run["channels"]["retentate_pressure"]["mean"] == {
        "value": pytest.approx(1.0),
        "unit": "bar",
    }
    assert run["channels"]["temperature"]["min"] == {"value": pytest.approx(20.0), "unit": "degC"}
    # 5e-7 m³/s over 0.1 m² = 5e-6 m/s = 18 LMH (1 LMH = 1/3.6e6 m/s)
    assert run["channels"]["flux"]["mean"] == {"value": pytest.approx(18.0), "unit": "L/(m^2*h)"}
    assert run["channels"]["feed_flow"]["max"]["unit"] == "mL/min"
    assert run["channels"]["wall_shear"]["max"]["unit"] == "1/s"
    [e] = d["excursions"]
    assert set(e) == {
        "name",
        "channel",
        "phase",
        "side",
        "limit",
        "start",
        "end",
        "duration",
        "worst",
        "samples",
    }
    assert e["limit"] == {"value": pytest.approx(1.2), "unit": "bar"}
    # TMP in the spike: (1.7e5 + 1e5)/2 - 0.1e5 = 1.25e5 Pa, for 5 samples at 1 Hz
    assert e["worst"] == {"value": pytest.approx(1.25), "unit": "bar"}
    assert e["duration"] == {"value": pytest.approx(5 / 60), "unit": "min"}
    assert (e["samples"], e["phase"], e["side"]) == (5, "concentrate", "high")
    assert [p["phase"] for p in d["phases"]] == ["concentrate", "diafilter"]
    assert d["assumptions"] == ["permeate density 1.0 g/mL assumed (the mapping gives none)"]
    json.dumps(d, allow_nan=False)  # plain JSON: no NaN or infinity anywhere


# -- unit invariance: the same log written in other units gives the same actuals ------------

PSI = 6894.757293168  # Pa (NIST SP 811)
SYSTEMS = {
    "metric": {
        "p": ("bar", 1e-5),
        "q": ("L/h", 3.6e6),
        "m": ("kg", 1.0),
        "v": ("L", 1e3),
        "t": ("K", None),
    },
    "skid": {
        "p": ("psi", 1 / PSI),
        "q": ("mL/min", 6e7),
        "m": ("g", 1e3),
        "v": ("mL", 1e6),
        "t": ("degC", None),
    },
    "other": {
        "p": ("kPa", 1e-3),
        "q": ("L/min", 6e4),
        "m": ("lb", 1 / 0.45359237),
        "v": ("m^3", 1.0),
        "t": ("degF", None),
    },
}
CHANNELS = {
    "feed_pressure": "p",
    "retentate_pressure": "p",
    "permeate_pressure": "p",
    "feed_flow": "q",
    "permeate_flow": "q",
    "permeate_mass": "m",
    "retentate_volume": "v",
    "temperature": "t",
}


def in_units(kelvin: np.ndarray, unit: str) -> np.ndarray:
    # temperature scales (SI brochure): t/°C = T/K - 273.15, t/°F = (T/K)·9/5 - 459.67
    return {"K": kelvin, "degC": kelvin - 273.15, "degF": kelvin * 9 / 5 - 459.67}[unit]


def write_in(path: Path, system: str, si: dict[str, np.ndarray], t: np.ndarray) -> Path:
    units_ = SYSTEMS[system]
    cols = {}
    for name, letter in CHANNELS.items():
        unit, factor = units_[letter]
        cols[name] = in_units(si[name], unit) if factor is None else si[name] * factor
    stamps = (np.datetime64("2026-06-01T08:00:00") + (t * 1000).astype("timedelta64[ms]")).astype(
        str
    )
    lines = [",".join(["T", *CHANNELS])]
    for i in range(t.size):
        lines.append(",".join([stamps[i], *(repr(float(cols[c][i])) for c in CHANNELS)]))
    path.write_text("\n".join(lines) + "\n")
    mapping = '[time]\ncolumn = "T"\n[channels]\n' + "".join(
        f'{c} = {{ column = "{c}", unit = "{units_[letter][0]}" }}\n'
        for c, letter in CHANNELS.items()
    )
    (path.with_suffix(".toml")).write_text(mapping)
    return path


@settings(max_examples=15, deadline=None)
@given(st.integers(min_value=0, max_value=2**32 - 1), st.sampled_from(["skid", "other"]))
def test_unit_invariance(tmp_path_factory: pytest.TempPathFactory, seed: int, system: str) -> None:
    rng = np.random.default_rng(seed)
    n = 80
    t = np.cumsum(np.r_[0.0, rng.integers(1, 4, n - 1)]).astype(float)
    si = {
        "feed_pressure": rng.uniform(1.2e5, 2e5, n),
        "retentate_pressure": rng.uniform(0.8e5, 1.1e5, n),
        "permeate_pressure": rng.uniform(0, 2e4, n),
        "feed_flow": rng.uniform(1e-6, 1e-5, n),
        "permeate_flow": rng.uniform(1e-8, 1e-6, n),
        "permeate_mass": np.cumsum(rng.uniform(0, 1e-3, n)),
        "retentate_volume": rng.uniform(1e-4, 1e-3, n),
        "temperature": rng.uniform(280, 310, n),
    }
    folder = tmp_path_factory.mktemp("units")
    summaries = []
    for name in ("metric", system):
        path = write_in(folder / f"{name}.csv", name, si, t)
        log = read_log(path, parse_mapping(path.with_suffix(".toml").read_text(), "m"))
        summaries.append(
            summarize(log, Geometry(0.2, 40, 6e-4), [ChannelLimit("T", "tmp", None, 1e5)])
        )
    a, b = summaries
    for x, y in ((a.run, b.run),):
        for key, stats in x.stats.items():
            for stat in ("mean", "min", "max"):
                assert getattr(y.stats[key], stat) == pytest.approx(
                    getattr(stats, stat), rel=1e-9
                ), key
        for field in (
            "permeate_volume_m3",
            "initial_volume_m3",
            "final_volume_m3",
            "concentration_factor",
            "diavolumes",
            "flux_decline",
        ):
            assert getattr(y, field) == pytest.approx(getattr(x, field), rel=1e-9, abs=1e-12), field
    assert [(e.samples, e.start) for e in a.excursions] == [
        (e.samples, e.start) for e in b.excursions
    ]


# -- end values from a time window, whatever the sampling interval ---------------------------


@pytest.mark.parametrize("step", [1.0, 7.0, 60.0])
def test_end_values_are_exact_on_a_line_at_any_sampling_interval(step: float) -> None:
    # analytic: a flush reading 0 L for 600 s, then a concentration V(t) = V0 - q·(t - 600 s);
    # a least-squares line through samples of a line is that line, so the concentration's
    # values at its start (its first sample) and end (the last sample, t = 4200 s) are exact
    # whether the 30 s window holds 31 samples or fewer than two (then the two nearest)
    t = np.arange(0.0, 4200.0 + step / 2, step)
    v0, q = 2.0e-3, 4.0e-7  # 2 L, 0.4 mL/s

    def line(x: float) -> float:
        return v0 - q * (x - 600.0)

    v = np.where(t < 600.0, 0.0, v0 - q * (t - 600.0))
    labels = np.where(t < 600.0, "flush", "concentrate").tolist()
    s = summarize(make(t, labels, retentate_volume=v))
    flush, conc = s.phases
    assert (flush.phase, conc.phase) == ("flush", "concentrate")
    first = float(t[t >= 600.0][0])  # 600 s, or 602 s at 7 s sampling
    assert conc.initial_volume_m3 == pytest.approx(line(first), rel=1e-9)
    assert conc.final_volume_m3 == pytest.approx(line(4200.0), rel=1e-9)
    assert conc.concentration_factor == pytest.approx(line(first) / line(4200.0), rel=1e-9)
    # the flush ends at the concentration's first sample; its own samples all read 0 L
    assert flush.final_volume_m3 == 0.0
    # the run's start window stays inside the flush, its end window inside the concentration
    assert s.run.initial_volume_m3 == 0.0
    assert s.run.final_volume_m3 == pytest.approx(line(4200.0), rel=1e-9)
    short = [a for a in s.assumptions if "fewer than two samples within 30 s" in a]
    assert len(short) == (1 if step > 30.0 else 0)


def test_a_window_of_one_interval_is_an_extrapolation_of_the_last_two_samples() -> None:
    # by hand: samples every 60 s at t = 0..240 s with V = 10, 9, 7, 5, 4 mL, of a phase that
    # ends at t = 300 s (the next phase's first sample); the 30 s end window holds no sample
    # of the phase, so the line through (180 s, 5 mL) and (240 s, 4 mL) gives 3 mL at 300 s;
    # the start window holds the first sample only: with the next one, 10 mL at 0 s
    t = np.arange(0.0, 301.0, 60.0)
    v = np.array([10.0, 9.0, 7.0, 5.0, 4.0, 8.0]) * 1e-6
    s = summarize(make(t, ["a"] * 5 + ["b"], retentate_volume=v))
    a = s.phases[0]
    assert a.initial_volume_m3 == pytest.approx(10e-6, rel=1e-12)
    assert a.final_volume_m3 == pytest.approx(3e-6, rel=1e-12)
    assert a.concentration_factor == pytest.approx(10 / 3, rel=1e-12)
    assert any("fewer than two samples within 30 s" in x for x in s.assumptions)
    # the one-sample phase b: its start and end values are that sample, and the summary says so
    b = s.phases[1]
    assert b.initial_volume_m3 == b.final_volume_m3 == pytest.approx(8e-6, rel=1e-12)
    assert "phase b has one sample: its start and end values are that sample" in s.assumptions
    # the run: its start window reaches into phase a only, its end window is phase b's sample
    assert s.run.initial_volume_m3 == pytest.approx(10e-6, rel=1e-12)
    assert s.run.final_volume_m3 == pytest.approx(8e-6, rel=1e-12)
