"""The demo's skid export: an invented bench skid's data log of one LNP buffer exchange.

Demo data only. The run follows a gel-polarization flux law J = k·ln(Cg/C) with invented
constants: by default it concentrates 1.2 L of a 0.5 g/L feed to 300 mL, diafilters at
constant volume with 5.5 diavolumes, concentrates to 100 mL and recovers; one short TMP spike
during diafiltration is part of the story (the demo records a deviation for it). The fleet's
longer runs (``Shape``) set other volumes, sample every second, step the TMP set point up
part-way through diafiltration and let the membrane foul: the flux falls towards
``1 - fouling`` of the clean-membrane value with a time constant of ``fouling_tau_s``.
Written in the skid's own format: day-first local times, psi, mL/min, grams on the permeate
balance.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

PSI = 6894.757293168
AREA = 0.0565  # m², the demo module type
K_LMH, CG = 9.0, 50.0  # invented gel-model constants: LMH, g/L
FEED_G_L = 0.5  # lipid concentration of the feed, g/L
DIAVOLUMES = 5.5


@dataclass(frozen=True)
class Shape:
    """The run a log describes: volumes in L, times in s, the TMP step in bar (0: none) and
    the fouling as the fraction of flux lost in the end (0: none)."""

    initial_l: float = 1.2
    df_l: float = 0.300
    final_l: float = 0.100
    tmp_step_s: float | None = None  # into diafiltration
    tmp_step_bar: float = 0.0
    fouling: float = 0.0
    fouling_tau_s: float = 3600.0


@dataclass(frozen=True)
class Log:
    """A simulated export: its CSV lines and when each phase ended (s from the start)."""

    lines: list[str]
    phase_ends: dict[str, float]


def write_log(
    path: Path,
    start: datetime,
    *,
    step_s: float = 2.0,
    seed: int = 117,
    pinch_s: float | None = 2100.0,
    shape: Shape | None = None,
) -> Path:
    """Write the export to ``path``; ``start`` is an aware datetime (the run's start).
    ``pinch_s`` is when, into diafiltration, the permeate line pinches for 24 s (a TMP
    excursion); None for a run without one."""
    log = simulate(start, step_s=step_s, seed=seed, pinch_s=pinch_s, shape=shape)
    path.write_text("\n".join(log.lines) + "\n", encoding="utf-8")
    return path


def simulate(
    start: datetime,
    *,
    step_s: float = 2.0,
    seed: int = 117,
    pinch_s: float | None = 2100.0,
    shape: Shape | None = None,
) -> Log:
    """The export of one run started at ``start`` (see :func:`write_log`)."""
    import numpy as np

    run = shape or Shape()
    mass_g = FEED_G_L * run.initial_l
    rng = np.random.default_rng(seed)
    local = ZoneInfo("Europe/Dublin")
    rows = ["Time Stamp,Step,PT-101 Feed,PT-102 Retentate,PT-103 Permeate,FIT-101 Feed,"
            "FIT-103 Permeate,WT-103 Balance,LT-101 Level,TT-101 Temp"]  # fmt: skip
    t = 0.0
    volume = run.initial_l  # L
    collected = 0.0  # g of permeate (density 1.0 g/mL, as the mapping says)
    buffer_added = 0.0
    phase, phase_start = "equilibrate", 0.0
    ends: dict[str, float] = {}
    while True:
        conc = mass_g / volume
        tmp_bar = 0.25 + rng.normal(0, 0.004)
        flux_lmh = K_LMH * math.log(CG / conc) if phase != "recover" else 0.0
        if run.fouling:
            flux_lmh *= 1 - run.fouling * (1 - math.exp(-t / run.fouling_tau_s))
        if run.tmp_step_s is not None and (
            phase == "concentrate_final"
            or (phase == "diafilter" and t - phase_start >= run.tmp_step_s)
        ):
            tmp_bar += run.tmp_step_bar  # the planned step up of the TMP set point
        if phase == "equilibrate":
            flux_lmh = 0.0
        if (
            pinch_s is not None
            and phase == "diafilter"
            and pinch_s <= t - phase_start < pinch_s + 24
        ):
            tmp_bar = 0.52  # the permeate valve pinched for 24 s
        qp = flux_lmh * AREA / 60 * 1000  # mL/min
        feed = 350.0 + rng.normal(0, 2.0) if phase != "recover" else 60.0
        dp = 0.12 + 0.004 * conc
        pp = 0.02
        pf = tmp_bar + pp + dp / 2
        pr = pf - dp
        temp = 20.0 + 0.4 * math.sin(t / 1800) + rng.normal(0, 0.03)
        when = (start + timedelta(seconds=t)).astimezone(local)
        rows.append(
            f"{when:%d/%m/%Y %H:%M:%S},{phase},{pf * 1e5 / PSI:.3f},{pr * 1e5 / PSI:.3f},"
            f"{pp * 1e5 / PSI:.3f},{feed:.1f},{qp:.2f},{collected:.1f},"
            f"{volume * 1000 + rng.normal(0, 1.0):.1f},{temp:.2f}"
        )
        dv = qp / 60 * step_s / 1000  # L of permeate in this step
        collected += dv * 1000
        if phase == "concentrate" or phase == "concentrate_final":
            volume -= dv
        elif phase == "diafilter":
            buffer_added += dv
        t += step_s
        nxt = _next_phase(phase, t - phase_start, volume, buffer_added, run)
        if nxt != phase:
            ends[phase] = t
        if nxt == "end":
            break
        if nxt != phase:
            phase = nxt
            phase_start = t
    return Log(rows, ends)


def _next_phase(phase: str, elapsed: float, volume: float, buffer_added: float,
                run: Shape) -> str:  # fmt: skip
    """The skid's step logic: each step ends on time, level or buffer used."""
    if phase == "equilibrate" and elapsed >= 300:
        return "concentrate"
    if phase == "concentrate" and volume <= run.df_l:
        return "diafilter"
    if phase == "diafilter" and buffer_added >= DIAVOLUMES * run.df_l:
        return "concentrate_final"
    if phase == "concentrate_final" and volume <= run.final_l:
        return "recover"
    if phase == "recover" and elapsed >= 180:
        return "end"
    return phase
