"""Planned parameters of the shipped LNP template against independent computations."""

from __future__ import annotations

import math

import pytest
from iapws import IAPWS95
from scipy.optimize import minimize_scalar

from ledger.errors import InputError
from ledger.runs import plan, template

MODULE = plan.ModuleFacts(
    serial="M-1", type_code="T", area_m2=0.0565, fibers=120, lumen_diameter_m=0.5e-3,
    fiber_length_m=0.30, max_volume_loading_m=0.2, max_mass_loading_kg_m2=None,
)  # fmt: skip
INPUTS = {
    "initial_volume": "1.2 L",
    "initial_concentration": "0.5 g/L",
    "df_concentration": "2 g/L",
    "target_concentration": "6 g/L",
}


@pytest.fixture(scope="module")
def lnp() -> plan.Plan:
    return plan.make_plan(template.find("QB-MR-LNP-101"), MODULE, INPUTS, product="P", lot="L")


def test_hydraulics(lnp: plan.Plan) -> None:
    # DEVELOPERS.md (laminar flow per fiber): γ = 4·Q_fiber/(π r³) -> Q_feed = N·γ·π·r³/4.
    r = 0.25e-3
    q = 120 * 4000.0 * math.pi * r**3 / 4
    assert lnp.value("feed_flow").value == pytest.approx(q, rel=1e-12)
    assert lnp.value("feed_flow").low == pytest.approx(0.9 * q)
    # Hagen–Poiseuille ΔP = 8·µ·L·Q_fiber/(π r⁴), µ of water at 20 °C from iapws IAPWS-95.
    mu = IAPWS95(T=293.15, P=0.101325).mu
    assert lnp.value("pressure_drop").value == pytest.approx(
        8 * mu * 0.30 * (q / 120) / (math.pi * r**4), rel=2e-4
    )


def test_volumes_diavolumes_and_times(lnp: plan.Plan) -> None:
    v0, c0, cdf, cf = 1.2e-3, 0.5, 2.0, 6.0
    mass = v0 * c0
    vdf, vf = mass / cdf, mass / cf
    # Constant-volume wash-out C/C0 = exp(−N·S) (DEVELOPERS.md): N = ln(1/(1−0.995)) at S = 1.
    n = math.log(1 / (1 - 0.995))
    assert lnp.value("df_volume").value == pytest.approx(vdf)
    assert lnp.value("first_factor").value == pytest.approx(v0 / vdf)
    assert lnp.value("diavolumes").value == pytest.approx(n)
    assert lnp.value("diavolumes").low == pytest.approx(n)
    assert lnp.value("diavolumes").high == pytest.approx(1.25 * n)
    assert lnp.value("buffer_volume").value == pytest.approx(n * vdf)
    assert lnp.value("final_volume").value == pytest.approx(vf)
    assert lnp.value("overall_factor").value == pytest.approx(v0 / vf)
    assert lnp.value("permeate_volume").value == pytest.approx(v0 - vf + n * vdf)
    # Time = permeate volume / (J·A), J = 35 LMH (the template's default).
    flux = 35 / 1000 / 3600
    assert lnp.value("duration_concentrate").value == pytest.approx((v0 - vdf) / (flux * 0.0565))
    assert lnp.value("duration_diafilter").value == pytest.approx(n * vdf / (flux * 0.0565))


def test_loading_is_checked_against_the_type_and_missing_limits_are_said(lnp: plan.Plan) -> None:
    checks = {c.name: c for c in lnp.checks}
    assert lnp.value("volume_loading").value == pytest.approx(1.2e-3 / 0.0565)
    assert checks["volume_loading"].verdict == "PASS"
    assert checks["mass_loading"].verdict == "MISSING"
    assert "maximum mass loading" in (lnp.value("mass_loading").missing or "")
    over = plan.make_plan(
        template.find("QB-MR-LNP-101"), MODULE, {**INPUTS, "initial_volume": "12 L"}
    )
    assert {c.name: c for c in over.checks}["volume_loading"].verdict == "FAIL"


def test_gel_optimum_against_a_numerical_minimum() -> None:
    # Points of J = k·ln(Cg/C) with k = 20 LMH, Cg = 30 g/L (constructed, exact).
    k, cg = 20 / 3.6e6, 30.0
    pts = [(c, k * math.log(cg / c)) for c in (1.0, 2.0, 4.0, 8.0, 12.0)]
    tm = template.find("QB-MR-LNP-101")
    p = plan.make_plan(tm, MODULE, INPUTS, scouting=pts)
    assert p.advice is not None
    mass, n, area = 0.6e-3, p.value("diavolumes").value, 0.0565

    def df_time(c: float) -> float:  # t = N·(M/C)/(k·ln(Cg/C)·A)
        return n * (mass / c) / (k * math.log(cg / c) * area)

    best = minimize_scalar(df_time, bounds=(0.5, 29.0), method="bounded", options={"xatol": 1e-9})
    assert p.advice.optimum_concentration_kg_m3 == pytest.approx(best.x, rel=1e-5)
    assert p.advice.planned_time_s == pytest.approx(df_time(2.0), rel=1e-9)
    assert p.advice.time_saved_s == pytest.approx(df_time(2.0) - best.fun, rel=1e-6)


def test_inputs_are_validated() -> None:
    tm = template.find("QB-MR-LNP-101")
    with pytest.raises(InputError, match="--input initial_volume"):
        plan.make_plan(tm, MODULE, {**INPUTS, "initial_volume": "1.2 bar"})
    with pytest.raises(InputError, match="has no input 'volume'"):
        plan.make_plan(tm, MODULE, {**INPUTS, "volume": "1 L"})
    missing = dict(INPUTS)
    del missing["df_concentration"]
    with pytest.raises(InputError, match="df_concentration"):
        plan.make_plan(tm, MODULE, missing)


def test_plan_record_round_trip(lnp: plan.Plan) -> None:
    import json

    again = plan.Plan.from_record(json.loads(json.dumps(lnp.to_record())))
    assert again == lnp


def test_protein_template_plans() -> None:
    tm = template.find("QB-MR-UFDF-201")
    p = plan.make_plan(tm, MODULE, {"initial_volume": "2 L", "initial_concentration": "5 g/L"})
    # N = ln(1/(1 − 0.999))/S at S = 1 (DEVELOPERS.md).
    assert p.value("diavolumes").value == pytest.approx(math.log(1000))
    assert p.value("overall_factor").value == pytest.approx(12.0)
