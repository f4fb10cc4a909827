"""A module type's stated membrane area against the inner lumen area of its fibers.

Plain values in (m²), a verdict out. Published module specifications quote the area at the
fibers' inner (lumen) surface or as a rounded nominal figure, so the stated area and
fibers × π × lumen diameter × effective length seldom agree exactly; a difference beyond
AREA_TOLERANCE is far more often a typo (a unit, a digit) or a wrong fiber count or length.
"""

from __future__ import annotations

from dataclasses import dataclass

from ledger.rules.water_test import at_most

# Common practice, no single source: a stated area within 15 % of the lumen area is taken as
# the manufacturer's nominal figure; a site may know its types better and state a tighter one.
AREA_TOLERANCE = 0.15


@dataclass(frozen=True)
class AreaCheck:
    """The stated area against the computed lumen area (m²) and their relative difference."""

    stated_m2: float
    lumen_m2: float
    difference: float  # |stated − lumen| / lumen
    tolerance: float
    agrees: bool


def check_area(stated_m2: float, lumen_m2: float, tolerance: float = AREA_TOLERANCE) -> AreaCheck:
    """Does the stated area agree with the lumen area within ``tolerance`` (a fraction)?

    The edge agrees (``rules.water_test.at_most``: at the limit passes, within a relative
    1e-9). ``lumen_m2`` must be above zero (the geometry was checked before).
    """
    difference = abs(stated_m2 - lumen_m2) / lumen_m2
    return AreaCheck(stated_m2, lumen_m2, difference, tolerance, at_most(difference, tolerance))


def area_message(check: AreaCheck, geometry: str) -> str:
    """Why a stated area is refused, with both areas and the geometry in words."""
    percent = check.difference * 100
    return (
        f"the stated area {check.stated_m2:.4g} m² differs by {percent:.4g} % from the "
        f"inner lumen area {check.lumen_m2:.4g} m² ({geometry}); published specifications "
        "quote the lumen-side or a rounded nominal area, so a small difference is usual, but "
        f"more than {check.tolerance * 100:g} % points at a typo in the area, the fiber count, the "
        "lumen diameter or the length"
    )
