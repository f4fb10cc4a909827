"""Concentration and diafiltration formulas against numerical integration of mass balances."""

from __future__ import annotations

import math

import pytest
from scipy import integrate

from ledger.science import concentration as conc


@pytest.mark.parametrize("sieving", [1.0, 0.6, 0.2])
def test_constant_volume_washout_against_ode(sieving: float) -> None:
    # Independent computation: retentate mass balance at constant volume V with permeate
    # flow F: V·dC/dt = −S·F·C. Integrating with solve_ivp over N = F·t/V diavolumes.
    n = 4.2

    sol = integrate.solve_ivp(lambda t, c: -sieving * c, (0, n), [1.0], rtol=1e-11, atol=1e-14)
    assert conc.washout_remaining(n, sieving) == pytest.approx(sol.y[0, -1], rel=1e-8)


def test_diavolumes_common_practice_values() -> None:
    # Common practice (e.g. Cheryan 1998, ch. 8): about 3 DV remove 95 %, about 7 DV 99.9 %
    # of a freely passing solute.
    assert conc.washout_remaining(3, 1.0) == pytest.approx(0.0498, abs=1e-4)
    assert conc.diavolumes_for_removal(0.999) == pytest.approx(6.908, abs=1e-3)


@pytest.mark.parametrize("rejection", [1.0, 0.98, 0.8, 0.0])
def test_concentration_with_rejection_against_ode(rejection: float) -> None:
    # Independent computation: d(C·V)/dV = (1 − R)·C while V falls (permeate carries (1−R)·C),
    # i.e. dC/dV = −R·C/V, integrated from V0 = 1 to Vf = 1/CF.
    cf = 6.0
    sol = integrate.solve_ivp(
        lambda v, c: -rejection * c / v, (1.0, 1.0 / cf), [1.0], rtol=1e-11, atol=1e-14
    )
    ratio = sol.y[0, -1]
    assert conc.concentrated_ratio(cf, rejection) == pytest.approx(ratio, rel=1e-8)
    assert conc.concentration_yield(cf, rejection) == pytest.approx(ratio / cf, rel=1e-8)


def test_discontinuous_against_step_simulation() -> None:
    # Independent computation: simulate each step — dilute (mass unchanged), then concentrate
    # back, integrating dM/dV = S·M/V numerically — and compare the remaining fraction.
    d, steps, s = 2.0, 5, 0.9
    mass = 1.0
    for _ in range(steps):
        sol = integrate.solve_ivp(lambda v, m: s * m / v, (d, 1.0), [mass], rtol=1e-11, atol=1e-14)
        mass = sol.y[0, -1]
    got = conc.discontinuous_diafiltration(d, steps, s)
    assert got.remaining == pytest.approx(mass, rel=1e-8)
    assert got.buffer_per_volume == pytest.approx(steps * (d - 1.0))


def test_discontinuous_uses_more_buffer_than_continuous() -> None:
    # Textbook result (van Reis & Zydney 2007): constant-volume DF needs less buffer than
    # dilute/concentrate cycles for the same removal; two-fold dilution needs ln 2 more per DV.
    got = conc.discontinuous_diafiltration(2.0, 10, 1.0)
    assert got.buffer_per_volume / got.continuous_buffer_per_volume == pytest.approx(
        1 / math.log(2.0), rel=1e-12
    )
