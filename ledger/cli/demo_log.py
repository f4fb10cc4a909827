"""The demo's skid export: an invented bench skid's data log of one LNP buffer exchange.

Demo data only. The run follows a gel-polarization flux law J = k·ln(Cg/C) with invented
constants, concentrates 1.2 L to 300 mL, diafilters at constant volume, concentrates to
100 mL and recovers; one short TMP spike during diafiltration is part of the story (the
demo records a deviation for it). Written in the skid's own format: day-first local times,
psi, mL/min, grams on the permeate balance.
"""

from __future__ import annotations

import math
from datetime import datetime, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

PSI = 6894.757293168
AREA = 0.0565  # m², the demo module type
K_LMH, CG = 9.0, 50.0  # invented gel-model constants: LMH, g/L
MASS_G = 0.6  # lipid in the feed, g


def write_log(
    path: Path,
    start: datetime,
    *,
    step_s: float = 2.0,
    seed: int = 117,
    pinch_s: float | None = 2100.0,
) -> Path:
    """Write the export to ``path``; ``start`` is an aware datetime (the run's start).
    ``pinch_s`` is when, into diafiltration, the permeate line pinches for 24 s (a TMP
    excursion); None for a run without one."""
    import numpy as np

    rng = np.random.default_rng(seed)
    local = ZoneInfo("Europe/Dublin")
    rows = ["Time Stamp,Step,PT-101 Feed,PT-102 Retentate,PT-103 Permeate,FIT-101 Feed,"
            "FIT-103 Permeate,WT-103 Balance,LT-101 Level,TT-101 Temp"]  # fmt: skip
    t = 0.0
    volume = 1.2  # L
    collected = 0.0  # g of permeate (density 1.0 g/mL, as the mapping says)
    buffer_added = 0.0
    phase, phase_start = "equilibrate", 0.0
    while True:
        conc = MASS_G / volume
        tmp_bar = 0.25 + rng.normal(0, 0.004)
        flux_lmh = K_LMH * math.log(CG / conc) if phase != "recover" else 0.0
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
        nxt = _next_phase(phase, t - phase_start, volume, buffer_added)
        if nxt == "end":
            break
        if nxt != phase:
            phase = nxt
            phase_start = t
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path


def _next_phase(phase: str, elapsed: float, volume: float, buffer_added: float) -> str:
    """The skid's step logic: each step ends on time, level or buffer used."""
    if phase == "equilibrate" and elapsed >= 300:
        return "concentrate"
    if phase == "concentrate" and volume <= 0.300:
        return "diafilter"
    if phase == "diafilter" and buffer_added >= 5.5 * 0.300:
        return "concentrate_final"
    if phase == "concentrate_final" and volume <= 0.100:
        return "recover"
    if phase == "recover" and elapsed >= 180:
        return "end"
    return phase
