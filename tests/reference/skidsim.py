"""An independent simulator of a TFF run's skid log, with its ground truth (tests and bench only).

This module is the outside reference for `fluxledger log summarize`: it imports nothing from
``ledger`` and does its own unit conversions from the definitions of the units (1 psi =
0.45359237 kg x 9.80665 m/s^2 / (0.0254 m)^2, 1 degF = 5/9 K, ...).

The continuous model (SI units: m^3, m^3/s, Pa, K, s from the run's start)
------------------------------------------------------------------------------
* Flux: gel polarization with slow fouling, J(t) = k0 exp(-t/tau) ln(Cg/C), C = M/V (the
  product is fully retained, M = C0 V0 is constant). In the gel-polarized regime the flux does
  not depend on TMP, so the TMP profile and its excursions leave the volumes alone.
  Permeate flow Qp = A J.
* Batch concentration: dV/dt = -Qp. With u = ln(Cg V/M) the ODE separates,
  e^u/u du = -(A k0 Cg/M) e^(-t/tau) dt, so Ei(u(t)) = Ei(u1) - (A k0 Cg tau/M)
  (e^(-t1/tau) - e^(-t/tau)) with Ei the exponential integral (scipy.special.expi). V(t) is the
  inverse (Newton for the samples, brentq for the truth); permeate = V1 - V2.
* Constant-volume diafiltration: buffer in = Qp, V constant, so C and ln(Cg/C) are constant and
  permeate = A k0 u tau (e^(-t1/tau) - e^(-t2/tau)) = buffer added.
* Recovery: the permeate valve closes linearly over ``ramp_s`` (Qp falls from its value at the
  phase start to 0) while the skid holds the level with buffer (buffer in = Qp), then the loop
  recirculates at a low feed flow. Permeate = buffer = Qp(t1) ramp_s / 2.
* TMP: piecewise linear between the phase knots (each phase ramps from the previous value to
  its ``tmp_end``; recovery reaches it at the end of the ramp) plus a pump pulsation
  a sin(2 pi t / P). Pressures follow from it: Pp = pp0 (1 + 0.1 sin(2 pi t/900 s)),
  dP = c_dp Qf (1 + 0.5 C/Cg), Pf = TMP + Pp + dP/2, Pr = TMP + Pp - dP/2, so that
  (Pf + Pr)/2 - Pp = TMP exactly. Feed flow is a constant set point per phase; temperature
  T0 + drift t + 0.15 K sin(2 pi t / 2400 s).
* Injected excursions replace a channel's value by a constant on the interval
  [t_i - dt/2, t_(i+k-1) + dt/2]: exactly k samples read it and the continuous excursion lasts
  k dt (the agreed rule also gives k dt when the log ends inside an excursion).

Phase boundaries fall on sample times (each phase lasts a whole number of samples), and the
log's last sample is the run's end, so the agreed span rule (a phase runs from its first sample
to the next phase's first sample) measures the true durations.

Ground truth (``truth.json``) comes from the continuous model only, never from the samples:
durations (the model's clock), volumes (closed forms above, brentq inversion of Ei), time
averages (scipy.integrate.quad of the continuous V(t) and TMP(t) with breakpoints at the knots
and excursion edges), diavolumes = buffer added / time-averaged retentate volume (the agreed
definition; = buffer / V for constant-volume DF), concentration factor = V(start)/V(end).

Measurement noise (Gaussian, fixed seed) and why 0.5 % still holds
-------------------------------------------------------------------
* pressures: sd 0.002 bar per transducer (sd of TMP 0.0024 bar); a phase's mean TMP averages
  >= 100 samples, so its noise is < 0.03 % of ~0.9 bar; limits sit >= 8 sd from the profile.
* flows: sd 0.3 % of reading (a meter's %-of-reading error; zero flow reads zero); the
  trapezoid integral of n samples carries ~0.3 %/sqrt(n) (< 0.05 % for n >= 36).
* balance: sd 0.01 g, written to 0.01 g; the smallest phase volume (recovery) is >= 30 mL, so
  the two readings' error is < 0.1 %.
* retentate volume (a load-cell level): sd 0.1 mL, written to 0.1 mL; the least-squares end
  value through the samples of the last (first) 30 s of a phase has sd ~0.04 mL at 1 s
  sampling, ~0.2 mL when only two samples are left (sampling every 30 s or more), < 0.1 % of
  the smallest volume (>= 250 mL).
* temperature: sd 0.03 K.
Each case is also checked here (``check_case``) by applying the agreed definitions with plain
numpy to the written, noisy data: those estimates must fall within 0.25 % of the truth, which
shows the tolerance is attainable on every case (including the least-squares end-value bias
from the curvature of V(t)). Quantities whose truth is ~0 (diavolumes of a phase without a
real wash) are judged against one diavolume instead of relatively; see ``relative_error``.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime, timedelta, timezone, tzinfo
from functools import cache
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo

import numpy as np
from scipy import integrate, optimize, special

LMH = 1e-3 / 3600.0  # m/s per L/(m^2 h)
BAR = 1e5
PSI = 0.45359237 * 9.80665 / 0.0254**2  # Pa, from the definitions of lb, g_n and inch
ML_MIN = 1e-6 / 60.0
L_H = 1e-3 / 3600.0
L_MIN = 1e-3 / 60.0

# unit -> (a, b) with SI = a * value + b
UNITS: dict[str, tuple[float, float]] = {
    "bar": (BAR, 0.0),
    "psi": (PSI, 0.0),
    "kPa": (1e3, 0.0),
    "mL/min": (ML_MIN, 0.0),
    "L/h": (L_H, 0.0),
    "L/min": (L_MIN, 0.0),
    "mL": (1e-6, 0.0),
    "L": (1e-3, 0.0),
    "g": (1e-3, 0.0),
    "kg": (1.0, 0.0),
    "degC": (1.0, 273.15),
    "degF": (5.0 / 9.0, 273.15 - 32.0 * 5.0 / 9.0),
    "pH": (1.0, 0.0),
    "mS/cm": (0.1, 0.0),
}

NOISE = {
    "pressure_pa": 200.0,
    "flow_rel": 0.003,
    "mass_kg": 1e-5,
    "volume_m3": 1e-7,
    "temperature_k": 0.03,
}

SOURCES = {
    "duration": "the simulator's clock (phase boundaries on sample times)",
    "start": "the simulator's clock",
    "permeate_volume": "closed forms of the model: V1 - V2 from the exponential-integral "
    "solution of dV/dt = -A k0 e^(-t/tau) ln(Cg V/M) (scipy.special.expi, brentq) for "
    "concentration; A k0 u tau (e^(-t1/tau) - e^(-t2/tau)) for diafiltration; Qp ramp/2 "
    "for recovery",
    "initial_volume": "exponential-integral solution of the concentration ODE (brentq)",
    "final_volume": "exponential-integral solution of the concentration ODE (brentq)",
    "concentration_factor": "V(start)/V(end) of the exponential-integral solution (brentq)",
    "diavolumes": "buffer added (closed form) / time average of V(t) by scipy.integrate.quad",
    "tmp_mean": "scipy.integrate.quad of the continuous TMP(t) (knots, pulsation, "
    "excursions as breakpoints) / duration",
    "excursion": "the injected rectangle: k samples from t_i, lasting k dt",
}


def to_si(value: Any, unit: str) -> Any:
    a, b = UNITS[unit]
    return a * value + b


def from_si(value: Any, unit: str) -> Any:
    a, b = UNITS[unit]
    return (value - b) / a


# --- the process ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Step:
    """One phase of the run: its label, what the skid does, how long, and its set points."""

    name: str
    kind: str  # "concentrate" | "diafilter" | "recover"
    minutes: float
    feed_flow: float  # m^3/s
    tmp_end: float  # Pa, reached at the end of the phase (recovery: at the end of the ramp)
    ramp_s: float = 0.0  # recovery: permeate-valve closing time


@dataclass(frozen=True)
class Process:
    area_m2: float
    fibers: int
    lumen_diameter_m: float
    v0_m3: float
    c0_kg_m3: float
    cg_kg_m3: float
    k0_m_s: float
    tau_s: float
    tmp0_pa: float
    steps: tuple[Step, ...]
    dp_coeff: float  # Pa per m^3/s of feed flow at C = 0
    density_kg_m3: float = 1000.0
    pulsation_pa: float = 800.0
    pulsation_period_s: float = 600.0
    permeate_pressure_pa: float = 5000.0
    temp0_k: float = 293.15
    temp_drift_k_s: float = 0.4 / 3600.0


class Model:
    """The continuous run: V(t), Qp(t), cumulative permeate, TMP(t), set points (SI)."""

    def __init__(self, p: Process, dt: float) -> None:
        self.p, self.dt = p, dt
        self.mass = p.c0_kg_m3 * p.v0_m3
        bounds = [0.0]
        for s in p.steps:
            n = round(s.minutes * 60.0 / dt)
            if abs(n * dt - s.minutes * 60.0) > 1e-9:
                raise ValueError(f"{s.name}: {s.minutes} min is not a whole number of samples")
            bounds.append(bounds[-1] + n * dt)
        self.bounds = np.array(bounds)
        self.v_start: list[float] = []
        self.perm_start: list[float] = []  # cumulative permeate at each phase start, m^3
        self.q_start: list[float] = []  # permeate flow at each phase start (recovery ramp)
        v, perm = p.v0_m3, 0.0
        for i, s in enumerate(p.steps):
            t1, t2 = float(self.bounds[i]), float(self.bounds[i + 1])
            self.v_start.append(v)
            self.perm_start.append(perm)
            self.q_start.append(float(self._flux_flow(t1, v)))
            if s.kind == "concentrate":
                v2 = self._v_concentrate_truth(t1, t2, v)
                perm += v - v2
                v = v2
            elif s.kind == "diafilter":
                perm += float(self._df_permeate(t1, t2, v))
            elif s.kind == "recover":
                perm += self.q_start[i] * min(s.ramp_s, t2 - t1) / 2.0
            else:
                raise ValueError(s.kind)
        self.v_end = v
        self.perm_total = perm
        self.knots_t, self.knots_p = self._tmp_knots()

    # flux law and its closed forms
    def _k(self, t: Any) -> Any:
        return self.p.k0_m_s * np.exp(-np.asarray(t) / self.p.tau_s)

    def _u(self, v: Any) -> Any:
        return np.log(self.p.cg_kg_m3 * np.asarray(v) / self.mass)

    def _flux_flow(self, t: Any, v: Any) -> Any:
        return self.p.area_m2 * self._k(t) * self._u(v)

    def rhs(self, t: float, v: Any) -> Any:
        """dV/dt of a concentration phase, for an independent solve_ivp check."""
        return -self._flux_flow(t, v)

    def _ei_target(self, t1: float, v1: float, t: Any) -> Any:
        p = self.p
        beta = p.area_m2 * p.k0_m_s * p.cg_kg_m3 * p.tau_s / self.mass
        return special.expi(self._u(v1)) - beta * (
            math.exp(-t1 / p.tau_s) - np.exp(-np.asarray(t) / p.tau_s)
        )

    def _v_concentrate_truth(self, t1: float, t2: float, v1: float) -> float:
        """V(t2) by brentq on Ei(u) = target (u > 1 by design: C < Cg/e)."""
        y = float(self._ei_target(t1, v1, t2))
        u1 = float(self._u(v1))
        if special.expi(1.0) >= y:
            raise ValueError("design: the concentration passes Cg/e (u < 1)")
        u = optimize.brentq(lambda x: special.expi(x) - y, 1.0, u1, xtol=1e-15, rtol=1e-15)
        return float(self.mass / self.p.cg_kg_m3 * math.exp(u))

    def _v_concentrate_samples(self, t1: float, v1: float, t: np.ndarray) -> np.ndarray:
        """V at many times by Newton from above (Ei is increasing and convex for u > 1)."""
        y = self._ei_target(t1, v1, t)
        u = np.full_like(t, float(self._u(v1)), dtype=float)
        for _ in range(50):
            step = (special.expi(u) - y) * u / np.exp(u)
            u = u - step
            if np.max(np.abs(step) / u, initial=0.0) < 1e-14:  # a few ulp: converged
                break
        return self.mass / self.p.cg_kg_m3 * np.exp(u)

    def _df_permeate(self, t1: float, t2: Any, v: float) -> Any:
        p = self.p
        return (
            p.area_m2
            * p.k0_m_s
            * float(self._u(v))
            * p.tau_s
            * (math.exp(-t1 / p.tau_s) - np.exp(-np.asarray(t2) / p.tau_s))
        )

    def phase_of(self, t: np.ndarray) -> np.ndarray:
        return np.searchsorted(self.bounds[1:-1], t, side="right")

    # sampled values (vectorized) ----------------------------------------------------------
    def volume(self, t: np.ndarray) -> np.ndarray:
        out = np.empty_like(t, dtype=float)
        ph = self.phase_of(t)
        for i, s in enumerate(self.p.steps):
            m = ph == i
            if s.kind == "concentrate":
                out[m] = self._v_concentrate_samples(self.bounds[i], self.v_start[i], t[m])
            else:
                out[m] = self.v_start[i]
        return out

    def permeate_flow(self, t: np.ndarray, v: np.ndarray) -> np.ndarray:
        out = np.empty_like(t, dtype=float)
        ph = self.phase_of(t)
        for i, s in enumerate(self.p.steps):
            m = ph == i
            if s.kind == "recover":
                frac = np.clip(1.0 - (t[m] - self.bounds[i]) / s.ramp_s, 0.0, 1.0)
                out[m] = self.q_start[i] * frac
            else:
                out[m] = self._flux_flow(t[m], v[m])
        return out

    def cumulative_permeate(self, t: np.ndarray, v: np.ndarray) -> np.ndarray:
        out = np.empty_like(t, dtype=float)
        ph = self.phase_of(t)
        for i, s in enumerate(self.p.steps):
            m = ph == i
            t1 = self.bounds[i]
            if s.kind == "concentrate":
                out[m] = self.perm_start[i] + self.v_start[i] - v[m]
            elif s.kind == "diafilter":
                out[m] = self.perm_start[i] + self._df_permeate(t1, t[m], self.v_start[i])
            else:
                x = np.minimum(t[m] - t1, s.ramp_s)
                out[m] = self.perm_start[i] + self.q_start[i] * (x - x**2 / (2 * s.ramp_s))
        return out

    def _tmp_knots(self) -> tuple[np.ndarray, np.ndarray]:
        ts, ps = [0.0], [self.p.tmp0_pa]
        for i, s in enumerate(self.p.steps):
            t1, t2 = float(self.bounds[i]), float(self.bounds[i + 1])
            if s.kind == "recover":
                ts += [t1 + s.ramp_s, t2]
                ps += [s.tmp_end, s.tmp_end]
            else:
                ts.append(t2)
                ps.append(s.tmp_end)
        return np.array(ts), np.array(ps)

    def tmp_base(self, t: Any) -> Any:
        p = self.p
        return np.interp(t, self.knots_t, self.knots_p) + p.pulsation_pa * np.sin(
            2 * np.pi * np.asarray(t) / p.pulsation_period_s
        )

    def feed_flow(self, t: np.ndarray) -> np.ndarray:
        flows = np.array([s.feed_flow for s in self.p.steps])
        return flows[self.phase_of(t)]

    def temperature(self, t: np.ndarray) -> np.ndarray:
        p = self.p
        return p.temp0_k + p.temp_drift_k_s * t + 0.15 * np.sin(2 * np.pi * t / 2400.0)

    def permeate_pressure(self, t: np.ndarray) -> np.ndarray:
        return self.p.permeate_pressure_pa * (1 + 0.1 * np.sin(2 * np.pi * t / 900.0))

    # continuous scalar functions for the truth -------------------------------------------
    def volume_at(self, t: float) -> float:
        i = int(self.phase_of(np.array([t]))[0])
        if self.p.steps[i].kind == "concentrate" and t > self.bounds[i]:
            return self._v_concentrate_truth(float(self.bounds[i]), t, self.v_start[i])
        return self.v_start[i]


# --- skid formats and cases ----------------------------------------------------------------


@dataclass(frozen=True)
class Column:
    """One CSV column: which of our channels it carries (or "extra:..."), header, unit,
    decimals written."""

    channel: str
    header: str
    unit: str | None
    decimals: int


@dataclass(frozen=True)
class Format:
    dt_s: float
    start_utc: datetime
    time_header: str
    time_style: str  # "iso" (offset), "iso-z", "local" (naive wall-clock in ``zone``)
    zone: str  # "UTC", an IANA name or a fixed offset "+HH:MM"
    columns: tuple[Column, ...]
    phase_header: str | None  # None: no phase column; the test passes --phase windows
    time_format: str | None = None  # strftime of "local" (written into the mapping)
    mapping_timezone: str | None = None
    max_gap: str | None = None
    density: str | None = None  # the mapping's density text for permeate_mass


@dataclass(frozen=True)
class Limit:
    name: str
    channel: str  # tmp | feed_flow | temperature
    unit: str  # unit the limits file uses
    low: float | None = None  # SI
    high: float | None = None  # SI
    phase: str | None = None


@dataclass(frozen=True)
class Injected:
    """An excursion: ``limit`` names the range; ``at`` = fraction into phase ``step``, or
    "end" for the log's last ``samples`` samples; ``value`` is the SI value held."""

    limit: str
    step: int
    at: float | str
    samples: int
    value: float


@dataclass(frozen=True)
class Case:
    name: str
    description: str
    process: Process
    fmt: Format
    limits: tuple[Limit, ...]
    injected: tuple[Injected, ...]
    geometry: bool = True  # pass --area, --fibers, --lumen-diameter


@dataclass(frozen=True)
class CasePaths:
    case: str
    seed: int
    csv: Path
    mapping: Path
    limits: Path
    truth: Path
    args: tuple[str, ...]  # everything after `fluxledger log summarize`


def _tz(zone: str) -> tzinfo:
    if zone.startswith(("+", "-")):
        sign = 1 if zone[0] == "+" else -1
        hh, mm = zone[1:].split(":")
        return timezone(sign * timedelta(hours=int(hh), minutes=int(mm)))
    return UTC if zone == "UTC" else ZoneInfo(zone)


def _steps(
    names: Sequence[str],
    minutes: Sequence[float],
    feed: float,
    feed_recover: float,
    tmps: Sequence[float],
    ramp_s: float = 120.0,
) -> tuple[Step, ...]:
    """Steps from "c:label" / "d:label" / "r:label" (concentrate, diafilter, recover)."""
    kinds = {"c": "concentrate", "d": "diafilter", "r": "recover"}
    out = []
    for name, mins, tmp in zip(names, minutes, tmps, strict=True):
        code, label = name.split(":")
        kind = kinds[code]
        recover = kind == "recover"
        out.append(
            Step(label, kind, mins, feed_recover if recover else feed, tmp,
                 ramp_s if recover else 0.0)
        )  # fmt: skip
    return tuple(out)


def _cols(spec: Sequence[tuple[str, str, str | None, int]]) -> tuple[Column, ...]:
    return tuple(Column(*c) for c in spec)


def _lab_process(steps: tuple[Step, ...], **kw: Any) -> Process:
    base: dict[str, Any] = dict(
        area_m2=0.11,
        fibers=87,
        lumen_diameter_m=1.0e-3,
        v0_m3=2.0e-3,
        c0_kg_m3=4.0,
        cg_kg_m3=160.0,
        k0_m_s=14 * LMH,
        tau_s=6 * 3600.0,
        tmp0_pa=0.80 * BAR,
        steps=steps,
        dp_coeff=0.35 * BAR / (600 * ML_MIN),
    )
    base.update(kw)
    return Process(**base)


def _pilot_process(steps: tuple[Step, ...], **kw: Any) -> Process:
    base: dict[str, Any] = dict(
        area_m2=0.5,
        fibers=400,
        lumen_diameter_m=1.0e-3,
        v0_m3=25.0e-3,
        c0_kg_m3=3.0,
        cg_kg_m3=150.0,
        k0_m_s=13 * LMH,
        tau_s=10 * 3600.0,
        tmp0_pa=0.85 * BAR,
        steps=steps,
        dp_coeff=0.4 * BAR / (2.5 * L_MIN),
    )
    base.update(kw)
    return Process(**base)


LAB_FEED = 600 * ML_MIN
LAB_TMPS = (1.00 * BAR, 0.90 * BAR, 1.05 * BAR, 0.40 * BAR)
PILOT_FEED = 2.5 * L_MIN
PILOT_TMPS = (1.00 * BAR, 0.92 * BAR, 1.06 * BAR, 0.45 * BAR)


def _celsius(c: float) -> float:
    return c + 273.15


def _build_cases() -> dict[str, Case]:
    cases: dict[str, Case] = {}

    # 1. Bench skid, 1 s, ISO timestamps with offset, psi, mL/min, level in mL, a step column
    #    whose label "concentrate" recurs.
    steps = _steps(
        ["c:concentrate", "d:diafilter", "c:concentrate", "r:recover"],
        [20, 50, 5, 8],
        LAB_FEED,
        200 * ML_MIN,
        LAB_TMPS,
    )
    cases["bench-psi-iso-1s"] = Case(
        "bench-psi-iso-1s",
        "1 s, ISO 8601 with +01:00 offset, psi, mL/min, mL, degC, phase column (recurring label)",
        _lab_process(steps),
        Format(
            dt_s=1.0,
            start_utc=datetime(2025, 6, 12, 7, 30, tzinfo=UTC),
            time_header="Timestamp",
            time_style="iso",
            zone="Europe/Dublin",
            columns=_cols(
                [
                    ("feed_pressure", "PT-01", "psi", 3),
                    ("retentate_pressure", "PT-02", "psi", 3),
                    ("permeate_pressure", "PT-03", "psi", 3),
                    ("feed_flow", "FT-01", "mL/min", 2),
                    ("permeate_flow", "FT-02", "mL/min", 3),
                    ("retentate_volume", "LT-01", "mL", 1),
                    ("temperature", "TT-01", "degC", 2),
                ]
            ),
            phase_header="Step",
        ),
        (
            Limit("TMP high", "tmp", "psi", high=1.3 * BAR),
            Limit("Feed flow low", "feed_flow", "mL/min", low=480 * ML_MIN, phase="concentrate"),
            Limit("Temperature", "temperature", "degC", high=_celsius(25.0)),
        ),
        (
            Injected("TMP high", 1, 0.4, 12, 1.62 * BAR),
            Injected("Feed flow low", 2, 0.5, 8, 310 * ML_MIN),
            Injected("Temperature", 1, 0.7, 20, _celsius(26.4)),
        ),
    )

    # 2. Pilot skid, 2 s, naive local times in Europe/Dublin across the spring-forward change
    #    (30 March 2025, 01:00 GMT -> 02:00 IST), bar, L/h, a balance in kg with a density and a
    #    permeate flow meter (the balance is preferred), level in L.
    steps = _steps(
        ["c:CONC", "d:DIAFILTRATION", "c:CONC", "r:RECOVERY"],
        [60, 110, 10, 12],
        PILOT_FEED,
        0.8 * L_MIN,
        PILOT_TMPS,
        ramp_s=180.0,
    )
    cases["pilot-dublin-dst-2s"] = Case(
        "pilot-dublin-dst-2s",
        "2 s, naive Europe/Dublin wall-clock across the DST change, bar, L/h, balance kg "
        "(density 1.005 g/mL) and flow meter, level L",
        _pilot_process(steps, density_kg_m3=1005.0),
        Format(
            dt_s=2.0,
            start_utc=datetime(2025, 3, 30, 0, 5, tzinfo=UTC),
            time_header="Date/Time",
            time_style="local",
            zone="Europe/Dublin",
            time_format="%Y-%m-%d %H:%M:%S",
            mapping_timezone="Europe/Dublin",
            columns=_cols(
                [
                    ("feed_pressure", "P_feed_bar", "bar", 4),
                    ("retentate_pressure", "P_ret_bar", "bar", 4),
                    ("permeate_pressure", "P_perm_bar", "bar", 4),
                    ("feed_flow", "Q_feed_Lph", "L/h", 2),
                    ("permeate_flow", "Q_perm_Lph", "L/h", 4),
                    ("permeate_mass", "Perm_Balance_kg", "kg", 5),
                    ("retentate_volume", "Level_L", "L", 4),
                    ("temperature", "Temp_C", "degC", 2),
                ]
            ),
            phase_header="Phase",
            max_gap="10 s",
            density="1.005 g/mL",
        ),
        (
            Limit("TMP", "tmp", "bar", high=1.35 * BAR),
            Limit("TMP low in DF", "tmp", "bar", low=0.6 * BAR, phase="DIAFILTRATION"),
            Limit("Feed flow DF", "feed_flow", "L/h", low=120 * L_H, phase="DIAFILTRATION"),
        ),
        (
            Injected("TMP", 0, 0.55, 9, 1.55 * BAR),
            Injected("TMP low in DF", 1, 0.3, 5, 0.42 * BAR),
            Injected("Feed flow DF", 1, 0.8, 15, 70 * L_H),
        ),
    )

    # 3. Plant skid, 5 s, day-first local times (Europe/Dublin, summer), kPa, L/min feed,
    #    a balance in g and NO permeate flow meter, level in mL, temperature in degF.
    steps = _steps(
        ["c:Concentration", "d:Diafiltration", "c:Concentration", "r:Recovery"],
        [62, 120, 12, 15],
        PILOT_FEED,
        0.8 * L_MIN,
        PILOT_TMPS,
        ramp_s=240.0,
    )
    cases["dayfirst-kpa-balance-5s"] = Case(
        "dayfirst-kpa-balance-5s",
        "5 s, day-first %d/%m/%Y local Europe/Dublin, kPa, L/min, balance g only (no "
        "permeate flow meter), level mL, degF",
        _pilot_process(steps, v0_m3=28e-3),
        Format(
            dt_s=5.0,
            start_utc=datetime(2025, 4, 3, 9, 5, tzinfo=UTC),
            time_header="Time",
            time_style="local",
            zone="Europe/Dublin",
            time_format="%d/%m/%Y %H:%M:%S",
            mapping_timezone="Europe/Dublin",
            columns=_cols(
                [
                    ("feed_pressure", "Feed Pressure (kPa)", "kPa", 2),
                    ("retentate_pressure", "Retentate Pressure (kPa)", "kPa", 2),
                    ("permeate_pressure", "Permeate Pressure (kPa)", "kPa", 2),
                    ("feed_flow", "Feed Flow (L/min)", "L/min", 4),
                    ("permeate_mass", "Permeate Scale (g)", "g", 2),
                    ("retentate_volume", "Tank Level (mL)", "mL", 1),
                    ("temperature", "Temperature (°F)", "degF", 2),
                ]
            ),
            phase_header="Operation",
        ),
        (
            Limit("TMP high", "tmp", "kPa", high=1.3 * BAR),
            Limit("Temperature high", "temperature", "degF", high=_celsius(25.0)),
        ),
        (
            Injected("TMP high", 1, 0.25, 6, 1.48 * BAR),
            Injected("Temperature high", 2, 0.5, 4, _celsius(27.0)),
        ),
        geometry=False,
    )

    # 4. Bench skid, 1 s, ISO with "Z", bar, L/min and mL/min, balance g and flow meter,
    #    level L, an unmapped pH column, NO phase column (windows on the command line), and
    #    no recovery phase.
    steps = _steps(["c:conc1", "d:df", "c:conc2"], [22, 45, 6], LAB_FEED, LAB_FEED, LAB_TMPS[:3])
    cases["windows-iso-z-1s"] = Case(
        "windows-iso-z-1s",
        "1 s, ISO 8601 with Z, bar, L/min + mL/min, balance g and flow meter, level L, no "
        "phase column (--phase windows), no recovery",
        _lab_process(steps, v0_m3=2.2e-3),
        Format(
            dt_s=1.0,
            start_utc=datetime(2025, 11, 18, 9, 30, tzinfo=UTC),
            time_header="time_utc",
            time_style="iso-z",
            zone="UTC",
            columns=_cols(
                [
                    ("feed_pressure", "PIT101", "bar", 4),
                    ("retentate_pressure", "PIT102", "bar", 4),
                    ("permeate_pressure", "PIT103", "bar", 4),
                    ("feed_flow", "FIT101", "L/min", 4),
                    ("permeate_flow", "FIT102", "mL/min", 3),
                    ("permeate_mass", "WIT102", "g", 2),
                    ("retentate_volume", "LIT101", "L", 4),
                    ("temperature", "TIT101", "degC", 2),
                    ("extra:ph", "AIT101_pH", "pH", 2),
                ]
            ),
            phase_header=None,
        ),
        (
            Limit("TMP high", "tmp", "bar", high=1.3 * BAR),
            Limit("Feed flow low", "feed_flow", "L/min", low=0.45 * L_MIN, phase="conc1"),
        ),
        (
            Injected("TMP high", 1, 0.6, 30, 1.7 * BAR),
            Injected("Feed flow low", 0, 0.3, 3, 0.2 * L_MIN),
        ),
    )

    # 5. Lab skid, 2 s, ISO with -05:00 offset, psi, mL/min, level mL, degC; the log ends
    #    inside a temperature excursion (the agreed end rule).
    steps = _steps(
        ["c:concentrate", "d:diafilter", "r:recover"],
        [24, 40, 10],
        LAB_FEED,
        200 * ML_MIN,
        (LAB_TMPS[0], LAB_TMPS[1], LAB_TMPS[3]),
    )
    cases["offset-ends-outside-2s"] = Case(
        "offset-ends-outside-2s",
        "2 s, ISO 8601 with -05:00 offset, psi, mL/min, mL, degC, phase column; the log ends "
        "during a temperature excursion",
        _lab_process(steps, v0_m3=2.6e-3),
        Format(
            dt_s=2.0,
            start_utc=datetime(2025, 9, 9, 13, 0, tzinfo=UTC),
            time_header="timestamp",
            time_style="iso",
            zone="-05:00",
            columns=_cols(
                [
                    ("feed_pressure", "feed_psi", "psi", 3),
                    ("retentate_pressure", "ret_psi", "psi", 3),
                    ("permeate_pressure", "perm_psi", "psi", 3),
                    ("feed_flow", "feed_mlmin", "mL/min", 2),
                    ("permeate_flow", "perm_mlmin", "mL/min", 3),
                    ("retentate_volume", "level_ml", "mL", 1),
                    ("temperature", "temp_c", "degC", 2),
                ]
            ),
            phase_header="step_name",
        ),
        (
            Limit("TMP high", "tmp", "psi", high=1.25 * BAR),
            Limit("Temperature", "temperature", "degC", high=_celsius(24.0)),
        ),
        (
            Injected("TMP high", 1, 0.5, 4, 1.5 * BAR),
            Injected("Temperature", 2, "end", 7, _celsius(25.5)),
        ),
    )

    # 6. Plant skid, 5 s, naive UTC wall-clock (no timezone in the mapping), psi, L/h, level L,
    #    degF, no phase column.
    steps = _steps(
        ["c:concentrate", "d:diafilter", "c:final", "r:recover"],
        [60, 100, 10, 15],
        PILOT_FEED,
        0.8 * L_MIN,
        PILOT_TMPS,
        ramp_s=240.0,
    )
    cases["plant-degf-windows-5s"] = Case(
        "plant-degf-windows-5s",
        "5 s, naive UTC wall-clock, psi, L/h, level L, degF, no phase column (--phase windows)",
        _pilot_process(steps),
        Format(
            dt_s=5.0,
            start_utc=datetime(2025, 1, 21, 6, 0, tzinfo=UTC),
            time_header="Sample Time",
            time_style="local",
            zone="UTC",
            time_format="%Y-%m-%d %H:%M:%S",
            columns=_cols(
                [
                    ("feed_pressure", "Feed Pressure (psi)", "psi", 3),
                    ("retentate_pressure", "Retentate Pressure (psi)", "psi", 3),
                    ("permeate_pressure", "Permeate Pressure (psi)", "psi", 3),
                    ("feed_flow", "Feed Flow (L/h)", "L/h", 2),
                    ("permeate_flow", "Permeate Flow (L/h)", "L/h", 4),
                    ("retentate_volume", "Retentate Volume (L)", "L", 4),
                    ("temperature", "Temperature (degF)", "degF", 2),
                ]
            ),
            phase_header=None,
            max_gap="30 s",
        ),
        (
            Limit("TMP high", "tmp", "psi", high=1.3 * BAR),
            Limit("Feed low", "feed_flow", "L/h", low=120 * L_H, phase="diafilter"),
        ),
        (
            Injected("TMP high", 2, 0.5, 5, 1.45 * BAR),
            Injected("Feed low", 1, 0.45, 10, 60 * L_H),
        ),
    )
    return cases


CASE_SPECS = _build_cases()
CASES: list[str] = list(CASE_SPECS)

LONG_COLUMNS = _cols(
    [
        ("feed_pressure", "PT-01", "psi", 3),
        ("retentate_pressure", "PT-02", "psi", 3),
        ("permeate_pressure", "PT-03", "psi", 3),
        ("feed_flow", "FT-01", "mL/min", 2),
        ("permeate_flow", "FT-02", "mL/min", 3),
        ("permeate_mass", "WT-02", "g", 2),
        ("retentate_volume", "LT-01", "mL", 1),
        ("temperature", "TT-01", "degC", 2),
        ("extra:ph", "AT-01 pH", "pH", 3),
        ("extra:conductivity", "CT-01", "mS/cm", 3),
    ]
)


def long_case(rows: int, dt: float = 1.0) -> Case:
    """A long run for benchmarks: ``rows`` samples every ``dt`` s, ISO timestamps with offset,
    a step column, ten channels (eight mapped, pH and conductivity not), four excursions.

    The 24 h shape (4 h concentrate, 16 h diafilter, 2 h concentrate, 2 h recover) is
    stretched to any length; flux constant and fouling time scale with it, so the volumes
    follow the same curve."""
    total = round((rows - 1) * dt)
    scale = total / 86_400.0
    shares = [4, 16, 2, 2]
    seconds = [round(total * s / 24 / dt) * dt for s in shares[:-1]]
    seconds.append(total - sum(seconds))
    feed = 3.0 * L_MIN
    tmps = (1.00 * BAR, 0.92 * BAR, 1.05 * BAR, 0.45 * BAR)
    steps = tuple(
        Step(name, kind, sec / 60.0, 1.0 * L_MIN if kind == "recover" else feed, tmp,
             600.0 * scale if kind == "recover" else 0.0)
        for name, kind, sec, tmp in zip(["concentrate", "diafilter", "concentrate", "recover"],
                                        ["concentrate", "diafilter", "concentrate", "recover"],
                                        seconds, tmps, strict=True)
    )  # fmt: skip
    process = _pilot_process(
        steps, v0_m3=200e-3, k0_m_s=13 * LMH / scale, tau_s=30 * 3600.0 * scale,
        dp_coeff=0.4 * BAR / feed, temp_drift_k_s=2.0 / total,
    )  # fmt: skip
    fmt = Format(
        dt_s=dt,
        start_utc=datetime(2025, 5, 6, 5, 0, tzinfo=UTC),
        time_header="Timestamp",
        time_style="iso",
        zone="+02:00",
        columns=LONG_COLUMNS,
        phase_header="Step",
    )
    limits = (
        Limit("TMP high", "tmp", "psi", high=1.3 * BAR),
        Limit("Feed flow low", "feed_flow", "mL/min", low=2400 * ML_MIN, phase="diafilter"),
        Limit("Temperature", "temperature", "degC", high=_celsius(27.0)),
    )
    injected = (
        Injected("TMP high", 1, 0.2, 30, 1.6 * BAR),
        Injected("TMP high", 1, 0.7, 5, 1.5 * BAR),
        Injected("Feed flow low", 1, 0.5, 12, 1500 * ML_MIN),
        Injected("Temperature", 2, 0.5, 60, _celsius(28.0)),
    )
    return Case(f"long-{rows}", "benchmark log", process, fmt, limits, injected)


def write_long_log(rows: int, out_dir: Path, seed: int = 1) -> tuple[Path, Path]:
    """Write ``long_case(rows)``: the CSV and its mapping (no truth, no design checks)."""
    case = long_case(rows)
    out_dir.mkdir(parents=True, exist_ok=True)
    csv, mapping = out_dir / f"{case.name}.csv", out_dir / f"{case.name}.mapping.toml"
    write_csv(case, simulate(case, seed), csv)
    mapping.write_text(mapping_text(case), encoding="utf-8")
    return csv, mapping


def at_interval(case: str | Case, dt: float, seed: int = 1) -> Case:
    """The same run (``case`` varied by ``seed`` as ``case_spec`` does) sampled every ``dt``
    seconds, named "<case>-<dt>s". Its injected excursions are left out: each lasts a number
    of samples, so it would differ from one interval to the next; the limits stay (the
    design checks then require that no sample leaves them), and a mapping's largest gap
    becomes five intervals. Every phase must last a whole number of intervals (``Model``
    refuses it otherwise)."""
    spec = case_spec(case, seed)
    gap = f"{5 * dt:g} s" if spec.fmt.max_gap else None  # the mapping's gap rule, scaled
    return replace(
        spec,
        name=f"{spec.name}-{dt:g}s",
        fmt=replace(spec.fmt, dt_s=float(dt), max_gap=gap),
        injected=(),
    )


def case_spec(case: str | int | Case, seed: int) -> Case:
    """The case, its process varied a little by seed (flux constant, start volume, TMP)."""
    if isinstance(case, Case):
        return case
    spec = CASE_SPECS[CASES[case] if isinstance(case, int) else case]
    if seed == 0:
        return spec
    rng = np.random.default_rng([seed, 7])
    p = spec.process
    p = replace(
        p,
        k0_m_s=p.k0_m_s * rng.uniform(0.94, 1.06),
        v0_m3=p.v0_m3 * rng.uniform(0.96, 1.04),
        tmp0_pa=p.tmp0_pa * rng.uniform(0.97, 1.03),
        temp0_k=p.temp0_k + rng.uniform(-1.0, 1.0),
    )
    return replace(spec, process=p)


# --- sampling and writing a case -----------------------------------------------------------


@dataclass
class Sampled:
    """A simulated log before writing: sample times, phase index, noisy SI channels."""

    t: np.ndarray
    phase: np.ndarray  # phase (step) index per sample
    si: dict[str, np.ndarray]
    model: Model
    excursion_rows: list[tuple[str, int, int]]  # (limit name, first sample, samples)
    true: dict[str, np.ndarray] = field(default_factory=dict)  # noise-free channels


def _excursion_rows(case: Case, model: Model, n: int) -> list[tuple[str, int, int]]:
    rows = []
    dt = case.fmt.dt_s
    for inj in case.injected:
        if inj.at == "end":
            i0 = n - inj.samples
        else:
            assert isinstance(inj.at, float)
            first, nxt = round(model.bounds[inj.step] / dt), round(model.bounds[inj.step + 1] / dt)
            i0 = first + round(inj.at * (nxt - first))
            if i0 - 1 < first or i0 + inj.samples >= nxt:
                raise ValueError(f"design: excursion {inj.limit} touches a phase boundary")
        rows.append((inj.limit, i0, inj.samples))
    return rows


def simulate(case: Case, seed: int) -> Sampled:
    """Sample the continuous model every dt, inject the excursions, add the noise."""
    p, dt = case.process, case.fmt.dt_s
    model = Model(p, dt)
    n = round(model.bounds[-1] / dt) + 1
    t = np.arange(n) * dt
    ph = model.phase_of(t)
    v = model.volume(t)
    qp = model.permeate_flow(t, v)
    cum = model.cumulative_permeate(t, v)
    tmp = model.tmp_base(t)
    qf = model.feed_flow(t).astype(float)
    temp = model.temperature(t)
    limits = {lim.name: lim for lim in case.limits}
    rows = _excursion_rows(case, model, n)
    for inj, (name, i0, k) in zip(case.injected, rows, strict=True):
        target = {"tmp": tmp, "feed_flow": qf, "temperature": temp}[limits[name].channel]
        target[i0 : i0 + k] = inj.value
    pp = model.permeate_pressure(t)
    dp = p.dp_coeff * qf * (1 + 0.5 * (model.mass / v) / p.cg_kg_m3)
    true = {
        "feed_pressure": tmp + pp + dp / 2,
        "retentate_pressure": tmp + pp - dp / 2,
        "permeate_pressure": pp,
        "feed_flow": qf,
        "permeate_flow": qp,
        "permeate_mass": cum * p.density_kg_m3,
        "retentate_volume": v,
        "temperature": temp,
        "tmp": tmp,
    }
    rng = np.random.default_rng(seed)
    noisy: dict[str, np.ndarray] = {}
    for name in ("feed_pressure", "retentate_pressure", "permeate_pressure"):
        noisy[name] = true[name] + rng.normal(0.0, NOISE["pressure_pa"], n)
    for name in ("feed_flow", "permeate_flow"):
        noisy[name] = true[name] * (1 + rng.normal(0.0, NOISE["flow_rel"], n))
    noisy["permeate_mass"] = true["permeate_mass"] + rng.normal(0.0, NOISE["mass_kg"], n)
    noisy["retentate_volume"] = v + rng.normal(0.0, NOISE["volume_m3"], n)
    noisy["temperature"] = temp + rng.normal(0.0, NOISE["temperature_k"], n)
    noisy["extra:ph"] = 7.2 + 0.05 * np.sin(t / 5000.0) + rng.normal(0.0, 0.01, n)
    noisy["extra:conductivity"] = 1.45 + 0.02 * np.sin(t / 7000.0) + rng.normal(0.0, 0.002, n)
    return Sampled(t, ph, noisy, model, rows, true)


def _timestamps(fmt: Format, t: np.ndarray) -> list[str]:
    zone = _tz(fmt.zone)
    out = []
    for s in t:
        when = (fmt.start_utc + timedelta(seconds=float(s))).astimezone(zone)
        if fmt.time_style == "iso":
            out.append(when.isoformat())
        elif fmt.time_style == "iso-z":
            out.append(when.strftime("%Y-%m-%dT%H:%M:%SZ"))
        else:
            out.append(when.strftime(fmt.time_format or "%Y-%m-%d %H:%M:%S"))
    return out


def _iso(fmt: Format, t: float) -> str:
    return (fmt.start_utc + timedelta(seconds=float(t))).isoformat()


def _q(value: float, unit: str) -> str:
    return f"{float(from_si(value, unit)):.10g} {unit}"


def _toml_str(s: str) -> str:
    return json.dumps(s, ensure_ascii=False)


def mapping_text(case: Case) -> str:
    """The case's mapping TOML (format of the agreed skid-log interface)."""
    fmt = case.fmt
    lines = [
        f"# Mapping of an invented skid export ({case.name}); tests/reference/skidsim.py",
        "[time]",
        f"column = {_toml_str(fmt.time_header)}",
    ]
    if fmt.time_style == "local" and fmt.time_format:
        lines.append(f"format = {_toml_str(fmt.time_format)}")
    if fmt.mapping_timezone:
        lines.append(f"timezone = {_toml_str(fmt.mapping_timezone)}")
    if fmt.max_gap:
        lines.append(f"max_gap = {_toml_str(fmt.max_gap)}")
    lines += ["", "[channels]"]
    for col in fmt.columns:
        if col.channel.startswith("extra"):
            continue
        extra = ""
        if col.channel == "permeate_mass" and fmt.density:
            extra = f", density = {_toml_str(fmt.density)}"
        lines.append(
            f"{col.channel} = {{ column = {_toml_str(col.header)}, "
            f"unit = {_toml_str(col.unit or '')}{extra} }}"
        )
    if fmt.phase_header:
        lines.append(f"phase = {{ column = {_toml_str(fmt.phase_header)} }}")
    return "\n".join(lines) + "\n"


def limits_text(case: Case) -> str:
    """The case's limits TOML ([[range]] tables of the agreed interface)."""
    lines = [f"# Planned ranges for {case.name}; tests/reference/skidsim.py"]
    for lim in case.limits:
        lines += ["", "[[range]]", f"name = {_toml_str(lim.name)}", f'channel = "{lim.channel}"']
        if lim.low is not None:
            lines.append(f'low = "{_q(lim.low, lim.unit)}"')
        if lim.high is not None:
            lines.append(f'high = "{_q(lim.high, lim.unit)}"')
        if lim.phase is not None:
            lines.append(f"phase = {_toml_str(lim.phase)}")
    return "\n".join(lines) + "\n"


def write_csv(case: Case, sampled: Sampled, path: Path) -> dict[str, np.ndarray]:
    """Write the CSV; return the written values read back in SI (after rounding)."""
    import pandas as pd

    fmt = case.fmt
    data: dict[str, Any] = {fmt.time_header: _timestamps(fmt, sampled.t)}
    if fmt.phase_header:
        labels = np.array([s.name for s in case.process.steps], dtype=object)
        data[fmt.phase_header] = labels[sampled.phase]
    back: dict[str, np.ndarray] = {}
    for col in fmt.columns:
        unit = col.unit or "pH"
        shown = np.round(from_si(sampled.si[col.channel], unit), col.decimals)
        shown = np.where(shown == 0, 0.0, shown)  # no "-0.0"
        data[col.header] = shown
        back[col.channel] = to_si(shown, unit)
    pd.DataFrame(data).to_csv(path, index=False, lineterminator="\n")
    return back


# --- the truth -----------------------------------------------------------------------------


def _quad(f: Callable[[float], float], a: float, b: float, points: Sequence[float]) -> float:
    inner = sorted({float(x) for x in points if a < x < b})
    value, _ = integrate.quad(f, a, b, points=inner or None, limit=2000, epsrel=1e-11, epsabs=0)
    return float(value)


def _worst_tolerance(channel: str, value: float) -> float:
    """Five noise sd plus rounding: how far a sampled worst value may sit from the truth."""
    if channel == "tmp":
        return 5 * NOISE["pressure_pa"] * math.sqrt(1.5) + 100.0
    if channel == "feed_flow":
        return 5 * NOISE["flow_rel"] * abs(value) + 1e-9
    return 5 * NOISE["temperature_k"] + 0.01


def truth_of(case: Case, sampled: Sampled) -> dict[str, Any]:
    """Every checked quantity from the continuous model (closed forms, brentq, quad)."""
    model, fmt, dt = sampled.model, case.fmt, case.fmt.dt_s
    limits = {lim.name: lim for lim in case.limits}
    rects: list[tuple[float, float, float]] = []  # TMP excursions: (a, b, value)
    excursions = []
    n = len(sampled.t)
    for inj, (name, i0, k) in zip(case.injected, sampled.excursion_rows, strict=True):
        lim = limits[name]
        a, b = (i0 - 0.5) * dt, (i0 + k - 0.5) * dt
        if lim.channel == "tmp":
            rects.append((a, b, inj.value))
        side = "low" if lim.low is not None and inj.value < lim.low else "high"
        excursions.append(
            {
                "name": name,
                "channel": lim.channel,
                "phase": lim.phase,
                "side": side,
                "limit_si": lim.low if side == "low" else lim.high,
                "start": _iso(fmt, i0 * dt),
                "start_s": i0 * dt,
                "duration_s": k * dt,
                "samples": k,
                "worst_si": inj.value,
                "worst_tolerance_si": _worst_tolerance(lim.channel, inj.value),
                "ends_log": i0 + k == n,
                "source": SOURCES["excursion"],
            }
        )

    def tmp(t: float) -> float:
        for a, b, value in rects:
            if a <= t < b:
                return value
        return float(model.tmp_base(t))

    breaks = [*model.knots_t, *(x for a, b, _ in rects for x in (a, b))]
    phases = []
    steps = case.process.steps
    vol_integrals, tmp_integrals = [], []
    for i, s in enumerate(steps):
        t1, t2 = float(model.bounds[i]), float(model.bounds[i + 1])
        last = i + 1 == len(steps)
        v1 = model.v_start[i]
        v2 = model.v_end if last else model.v_start[i + 1]
        perm = (model.perm_total if last else model.perm_start[i + 1]) - model.perm_start[i]
        buffer = perm - (v1 - v2)
        v_int = _quad(model.volume_at, t1, t2, []) if s.kind == "concentrate" else v1 * (t2 - t1)
        tmp_int = _quad(tmp, t1, t2, breaks)
        vol_integrals.append(v_int)
        tmp_integrals.append(tmp_int)
        phases.append(
            {
                "phase": s.name,
                "kind": s.kind,
                "start": _iso(fmt, t1),
                "end": _iso(fmt, t2),
                "start_s": t1,
                "end_s": t2,
                "duration_s": t2 - t1,
                "permeate_volume_m3": perm,
                "buffer_m3": buffer,
                "initial_volume_m3": v1,
                "final_volume_m3": v2,
                "mean_volume_m3": v_int / (t2 - t1),
                "concentration_factor": v1 / v2,
                "diavolumes": buffer / (v_int / (t2 - t1)),
                "tmp_mean_pa": tmp_int / (t2 - t1),
            }
        )
    t_end = float(model.bounds[-1])
    run_buffer = sum(ph["buffer_m3"] for ph in phases)
    run_mean_v = sum(vol_integrals) / t_end
    run = {
        "phase": None,
        "start": _iso(fmt, 0.0),
        "end": _iso(fmt, t_end),
        "start_s": 0.0,
        "end_s": t_end,
        "duration_s": t_end,
        "permeate_volume_m3": model.perm_total,
        "buffer_m3": run_buffer,
        "initial_volume_m3": case.process.v0_m3,
        "final_volume_m3": model.v_end,
        "mean_volume_m3": run_mean_v,
        "concentration_factor": case.process.v0_m3 / model.v_end,
        "diavolumes": run_buffer / run_mean_v,
        "tmp_mean_pa": sum(tmp_integrals) / t_end,
    }
    return {
        "case": case.name,
        "description": case.description,
        "sample_interval_s": dt,
        "rows": n,
        "start": run["start"],
        "end": run["end"],
        "run": run,
        "phases": phases,
        "excursions": excursions,
        "sources": SOURCES,
        "noise": NOISE,
        "model": {
            "area_m2": case.process.area_m2,
            "k0_m_s": case.process.k0_m_s,
            "tau_s": case.process.tau_s,
            "cg_kg_m3": case.process.cg_kg_m3,
            "product_kg": model.mass,
            "density_kg_m3": case.process.density_kg_m3,
        },
    }


# --- generate ------------------------------------------------------------------------------


def _cli_args(case: Case, paths: dict[str, Path], truth: dict[str, Any]) -> tuple[str, ...]:
    args = [str(paths["csv"]), "--mapping", str(paths["mapping"])]
    args += ["--limits", str(paths["limits"])]
    p = case.process
    if case.geometry:
        args += ["--area", f"{p.area_m2:.6g} m^2", "--fibers", str(p.fibers)]
        args += ["--lumen-diameter", f"{p.lumen_diameter_m * 1e3:.6g} mm"]
    if case.fmt.phase_header is None:
        for i, ph in enumerate(truth["phases"]):
            last = i == len(truth["phases"]) - 1
            # windows hold samples with start <= t < end: the last one reaches past the end
            end = _iso(case.fmt, ph["end_s"] + case.fmt.dt_s) if last else ph["end"]
            args += ["--phase", f"{ph['phase']}={ph['start']}/{end}"]
    return (*args, "--json")


def generate(case: str | int | Case, seed: int, out_dir: Path, *, check: bool = True) -> CasePaths:
    """Write case ``case`` (a name or an index into CASES) with noise ``seed`` into out_dir:
    the CSV, its mapping TOML, the limits TOML and truth.json (a Case object is written as
    it is, without the seed's variation). ``check`` runs the design
    checks of ``check_case`` (noise creates or hides no excursion; the agreed definitions
    applied to the written data reach the truth within 0.25 %)."""
    spec = case_spec(case, seed)
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    stem = f"{spec.name}-s{seed}"
    paths = {
        "csv": out_dir / f"{stem}.csv",
        "mapping": out_dir / f"{stem}.mapping.toml",
        "limits": out_dir / f"{stem}.limits.toml",
        "truth": out_dir / f"{stem}.truth.json",
    }
    sampled = simulate(spec, seed)
    written = write_csv(spec, sampled, paths["csv"])
    paths["mapping"].write_text(mapping_text(spec), encoding="utf-8")
    paths["limits"].write_text(limits_text(spec), encoding="utf-8")
    truth = truth_of(spec, sampled)
    truth["seed"] = seed
    args = _cli_args(spec, paths, truth)
    truth["cli_args"] = list(args)
    if check:
        problems = check_case(spec, sampled, written, truth)
        if problems:
            raise AssertionError(f"{stem}: the reference case is ill-posed: " + "; ".join(problems))
    paths["truth"].write_text(json.dumps(truth, indent=2), encoding="utf-8")
    return CasePaths(spec.name, seed, paths["csv"], paths["mapping"], paths["limits"],
                     paths["truth"], args)  # fmt: skip


# --- design checks: the agreed definitions in plain numpy on the written data ---------------


END_WINDOW_S = 30.0  # the agreed window of a phase's start and end for its volumes


def _lsq_end(t: np.ndarray, y: np.ndarray, at: float, window_s: float, first: bool) -> float:
    """The agreed end value: at time ``at``, the straight line fitted (numpy.polyfit) to the
    samples within ``window_s`` of ``at`` (after it for the start, before it for the end);
    with fewer than two there, to the two samples nearest ``at``; one sample is the value."""
    near = t <= at + window_s if first else t >= at - window_s
    m = min(max(int(np.count_nonzero(near)), 2), len(t))
    tt, yy = (t[:m], y[:m]) if first else (t[-m:], y[-m:])
    if m < 2:
        return float(yy[0])
    _, intercept = np.polyfit(tt - at, yy, 1)
    return float(intercept)


def agreed_estimates(
    t: np.ndarray, phase: np.ndarray, si: dict[str, np.ndarray], density: float, phases: int
) -> list[dict[str, float]]:
    """The agreed definitions (skid-log interface) computed directly: per phase, then run."""
    tmp = (si["feed_pressure"] + si["retentate_pressure"]) / 2 - si["permeate_pressure"]
    n = len(t)
    spans = [(int(np.argmax(phase == i)), int(n - np.argmax(phase[::-1] == i)))
             for i in range(phases)]  # fmt: skip
    spans.append((0, n))
    out = []
    for a, b in spans:
        stop = b + 1 if b < n else n  # through the next phase's first sample
        tt = t[a:stop]
        if "permeate_mass" in si:
            perm = (si["permeate_mass"][stop - 1] - si["permeate_mass"][a]) / density
        else:
            perm = float(np.trapezoid(si["permeate_flow"][a:stop], tt))
        # the run's start and end values come from its first and last phase only
        head = spans[0][1] if (a, b) == (0, n) else b
        tail = spans[phases - 1][0] if (a, b) == (0, n) else a
        v = si["retentate_volume"]
        vi = _lsq_end(t[a:head], v[a:head], tt[0], END_WINDOW_S, True)
        vf = _lsq_end(t[tail:b], v[tail:b], tt[-1], END_WINDOW_S, False)
        vmean = float(np.trapezoid(si["retentate_volume"][a:stop], tt)) / (tt[-1] - tt[0])
        out.append(
            {
                "duration_s": float(tt[-1] - tt[0]),
                "permeate_volume_m3": perm,
                "initial_volume_m3": vi,
                "final_volume_m3": vf,
                "concentration_factor": vi / vf,
                "diavolumes": (perm + vf - vi) / vmean,
                "tmp_mean_pa": float(np.trapezoid(tmp[a:stop], tt)) / (tt[-1] - tt[0]),
            }
        )
    return out


CHECKED = ("duration_s", "permeate_volume_m3", "diavolumes", "concentration_factor", "tmp_mean_pa")
WASH_DV = 0.5  # below this many true diavolumes a phase had no real wash: judge in absolute DV


def relative_error(quantity: str, truth: float, got: float) -> tuple[float, str]:
    """The error measure of a checked quantity: relative, or absolute DV for ~0 diavolumes."""
    if quantity == "diavolumes" and abs(truth) < WASH_DV:
        return abs(got - truth), "abs DV"
    return abs(got - truth) / abs(truth), "rel"


def check_case(
    case: Case, sampled: Sampled, written: dict[str, np.ndarray], truth: dict[str, Any]
) -> list[str]:
    """Why a case would be an unfair test (empty when it is fair)."""
    problems = []
    steps = case.process.steps
    est = agreed_estimates(sampled.t, sampled.phase, written, case.process.density_kg_m3,
                           len(steps))  # fmt: skip
    for got, want in zip(est, [*truth["phases"], truth["run"]], strict=True):
        for q in CHECKED:
            err, _ = relative_error(q, want[q], got[q])
            if err > 0.0025:
                problems.append(f"{want['phase']} {q}: agreed estimate {got[q]:.6g} vs truth "
                                f"{want[q]:.6g} ({err:.2%})")  # fmt: skip
    # excursions: exactly the injected runs of samples are outside, nothing else
    tmp = (written["feed_pressure"] + written["retentate_pressure"]) / 2 - written[
        "permeate_pressure"
    ]
    derived = {"tmp": tmp, "feed_flow": written["feed_flow"], "temperature": written["temperature"]}
    found = []
    for lim in case.limits:
        y = derived[lim.channel]
        outside = np.zeros(len(y), dtype=bool)
        if lim.low is not None:
            outside |= y < lim.low
        if lim.high is not None:
            outside |= y > lim.high
        scope = np.ones(len(y), dtype=bool)
        if lim.phase is not None:
            scope = np.isin(sampled.phase, [i for i, s in enumerate(steps) if s.name == lim.phase])
        outside &= scope
        edges = np.flatnonzero(np.diff(np.r_[0, outside.astype(int), 0]))
        found += [(lim.name, int(a), int(b - a)) for a, b in zip(edges[::2], edges[1::2],
                                                                  strict=True)]  # fmt: skip
        # noise alone must never cross a limit: the profile stays >= 8 sd away from it
        inside = scope & ~outside
        bounds = [b for b in (lim.low, lim.high) if b is not None]
        margin = min(float(np.min(np.abs(y[inside] - b), initial=np.inf)) for b in bounds)
        noise = {"tmp": NOISE["pressure_pa"] * math.sqrt(1.5),
                 "feed_flow": NOISE["flow_rel"] * float(np.max(np.abs(y))),
                 "temperature": NOISE["temperature_k"]}[lim.channel]  # fmt: skip
        if margin < 8 * noise:
            problems.append(f"{lim.name}: the profile comes within {margin / noise:.1f} sd of "
                            "the limit")  # fmt: skip
    if sorted(found) != sorted(sampled.excursion_rows):
        problems.append(f"excursions in the written data {found} != injected "
                        f"{sampled.excursion_rows}")  # fmt: skip
    return problems


# --- comparing a `log summarize --json` result with the truth -------------------------------


@cache
def _ureg() -> Any:
    import pint

    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def q_si(q: dict[str, Any] | None, si_unit: str) -> float | None:
    """A JSON quantity {"value", "unit"} in an SI unit (pint, its stock registry)."""
    if q is None:
        return None
    return float(_ureg().Quantity(q["value"], q["unit"]).to(si_unit).magnitude)


@dataclass(frozen=True)
class Check:
    quantity: str
    scope: str  # "run" or "<index>:<phase>"
    truth: float
    got: float | None
    error: float
    tolerance: float
    measure: str  # "rel" | "abs DV" | "s" | "found"
    source: str

    @property
    def ok(self) -> bool:
        return self.got is not None and math.isfinite(self.error) and self.error <= self.tolerance

    def __str__(self) -> str:
        return (f"{self.scope} {self.quantity}: got {self.got!r}, truth {self.truth!r} "
                f"({self.measure} error {self.error:.3g}, tolerance {self.tolerance:g}; truth "
                f"from {self.source})")  # fmt: skip


@dataclass(frozen=True)
class ExcursionCheck:
    name: str
    truth: dict[str, Any]
    got: dict[str, Any] | None
    start_error_samples: float
    duration_error_samples: float
    worst_error_si: float
    side_ok: bool

    @property
    def ok(self) -> bool:
        return (
            self.got is not None
            and self.side_ok
            and abs(self.start_error_samples) <= 1.0
            and abs(self.duration_error_samples) <= 1.0
            and self.worst_error_si <= self.truth["worst_tolerance_si"]
        )

    def __str__(self) -> str:
        if self.got is None:
            return f"{self.name} at {self.truth['start']}: not found"
        return (f"{self.name} at {self.truth['start']}: start {self.start_error_samples:+.2f}, "
                f"duration {self.duration_error_samples:+.2f} samples, worst off by "
                f"{self.worst_error_si:.4g} (SI; allowed {self.truth['worst_tolerance_si']:.4g}),"
                f" side {'ok' if self.side_ok else 'WRONG'}")  # fmt: skip


TOLERANCE = 0.005  # the 0.5 %
KEYS = {
    "duration_s": ("duration", "s"),
    "permeate_volume_m3": ("permeate_volume", "m**3"),
    "concentration_factor": ("concentration_factor", None),
    "diavolumes": ("diavolumes", None),
}
SOURCE_OF = {
    "duration_s": SOURCES["duration"],
    "permeate_volume_m3": SOURCES["permeate_volume"],
    "concentration_factor": SOURCES["concentration_factor"],
    "diavolumes": SOURCES["diavolumes"],
    "tmp_mean_pa": SOURCES["tmp_mean"],
}
SI_OF_CHANNEL = {"tmp": "Pa", "feed_flow": "m**3/s", "temperature": "K"}


def _got(actuals: dict[str, Any], quantity: str) -> float | None:
    if quantity == "tmp_mean_pa":
        channel = (actuals.get("channels") or {}).get("tmp")
        return q_si(channel["mean"], "Pa") if channel else None
    key, unit = KEYS[quantity]
    value = actuals.get(key)
    if value is None:
        return None
    return q_si(value, unit) if unit else float(value)


def _instant(text: str) -> datetime:
    return datetime.fromisoformat(text.replace("Z", "+00:00"))


def compare(
    truth: dict[str, Any], result: dict[str, Any]
) -> tuple[list[Check], list[ExcursionCheck], list[dict[str, Any]]]:
    """Check one `log summarize --json` result against its truth.

    Returns the quantity checks (run and each phase, in order), one check per true excursion,
    and the reported excursions that match none (spurious)."""
    checks: list[Check] = []
    dt = truth["sample_interval_s"]
    start0 = _instant(truth["start"])
    got_phases = result.get("phases") or []
    pairs: list[tuple[str, dict[str, Any], dict[str, Any] | None]] = [
        ("run", truth["run"], result.get("run"))
    ]
    for i, want in enumerate(truth["phases"]):
        pairs.append((f"{i}:{want['phase']}", want, got_phases[i] if i < len(got_phases) else None))
    if len(got_phases) != len(truth["phases"]):
        checks.append(Check("phase count", "run", len(truth["phases"]), len(got_phases),
                            math.inf, 0, "found", "the simulator's phase list"))  # fmt: skip
    for scope, want, got in pairs:
        if got is None or (scope != "run" and got.get("phase") != want["phase"]):
            shown = got and got.get("phase")
            checks.append(Check("phase", scope, math.nan, None, math.inf, 0, "found",
                                f"the simulator's phase list (got {shown!r})"))  # fmt: skip
            continue
        for q in CHECKED:
            value = _got(got, q)
            err, measure = (math.inf, "rel") if value is None else relative_error(q, want[q], value)
            checks.append(Check(q, scope, want[q], value, err, TOLERANCE, measure, SOURCE_OF[q]))
        for end in ("start", "end"):
            value = (_instant(got[end]) - start0).total_seconds()
            err = abs(value - want[f"{end}_s"])
            checks.append(Check(f"{end} time", scope, want[f"{end}_s"], value, err, 1e-3, "s",
                                SOURCES["start"]))  # fmt: skip
    found = list(result.get("excursions") or [])
    exc_checks = []
    for want in truth["excursions"]:
        best, best_err = None, math.inf
        for got in found:
            err = abs((_instant(got["start"]) - start0).total_seconds() - want["start_s"])
            if got.get("name") == want["name"] and err < best_err:
                best, best_err = got, err
        if best is None or best_err > 1.5 * dt:
            exc_checks.append(ExcursionCheck(want["name"], want, None, math.inf, math.inf,
                                             math.inf, False))  # fmt: skip
            continue
        found.remove(best)
        start_err = ((_instant(best["start"]) - start0).total_seconds() - want["start_s"]) / dt
        dur = q_si(best.get("duration"), "s")
        worst = q_si(best.get("worst"), SI_OF_CHANNEL[want["channel"]])
        exc_checks.append(
            ExcursionCheck(
                want["name"],
                want,
                best,
                start_err,
                (math.inf if dur is None else dur - want["duration_s"]) / dt,
                math.inf if worst is None else abs(worst - want["worst_si"]),
                best.get("side") == want["side"],
            )
        )
    return checks, exc_checks, found
