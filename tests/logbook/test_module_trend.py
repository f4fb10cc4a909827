"""`fluxledger history` (issue 16 item 1): a module's recovery and decay per cycle, the I-MR
signals and the reuse-life projection, built through the CLI as operators record it.

The module type HX-20, module QX-0007, lots and flows are invented test values.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest

from ledger.logbook.module_trend import NOT_ENOUGH, chart, project
from ledger.logbook.wear import Point
from tests.world import TYPE_OPTIONS, World

pytestmark = pytest.mark.sqlite_only

SERIAL = "QX-0007"
BASELINE_FLOW = 170.0  # mL/min
RECOVERY = [1.00, 0.97, 0.95, 0.92, 0.90, 0.87]  # cycles 0-5, fractions of baseline NWP
LIMIT = 0.70


def _type_options() -> list[str]:
    options = list(TYPE_OPTIONS)
    options[options.index("--reuse-limit") + 1] = "10"  # room for five cycles
    return [*options, "--recovery-min", "70 %", "--recovery-alert", "75 %"]


def worn_module(w: World) -> None:
    """HX-20 with a 70 % recovery minimum; QX-0007 commissioned at 170 mL/min, then five
    cycles whose post-clean flows are 97, 95, 92, 90 and 87 % of it at the same feed and
    retentate pressures and temperature, so each recovery is that flow ratio."""
    w.ok(w.as_user("eng.ray", "module-type", "add", "HX-20", *_type_options()))
    w.ok(w.as_user("op.kim", "module", "add", SERIAL, "--type", "HX-20"))
    w.ok(w.baseline(SERIAL, f"{BASELINE_FLOW} mL/min"))
    w.ok(w.integrity(SERIAL))
    for n, fraction in enumerate(RECOVERY[1:], start=1):
        w.ok(w.cycle(SERIAL, f"QX-LOT-{n}", f"{BASELINE_FLOW * fraction:.4f} mL/min"))


def reference_life(cycles: list[float], recovery: list[float], limit: float) -> tuple[float, float]:
    """(point-estimate cycle, bound cycle) by statsmodels, the reference library: OLS of
    recovery on cycle, the two-sided 90 % confidence interval of the mean (= the one-sided 95 %
    lower bound, the ICH Q1E (2003) shelf-life method) and scipy's brentq for its crossing."""
    import numpy as np
    import statsmodels.api as sm  # type: ignore[import-untyped]
    from scipy.optimize import brentq

    x = sm.add_constant(np.asarray(cycles))
    fit = sm.OLS(np.asarray(recovery), x).fit()
    b0, b1 = fit.params
    point = (limit - b0) / b1

    def gap(c: float) -> float:
        lower = fit.get_prediction(np.array([[1.0, c]])).conf_int(alpha=0.10)[0, 0]
        return float(lower) - limit

    return float(point), float(brentq(gap, max(cycles), point, xtol=1e-10))


def test_history_projects_life_as_statsmodels_does(sqlite_world: World) -> None:
    w = sqlite_world
    worn_module(w)
    out = w.ok(w.cli("history", SERIAL, "--json")).json()

    assert out["module"]["cycles_used"] == 5
    assert out["module"]["recovery_min"] == {"value": pytest.approx(70.0), "unit": "percent"}
    shown = [(p["cycle"], p["recovery"]["value"], p["verdict"]) for p in out["recovery"]]
    assert [(c, pytest.approx(100 * r, abs=1e-6), "within") for c, r in enumerate(RECOVERY)] == (
        shown
    )

    point, bound = reference_life(list(range(6)), RECOVERY, LIMIT)
    life = out["life_projection"]
    assert life["status"] == "projected"
    assert life["point_estimate_cycle"] == pytest.approx(point, rel=1e-6)
    assert life["bound_cycle"] == pytest.approx(bound, rel=1e-6)
    assert life["cycles_left"] == pytest.approx(bound - 5, rel=1e-6)
    assert bound < point  # the lower bound reaches the limit first
    assert "one-sided 95 % lower confidence bound" in life["assumptions"]

    # Commissioning decay: 15 -> 14.95 psi over 5 min = 0.01 psi/min; 1 psi = 68.948 mbar
    # (NIST SP 811, psi = 6894.757 Pa), so 0.6895 mbar/min.
    assert [d["decay_rate"]["unit"] for d in out["decay"]] == ["mbar/min"]
    assert out["decay"][0]["decay_rate"]["value"] == pytest.approx(0.01 * 68.94757, rel=1e-4)
    assert [e["kind"] for e in out["uses_and_holds"]] == ["use"] * 5

    terminal = w.ok(w.cli("history", SERIAL))
    assert "Life projection" in terminal.stdout and "%" in terminal.stdout


def test_history_says_not_enough_points_and_refuses_a_bad_count(sqlite_world: World) -> None:
    w = sqlite_world
    w.ready()  # QMB-0142: baseline and one decay test only
    out = w.ok(w.cli("history", "QMB-0142", "--json")).json()
    assert out["life_projection"]["status"] == "not_enough_points"
    assert out["recovery_control_chart"]["note"] == NOT_ENOUGH
    assert out["decay_control_chart"]["note"] == NOT_ENOUGH
    bad = w.cli("history", "QMB-0142", "--baseline-cycles", "0")
    assert bad.code == 2 and "baseline" in bad.stderr and "Traceback" not in bad.stderr
    missing = w.cli("history", "QX-9999")
    assert missing.code == 2 and "QX-9999" in missing.stderr


def _points(values: list[float]) -> list[Point]:
    t0 = datetime(2026, 3, 1, tzinfo=UTC)
    return [Point(i, t0 + timedelta(days=i), v, 100 + i) for i, v in enumerate(values)]


STABLE = [0.950, 0.953, 0.949, 0.952, 0.950, 0.954, 0.948, 0.951]  # invented, no pattern


def test_a_stable_series_gives_no_signal() -> None:
    c = chart(_points(STABLE), 6)
    assert c.limits is not None and c.note is None
    assert c.signals == ()


def test_one_point_beyond_three_sigma_gives_rule_one_only() -> None:
    # Baseline of the first six stable points: MR-bar = 0.0032, sigma = MR-bar/1.128 = 0.0028
    # (Montgomery's d2 for ranges of two); 0.920 is about 11 sigma below the centre 0.9513.
    values = [*STABLE[:6], 0.920]
    c = chart(_points(values), 6)
    assert c.limits is not None and values[-1] < c.limits.lcl
    found = sorted((s.rule_set, s.rule, s.cycle, s.record_id) for s in c.signals)
    # Rule 1 in each rule set, and the jump into it is a moving range above D4·MR-bar.
    assert found == [("moving_range", 1, 6, 106), ("nelson", 1, 6, 106),
                     ("western_electric", 1, 6, 106)]  # fmt: skip


def test_too_few_points_give_no_limits_and_no_projection() -> None:
    two = _points([0.99, 0.97])
    assert chart(two, None).note == NOT_ENOUGH and chart(two, None).limits is None
    assert project(two, LIMIT, 1).status == "not_enough_points"
    assert chart(_points(STABLE), 2).note == NOT_ENOUGH  # a 2-point baseline is too short
