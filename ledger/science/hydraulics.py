"""Laminar flow in hollow-fiber lumens: shear, pressure drop, Reynolds number (SI units).

Per fiber of inner diameter D (m) and effective length L (m) carrying Q (m³/s), for fully
developed Hagen–Poiseuille flow (any fluid-mechanics text, e.g. Bird, Stewart & Lightfoot,
*Transport Phenomena*, 2nd ed., §2.3):

    wall shear rate  γ = 4·Q/(π·r³) = 32·Q/(π·D³)        (1/s)
    pressure drop    ΔP = 8·µ·L·Q/(π·r⁴) = 128·µ·L·Q/(π·D⁴)  (Pa)
    Reynolds number  Re = ρ·v·D/µ, v = Q/(π·D²/4)

The laminar model is trusted below Re = 2100 (common practice for tubes; transition lies
between about 2100 and 4000). Feed is assumed to split evenly among fibers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ledger.errors import DomainError
from ledger.science import water
from ledger.science.guards import positive, whole

LAMINAR_LIMIT = 2100.0


def per_fiber_flow(feed_flow_m3_s: float, fibers: int) -> float:
    """Flow in one fiber (m³/s) = Q_feed / N."""
    return positive("feed_flow", feed_flow_m3_s) / _fibers(fibers)


def _fibers(fibers: int) -> int:
    return whole("fibers", fibers)


def wall_shear_rate(fiber_flow_m3_s: float, lumen_diameter_m: float) -> float:
    """Wall shear rate (1/s) for laminar flow in a tube: 32·Q/(π·D³)."""
    d = positive("lumen_id", lumen_diameter_m)
    return 32.0 * positive("fiber_flow", fiber_flow_m3_s) / (math.pi * d**3)


def pressure_drop(
    fiber_flow_m3_s: float, lumen_diameter_m: float, length_m: float, viscosity_pa_s: float
) -> float:
    """Axial pressure drop (Pa) along a fiber, Hagen–Poiseuille: 128·µ·L·Q/(π·D⁴)."""
    d = positive("lumen_id", lumen_diameter_m)
    q = positive("fiber_flow", fiber_flow_m3_s)
    return (
        128.0
        * positive("viscosity", viscosity_pa_s)
        * positive("length", length_m)
        * q
        / (math.pi * d**4)
    )


def reynolds(
    fiber_flow_m3_s: float, lumen_diameter_m: float, density_kg_m3: float, viscosity_pa_s: float
) -> float:
    """Reynolds number in the lumen, ρ·v·D/µ = 4·ρ·Q/(π·D·µ)."""
    d = positive("lumen_id", lumen_diameter_m)
    q = positive("fiber_flow", fiber_flow_m3_s)
    return (
        4.0
        * positive("density", density_kg_m3)
        * q
        / (math.pi * d * positive("viscosity", viscosity_pa_s))
    )


def feed_flow_for_shear(target_shear_1_s: float, fibers: int, lumen_diameter_m: float) -> float:
    """Total feed flow (m³/s) that gives wall shear rate γ: N·γ·π·D³/32."""
    d = positive("lumen_id", lumen_diameter_m)
    return _fibers(fibers) * positive("target_shear", target_shear_1_s) * math.pi * d**3 / 32.0


@dataclass(frozen=True)
class FiberHydraulics:
    """Hydraulics of a hollow-fiber module at one feed flow (SI units)."""

    feed_flow: float
    fiber_flow: float
    velocity: float
    wall_shear_rate: float
    wall_shear_stress: float
    reynolds: float
    laminar: bool
    pressure_drop: float | None  # None when no length was given
    viscosity: float
    density: float
    temperature: float


def module_hydraulics(
    fibers: int,
    lumen_diameter_m: float,
    *,
    feed_flow_m3_s: float | None = None,
    target_shear_1_s: float | None = None,
    length_m: float | None = None,
    temperature_k: float = 293.15,
    viscosity_pa_s: float | None = None,
    density_kg_m3: float | None = None,
) -> FiberHydraulics:
    """Hydraulics from a feed flow, or the feed flow for a target wall shear (one of the two).

    Viscosity and density default to water at ``temperature_k`` (IAPWS 2008, Kell 1975); pass
    them for a product with other properties.
    """
    if (feed_flow_m3_s is None) == (target_shear_1_s is None):
        raise DomainError(
            "give exactly one of feed_flow and target_shear",
            field="feed_flow",
            value=None,
            expected="either a feed flow or a target wall shear rate",
        )
    t = water.check_temperature(temperature_k)
    mu = water.viscosity(t) if viscosity_pa_s is None else positive("viscosity", viscosity_pa_s)
    rho = water.density(t) if density_kg_m3 is None else positive("density", density_kg_m3)
    if feed_flow_m3_s is None:
        assert target_shear_1_s is not None
        feed = feed_flow_for_shear(target_shear_1_s, fibers, lumen_diameter_m)
    else:
        feed = positive("feed_flow", feed_flow_m3_s)
    q = per_fiber_flow(feed, fibers)
    gamma = wall_shear_rate(q, lumen_diameter_m)
    re = reynolds(q, lumen_diameter_m, rho, mu)
    dp = None if length_m is None else pressure_drop(q, lumen_diameter_m, length_m, mu)
    return FiberHydraulics(
        feed_flow=feed,
        fiber_flow=q,
        velocity=q / (math.pi * lumen_diameter_m**2 / 4.0),
        wall_shear_rate=gamma,
        wall_shear_stress=mu * gamma,
        reynolds=re,
        laminar=re < LAMINAR_LIMIT,
        pressure_drop=dp,
        viscosity=mu,
        density=rho,
        temperature=t,
    )


def lumen_area(fibers: int, lumen_diameter_m: float, length_m: float) -> float:
    """Inner (lumen-side) membrane area of a hollow-fiber module (m²): N·π·D·L.

    The wall of each fiber is a cylinder of inner diameter D over its effective length L; the
    ends potted in the headers carry no flow and are left out (L is the effective length).
    """
    return (
        _fibers(fibers)
        * math.pi
        * positive("lumen_id", lumen_diameter_m)
        * positive("length", length_m)
    )
