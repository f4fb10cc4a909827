"""Does a cleaning follow its validated procedure? (DEVELOPERS.md: agent, concentration,
temperature and contact time within the procedure's ranges; the final rinse at its endpoint.)

Pure: SI values in (K, s, S/m; a concentration in the procedure's own SI unit), the list of
deviations out, empty when the cleaning conforms. The ranges are the site's, from its
validated cleaning procedure; fluxledger only compares.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Procedure:
    """A validated cleaning procedure's ranges (None: the procedure sets no such limit)."""

    code: str
    agent: str
    concentration_min: float
    concentration_max: float
    concentration_unit: str  # the SI unit of both bounds: mol/m**3, kg/m**3 or "" (fraction)
    temperature_min_k: float
    temperature_max_k: float
    contact_time_min_s: float
    rinse_ph_min: float | None = None
    rinse_ph_max: float | None = None
    rinse_conductivity_max_s_m: float | None = None


@dataclass(frozen=True)
class Done:
    """What was done, as recorded."""

    agent: str
    concentration: float
    concentration_unit: str
    temperature_k: float
    contact_time_s: float
    rinse_ph: float | None = None
    rinse_conductivity_s_m: float | None = None


def _c(kelvin: float) -> str:
    return f"{kelvin - 273.15:.1f} °C"


# How concentrations read in a message: (factor from the SI value, unit shown).
_SHOWN = {"mol/m**3": (1e-3, "mol/L"), "kg/m**3": (1.0, "g/L"), "": (100.0, "%")}


def _conc(value: float, unit: str) -> str:
    factor, shown = _SHOWN.get(unit, (1.0, unit))
    return f"{value * factor:.3g} {shown}"


def deviations(done: Done, proc: Procedure) -> list[str]:
    """Every way the cleaning departs from the procedure, in words; [] when it conforms."""
    out: list[str] = []
    if done.agent.strip().casefold() != proc.agent.strip().casefold():
        out.append(f"agent {done.agent!r} is not the procedure's {proc.agent!r}")
    if done.concentration_unit != proc.concentration_unit:
        kind = _SHOWN.get(proc.concentration_unit, (1.0, proc.concentration_unit))[1]
        out.append(f"the concentration is not given in the procedure's kind of unit ({kind})")
    elif not proc.concentration_min <= done.concentration <= proc.concentration_max:
        unit = proc.concentration_unit
        out.append(f"concentration {_conc(done.concentration, unit)} is outside "
                   f"{_conc(proc.concentration_min, unit)}–"
                   f"{_conc(proc.concentration_max, unit)}")  # fmt: skip
    if not proc.temperature_min_k <= done.temperature_k <= proc.temperature_max_k:
        out.append(f"temperature {_c(done.temperature_k)} is outside "
                   f"{_c(proc.temperature_min_k)}–{_c(proc.temperature_max_k)}")  # fmt: skip
    if done.contact_time_s < proc.contact_time_min_s:
        out.append(f"contact time {done.contact_time_s / 60:.0f} min is shorter than the "
                   f"procedure's {proc.contact_time_min_s / 60:.0f} min")  # fmt: skip
    if proc.rinse_ph_min is not None or proc.rinse_ph_max is not None:
        low = proc.rinse_ph_min if proc.rinse_ph_min is not None else 0.0
        high = proc.rinse_ph_max if proc.rinse_ph_max is not None else 14.0
        if done.rinse_ph is None:
            out.append("no final rinse pH recorded; the procedure sets its endpoint")
        elif not low <= done.rinse_ph <= high:
            out.append(f"final rinse pH {done.rinse_ph:g} is outside {low:g}–{high:g}")
    if proc.rinse_conductivity_max_s_m is not None:
        limit_us_cm = proc.rinse_conductivity_max_s_m * 1e4  # 1 S/m = 10⁴ µS/cm
        if done.rinse_conductivity_s_m is None:
            out.append("no final rinse conductivity recorded; the procedure sets its endpoint")
        elif done.rinse_conductivity_s_m > proc.rinse_conductivity_max_s_m:
            out.append(f"final rinse conductivity {done.rinse_conductivity_s_m * 1e4:.3g} µS/cm "
                       f"is above {limit_us_cm:.3g} µS/cm")  # fmt: skip
    return out
