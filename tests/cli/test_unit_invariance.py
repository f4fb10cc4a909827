"""Hypothesis: a calculator's answer does not depend on the units its inputs were typed in."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.world import invoke

PRESSURE = [("psi", 1 / 6894.757293168), ("bar", 1e-5), ("kPa", 1e-3), ("mbar", 1e-2)]
FLOW = [("mL/min", 6e7), ("L/h", 3.6e6), ("L/min", 6e4), ("m^3/s", 1.0)]
AREA = [("m^2", 1.0), ("cm^2", 1e4), ("ft^2", 1 / 0.3048**2)]
LENGTH = [("mm", 1e3), ("um", 1e6), ("cm", 1e2), ("in", 1 / 0.0254)]


def typed(si: float, unit: tuple[str, float]) -> str:
    return f"{si * unit[1]!r} {unit[0]}"


def temperature(kelvin: float, scale: str) -> str:
    value = {"K": kelvin, "degC": kelvin - 273.15, "degF": (kelvin - 273.15) * 9 / 5 + 32}
    return f"{value[scale]!r} {scale}"


def nwp_json(args: list[str]) -> float:
    result = invoke(["calc", "nwp", *args, "--json"])
    assert result.code == 0, result.stderr
    import json

    return float(json.loads(result.stdout)["results"]["nwp"]["value"])


@settings(max_examples=25)
@given(
    st.sampled_from(PRESSURE),
    st.sampled_from(FLOW),
    st.sampled_from(AREA),
    st.sampled_from(["K", "degC", "degF"]),
)
def test_nwp_same_in_any_units(
    p_unit: tuple[str, float], q_unit: tuple[str, float], a_unit: tuple[str, float], t_scale: str
) -> None:
    q, a, pf, pr, pp, t = 4.1e-6, 0.0565, 31_700.0, 28_900.0, 1_380.0, 294.45
    reference = nwp_json(
        ["--permeate-flow", typed(q, FLOW[0]), "--area", typed(a, AREA[0]),
         "--feed", typed(pf, PRESSURE[0]), "--retentate", typed(pr, PRESSURE[0]),
         "--permeate", typed(pp, PRESSURE[0]), "--temperature", temperature(t, "degC")]
    )  # fmt: skip
    other = nwp_json(
        ["--permeate-flow", typed(q, q_unit), "--area", typed(a, a_unit),
         "--feed", typed(pf, p_unit), "--retentate", typed(pr, p_unit),
         "--permeate", typed(pp, p_unit), "--temperature", temperature(t, t_scale)]
    )  # fmt: skip
    assert other == pytest.approx(reference, rel=1e-9)


@settings(max_examples=20)
@given(st.sampled_from(LENGTH), st.sampled_from(FLOW))
def test_shear_same_in_any_units(d_unit: tuple[str, float], q_unit: tuple[str, float]) -> None:
    import json

    def gamma(d: str, q: str) -> float:
        result = invoke(
            ["calc", "shear", "--fibers", "50", "--lumen-id", d, "--feed-flow", q, "--json"]
        )
        assert result.code == 0, result.stderr
        return float(json.loads(result.stdout)["results"]["wall_shear_rate"]["value"])

    base = gamma(typed(0.7e-3, LENGTH[0]), typed(2e-6, FLOW[0]))
    assert gamma(typed(0.7e-3, d_unit), typed(2e-6, q_unit)) == pytest.approx(base, rel=1e-9)
