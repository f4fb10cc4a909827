"""Actuals of a skid log, per phase and for the run, and every excursion outside a range.

SI throughout. Definitions (DEVELOPERS.md and the tests rely on them):

- A phase is a run of consecutive samples with one label of the phase column, or the samples
  of a user's time window (start <= t < end). It spans from its first sample to the first
  sample after it (the last phase ends at the last sample); duration = end - start.
- Integrals (permeate volume from flow) and time-weighted means use the trapezoid rule over
  the phase's samples and the first sample after it, so phase integrals add up to the run's.
- Permeate volume: the balance's mass change over the density when a balance is mapped, else
  the integrated permeate flow. Initial and final retentate volume (and the flux at start and
  end) are the value at the phase's start or end of a least-squares line through its first or
  last 30 samples (60 for flux): robust to level-sensor noise.
- Diavolumes = (permeate volume + final volume - initial volume) / mean retentate volume, i.e.
  buffer added over working volume (near 0 for a pure concentration).
- An excursion is a maximal run of consecutive samples outside a range; it starts at the first
  sample outside and ends at the first sample back inside (or one median interval after the
  last sample if the log ends outside), so n samples at 1 Hz last n s.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, field
from datetime import datetime, timedelta
from typing import Any

import numpy as np

from ledger.runs.skidlog import SkidLog

END_WINDOW = 30  # samples for the volume end estimates
FLUX_WINDOW = 60


@dataclass(frozen=True)
class Geometry:
    area_m2: float | None = None
    fibers: int | None = None
    lumen_diameter_m: float | None = None


@dataclass(frozen=True)
class Range:
    name: str
    channel: str
    low: float | None
    high: float | None
    phase: str | None = None


@dataclass(frozen=True)
class PhaseWindow:
    name: str
    start: datetime
    end: datetime


@dataclass
class Stats:
    mean: float
    min: float
    max: float


@dataclass
class Excursion:
    name: str
    channel: str
    phase: str | None
    side: str
    limit: float
    start: datetime
    end: datetime
    duration_s: float
    worst: float
    samples: int


@dataclass
class Actuals:
    phase: str | None
    start: datetime
    end: datetime
    samples: int
    duration_s: float
    stats: dict[str, Stats] = field(default_factory=dict)
    permeate_volume_m3: float | None = None
    permeate_source: str | None = None
    initial_volume_m3: float | None = None
    final_volume_m3: float | None = None
    concentration_factor: float | None = None
    diavolumes: float | None = None
    flux_start_m_s: float | None = None
    flux_end_m_s: float | None = None
    flux_decline: float | None = None


@dataclass
class NotComputed:
    what: str
    why: str


@dataclass
class Summary:
    source: str
    sha256: str | None
    rows: int
    start: datetime
    end: datetime
    run: Actuals
    phases: list[Actuals]
    excursions: list[Excursion]
    not_computed: list[NotComputed]
    assumptions: list[str]

    def scope(self, phase: str | None) -> Actuals | None:
        if phase is None:
            return self.run
        return next((p for p in self.phases if p.phase == phase), None)

    def metric(self, name: str, phase: str | None = None) -> float | None:
        """A scalar actual by metric name (see ledger.runs.template) in a phase or the run."""
        a = self.scope(phase)
        if a is None:
            return None
        if "." in name:
            channel, stat = name.split(".", 1)
            s = a.stats.get(channel)
            return None if s is None else float(getattr(s, stat))
        fields = {"duration": a.duration_s, "permeate_volume": a.permeate_volume_m3,
                  "initial_volume": a.initial_volume_m3, "final_volume": a.final_volume_m3,
                  "concentration_factor": a.concentration_factor, "diavolumes": a.diavolumes,
                  "flux_decline": a.flux_decline}  # fmt: skip
        return fields.get(name)

    def to_record(self) -> dict[str, Any]:
        """JSON-ready (SI, ISO 8601 times); :meth:`from_record` reads it back exactly."""
        return _jsonable(asdict(self))

    @classmethod
    def from_record(cls, d: Mapping[str, Any]) -> Summary:
        def actuals(a: dict[str, Any]) -> Actuals:
            a = dict(a)
            a["start"], a["end"] = _time(a["start"]), _time(a["end"])
            a["stats"] = {k: Stats(**v) for k, v in a["stats"].items()}
            return Actuals(**a)

        return cls(
            source=d["source"],
            sha256=d["sha256"],
            rows=d["rows"],
            start=_time(d["start"]),
            end=_time(d["end"]),
            run=actuals(d["run"]),
            phases=[actuals(p) for p in d["phases"]],
            excursions=[
                Excursion(**{**e, "start": _time(e["start"]), "end": _time(e["end"])})
                for e in d["excursions"]
            ],
            not_computed=[NotComputed(**n) for n in d["not_computed"]],
            assumptions=list(d["assumptions"]),
        )


def _time(text: str) -> datetime:
    return datetime.fromisoformat(text)


def _jsonable(v: Any) -> Any:
    if isinstance(v, datetime):
        return v.isoformat()
    if isinstance(v, dict):
        return {k: _jsonable(x) for k, x in v.items()}
    if isinstance(v, list | tuple):
        return [_jsonable(x) for x in v]
    if isinstance(v, float | np.floating):
        return float(v)
    if isinstance(v, np.integer):
        return int(v)
    return v


def derived_channels(log: SkidLog, geometry: Geometry) -> tuple[dict[str, Any], list[NotComputed]]:
    """Our channels in SI from the mapped ones, and what could not be derived and why."""
    ch = log.channels
    out: dict[str, Any] = {}
    missing: list[NotComputed] = []
    for name in ("feed_pressure", "retentate_pressure", "permeate_pressure", "feed_flow",
                 "permeate_flow", "temperature", "retentate_volume"):  # fmt: skip
        if name in ch:
            out[name] = ch[name]
    pressures = [
        p for p in ("feed_pressure", "retentate_pressure", "permeate_pressure") if p not in ch
    ]
    if not pressures:
        out["tmp"] = (ch["feed_pressure"] + ch["retentate_pressure"]) / 2 - ch["permeate_pressure"]
    else:
        missing.append(NotComputed("tmp", "needs feed, retentate and permeate pressure; "
                                   f"{', '.join(pressures)} not mapped"))  # fmt: skip
    if "feed_pressure" in ch and "retentate_pressure" in ch:
        out["pressure_drop"] = ch["feed_pressure"] - ch["retentate_pressure"]
    else:
        missing.append(NotComputed("pressure_drop", "needs feed and retentate pressure"))
    if "feed_flow" in ch and geometry.fibers and geometry.lumen_diameter_m:
        # γ = 32·Q_fiber/(π·D³), laminar flow (DESIGN §4)
        out["wall_shear"] = (
            32 * (ch["feed_flow"] / geometry.fibers) / (math.pi * geometry.lumen_diameter_m**3)
        )
    else:
        why = (
            "needs feed_flow"
            if "feed_flow" not in ch
            else "needs the fiber count and lumen diameter (--fibers, --lumen-diameter)"
        )
        missing.append(NotComputed("wall_shear", why))
    if "permeate_flow" in ch and geometry.area_m2:
        out["flux"] = ch["permeate_flow"] / geometry.area_m2
    else:
        why = (
            "needs permeate_flow"
            if "permeate_flow" not in ch
            else "needs the membrane area (--area)"
        )
        missing.append(NotComputed("flux", why))
    if "permeate_mass" not in ch and "permeate_flow" not in ch:
        missing.append(NotComputed("permeate_volume", "needs permeate_flow or permeate_mass"))
    if "retentate_volume" not in ch:
        missing.append(
            NotComputed(
                "retentate_volume",
                "retentate_volume is not mapped: no volumes, concentration factor or diavolumes",
            )
        )
    return out, missing


def _segments(log: SkidLog, windows: Sequence[PhaseWindow] | None) -> list[tuple[str, int, int]]:
    n = log.rows
    if windows:
        t_abs = log.time_s
        out = []
        for w in windows:
            a = (w.start - log.start).total_seconds()
            b = (w.end - log.start).total_seconds()
            i0 = int(np.searchsorted(t_abs, a, side="left"))
            i1 = int(np.searchsorted(t_abs, b, side="left"))
            if i1 > i0:
                out.append((w.name, i0, i1))
        return out
    if log.phases is None:
        return []
    labels = log.phases
    change = np.flatnonzero(labels[1:] != labels[:-1]) + 1
    starts = np.concatenate(([0], change))
    ends = np.concatenate((change, [n]))
    return [(str(labels[a]), int(a), int(b)) for a, b in zip(starts, ends, strict=True)]


def _cumtrapz(x: Any, t: Any) -> Any:
    c = np.empty_like(x)
    c[0] = 0.0
    np.cumsum((x[1:] + x[:-1]) * 0.5 * np.diff(t), out=c[1:])
    return c


def _end_value(x: Any, t: Any, i0: int, i1: int, at: float, window: int, first: bool) -> float:
    k = min(window, i1 - i0)
    sl = slice(i0, i0 + k) if first else slice(i1 - k, i1)
    if k < 2:
        return float(x[sl][0])
    tt, xx = t[sl], x[sl]
    tm = tt.mean()
    slope = float(((tt - tm) * (xx - xx.mean())).sum() / ((tt - tm) ** 2).sum())
    return float(xx.mean() + slope * (at - tm))


def _actuals(
    log: SkidLog, ch: dict[str, Any], cum: dict[str, Any], name: str | None, i0: int, i1: int
) -> Actuals:
    t, n = log.time_s, log.rows
    j = min(i1, n - 1)  # the first sample after the phase closes its last interval
    t0, t1 = float(t[i0]), float(t[j])
    span = t1 - t0
    a = Actuals(
        phase=name,
        start=log.start + timedelta(seconds=t0),
        end=log.start + timedelta(seconds=t1),
        samples=i1 - i0,
        duration_s=span,
    )
    for key, x in ch.items():
        own = x[i0:i1]
        mean = float((cum[key][j] - cum[key][i0]) / span) if span > 0 else float(own.mean())
        a.stats[key] = Stats(mean, float(own.min()), float(own.max()))
    raw = log.channels
    if "permeate_mass" in raw:
        a.permeate_volume_m3 = (
            float(raw["permeate_mass"][j] - raw["permeate_mass"][i0]) / log.density_kg_m3
        )
        a.permeate_source = "permeate_mass"
    elif "permeate_flow" in raw:
        a.permeate_volume_m3 = float(cum["permeate_flow"][j] - cum["permeate_flow"][i0])
        a.permeate_source = "permeate_flow"
    if "retentate_volume" in raw:
        v = raw["retentate_volume"]
        a.initial_volume_m3 = _end_value(v, t, i0, i1, t0, END_WINDOW, True)
        a.final_volume_m3 = _end_value(v, t, i0, i1, t1, END_WINDOW, False)
        if a.final_volume_m3 > 0:
            a.concentration_factor = a.initial_volume_m3 / a.final_volume_m3
        mean_v = a.stats["retentate_volume"].mean
        if a.permeate_volume_m3 is not None and mean_v > 0:
            added = a.permeate_volume_m3 + a.final_volume_m3 - a.initial_volume_m3
            a.diavolumes = added / mean_v
    if "flux" in ch:
        a.flux_start_m_s = _end_value(ch["flux"], t, i0, i1, t0, FLUX_WINDOW, True)
        a.flux_end_m_s = _end_value(ch["flux"], t, i0, i1, t1, FLUX_WINDOW, False)
        if a.flux_start_m_s > 0:
            a.flux_decline = 1 - a.flux_end_m_s / a.flux_start_m_s
    return a


def _excursions(log: SkidLog, ch: dict[str, Any], ranges: Sequence[Range],
                segments: list[tuple[str, int, int]]) -> list[Excursion]:  # fmt: skip
    t, n = log.time_s, log.rows
    found: list[Excursion] = []
    for r in ranges:
        x = ch.get(r.channel)
        if x is None:
            continue
        scope = np.ones(n, dtype=bool)
        if r.phase is not None:
            scope[:] = False
            for name, i0, i1 in segments:
                if name == r.phase:
                    scope[i0:i1] = True
        low = -np.inf if r.low is None else r.low
        high = np.inf if r.high is None else r.high
        out = scope & ((x < low) | (x > high))
        if not out.any():
            continue
        edges = np.diff(np.concatenate(([0], out.view(np.int8), [0])))
        for a, b in zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1), strict=True):
            seg = x[a:b]
            above = r.high is not None and float(seg.max()) > high
            side = "high" if above else "low"
            worst = float(seg.max()) if above else float(seg.min())
            end_t = float(t[b]) if b < n else float(t[n - 1]) + log.median_step_s
            phase = next((nm for nm, i0, i1 in segments if i0 <= a < i1), None)
            found.append(Excursion(
                name=r.name, channel=r.channel, phase=phase, side=side,
                limit=float(high if above else low),
                start=log.start + timedelta(seconds=float(t[a])),
                end=log.start + timedelta(seconds=end_t),
                duration_s=end_t - float(t[a]), worst=worst, samples=int(b - a),
            ))  # fmt: skip
    found.sort(key=lambda e: (e.start, e.name))
    return found


def summarize(
    log: SkidLog,
    geometry: Geometry = Geometry(),
    ranges: Sequence[Range] = (),
    windows: Sequence[PhaseWindow] | None = None,
) -> Summary:
    """The run's and each phase's actuals, and every excursion outside ``ranges``."""
    ch, missing = derived_channels(log, geometry)
    cum = {k: _cumtrapz(v, log.time_s) for k, v in ch.items()}
    segments = _segments(log, windows)
    run = _actuals(log, ch, cum, None, 0, log.rows)
    run.end = log.start + timedelta(seconds=float(log.time_s[-1]))
    phases = [_actuals(log, ch, cum, name, i0, i1) for name, i0, i1 in segments]
    for r in ranges:
        if r.channel not in ch:
            why = next((m.why for m in missing if m.what == r.channel), "not mapped")
            missing.append(NotComputed(f"range {r.name}", f"{r.channel}: {why}"))
    return Summary(
        source=log.source,
        sha256=log.sha256,
        rows=log.rows,
        start=run.start,
        end=run.end,
        run=run,
        phases=phases,
        excursions=_excursions(log, ch, ranges, segments),
        not_computed=missing,
        assumptions=list(log.assumptions),
    )


KINDS = {"feed_pressure": "pressure", "retentate_pressure": "pressure",
         "permeate_pressure": "pressure", "tmp": "pressure", "pressure_drop": "pressure",
         "feed_flow": "flow", "permeate_flow": "flow", "wall_shear": "shear_rate",
         "flux": "flux", "temperature": "temperature", "retentate_volume": "volume"}  # fmt: skip


def summary_json(s: Summary) -> dict[str, Any]:
    """The summary as DESIGN §10 JSON: quantities as {"value", "unit"}, ISO 8601 times."""
    from ledger.units import quantity

    def q(v: float | None, kind: str) -> Any:
        return None if v is None else quantity(v, kind)

    def actuals(a: Actuals) -> dict[str, Any]:
        return {
            "phase": a.phase, "start": a.start.isoformat(), "end": a.end.isoformat(),
            "samples": a.samples, "duration": q(a.duration_s, "time"),
            "permeate_volume": q(a.permeate_volume_m3, "volume"),
            "permeate_source": a.permeate_source,
            "initial_volume": q(a.initial_volume_m3, "volume"),
            "final_volume": q(a.final_volume_m3, "volume"),
            "concentration_factor": a.concentration_factor, "diavolumes": a.diavolumes,
            "flux_start": q(a.flux_start_m_s, "flux"), "flux_end": q(a.flux_end_m_s, "flux"),
            "flux_decline": a.flux_decline,
            "channels": {k: {"mean": q(v.mean, KINDS[k]), "min": q(v.min, KINDS[k]),
                             "max": q(v.max, KINDS[k])} for k, v in a.stats.items()},
        }  # fmt: skip

    return {
        "file": s.source, "sha256": s.sha256, "rows": s.rows,
        "start": s.start.isoformat(), "end": s.end.isoformat(),
        "run": actuals(s.run), "phases": [actuals(p) for p in s.phases],
        "excursions": [
            {"name": e.name, "channel": e.channel, "phase": e.phase, "side": e.side,
             "limit": q(e.limit, KINDS[e.channel]), "start": e.start.isoformat(),
             "end": e.end.isoformat(), "duration": q(e.duration_s, "time"),
             "worst": q(e.worst, KINDS[e.channel]), "samples": e.samples}
            for e in s.excursions
        ],
        "not_computed": [{"what": n.what, "why": n.why} for n in s.not_computed],
        "assumptions": list(s.assumptions),
    }  # fmt: skip
