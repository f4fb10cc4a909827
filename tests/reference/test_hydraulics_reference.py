"""Hagen–Poiseuille shear and pressure drop against numerical integration of the profile."""

from __future__ import annotations

import math

import pytest
from scipy import integrate

from ledger.science import hydraulics, water


@pytest.mark.parametrize(
    ("diameter", "length", "dp"), [(0.5e-3, 0.3, 5e3), (1.0e-3, 0.2, 2e3), (0.2e-3, 0.1, 2e4)]
)
def test_poiseuille_against_integrated_parabolic_profile(
    diameter: float, length: float, dp: float
) -> None:
    # Independent computation: u(r) = ΔP/(4µL)·(R² − r²) (Navier–Stokes for steady laminar
    # pipe flow), Q = ∫ 2πr·u(r) dr by scipy quadrature, wall shear rate = |du/dr| at r = R
    # by a central finite difference. The module must give back ΔP and γ from Q.
    mu = water.viscosity(293.15)
    radius = diameter / 2

    def u(r: float) -> float:
        return dp / (4 * mu * length) * (radius**2 - r**2)

    q, _ = integrate.quad(lambda r: 2 * math.pi * r * u(r), 0, radius, epsabs=0, epsrel=1e-12)
    h = radius * 1e-6
    gamma_numeric = abs((u(radius + h) - u(radius - h)) / (2 * h))
    assert hydraulics.pressure_drop(q, diameter, length, mu) == pytest.approx(dp, rel=1e-9)
    assert hydraulics.wall_shear_rate(q, diameter) == pytest.approx(gamma_numeric, rel=1e-6)


def test_feed_flow_for_shear_inverts_wall_shear() -> None:
    feed = hydraulics.feed_flow_for_shear(4000.0, 120, 0.5e-3)
    assert hydraulics.wall_shear_rate(feed / 120, 0.5e-3) == pytest.approx(4000.0, rel=1e-12)


def test_worked_example_common_practice_shear() -> None:
    # Worked by hand: 1 mm lumen, 2000 1/s -> per fiber Q = γπD³/32 = 1.9635e-7 m³/s
    # = 11.78 mL/min (the order of magnitude quoted in hollow-fiber practice for 1 mm fibers).
    q = hydraulics.feed_flow_for_shear(2000.0, 1, 1e-3)
    assert q * 6e7 == pytest.approx(11.781, rel=1e-4)


def test_reynolds_definition() -> None:
    # Re = ρvD/µ with v = Q/(πD²/4): 1 mm tube, v = 1 m/s, water at 20 °C -> Re ≈ 996.6.
    mu, rho = water.viscosity(293.15), water.density(293.15)
    q = math.pi * 1e-3**2 / 4 * 1.0
    assert hydraulics.reynolds(q, 1e-3, rho, mu) == pytest.approx(rho * 1.0 * 1e-3 / mu)
    assert hydraulics.reynolds(q, 1e-3, rho, mu) == pytest.approx(996.6, rel=1e-3)
