"""A recorded water-flux test stores the NWP that an independent computation gives.

Reference: NWP(T_ref) = Qp/(A·TMP) · µ(T)/µ(T_ref) (DEVELOPERS.md), with the viscosities from the
PyPI package `iapws` (IAPWS-95 at 0.101325 MPa), not from ledger.science.
"""

from __future__ import annotations

import pytest
from iapws import IAPWS95

from tests.world import World

# Not about the database itself: SQLite only (tests/store covers PostgreSQL).
pytestmark = pytest.mark.sqlite_only


PSI = 6894.757293168  # Pa, exact by definition of the pound-force and inch
AREA = 565e-4  # m², the test module type's area


def _mu(t_c: float) -> float:
    return float(IAPWS95(T=t_c + 273.15, P=0.101325).mu)


@pytest.mark.parametrize("t_c", [8.0, 20.0, 31.5])
def test_recorded_nwp_matches_iapws(world: World, t_c: float) -> None:
    world.add_module()
    out = world.as_user(
        "op.kim",
        "test",
        "water",
        "QMB-0142",
        "--stage",
        "baseline",
        "--feed",
        "3.2 psi",
        "--retentate",
        "2.8 psi",
        "--permeate",
        "0.1 psi",
        "--flow",
        "150 mL/min",
        "--temperature",
        f"{t_c} degC",
        "--json",
    )
    rec = world.ok(out).json()["record"]
    tmp = (3.2 + 2.8) / 2 * PSI - 0.1 * PSI
    q = 150e-6 / 60
    expected = q / (AREA * tmp) * _mu(t_c) / _mu(20.0)  # m/(s·Pa)
    # 1 m/(s·Pa) = 1000 L/m² · 3600 s/h · 1e5 Pa/bar = 3.6e11 LMH/bar
    assert rec["nwp"]["unit"] == "L/(m^2*h*bar)"
    assert rec["nwp"]["value"] == pytest.approx(expected * 3.6e11, rel=3e-4)
    assert rec["tmp"]["value"] == pytest.approx(tmp / 1e5, rel=1e-12)
    # Membrane resistance Rm = TMP/(µ·J) at the test temperature (DEVELOPERS.md).
    assert rec["resistance"]["value"] == pytest.approx(tmp / (_mu(t_c) * q / AREA), rel=3e-4)
