"""A water-flux test typed as a table of TMP points (ledger.entries.water.water_test_rows):
the cells parse as the CLI's options do, blank rows are skipped, an error names its row and
cell, and the NWP the service computes from three points matches an independent computation.

Reference: IAPWS R12-08 (IAPWS Formulation 2008 for the viscosity of ordinary water), through
the PyPI package ``iapws`` (IAPWS97(T, P).mu, Pa·s, at 0.101325 MPa), and the least-squares
slope of the normalized flux J·µ(T)/µ(T_ref) against TMP by ``numpy.polyfit``; TMP =
(P_feed + P_retentate)/2 − P_permeate (common practice)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from iapws import IAPWS97

from ledger.entries.water import MAX_ROWS, water_test, water_test_rows
from ledger.errors import InputError
from tests.world import World

PSI = 6894.757293168361  # Pa, exact by definition of the pound-force and the inch
ML_MIN = 1e-6 / 60  # m³/s
AREA = 565e-4  # m², the test world's module type HF-750 (--area 565 cm^2)
T_REF = 293.15  # K, the type's reference temperature (20 °C, the default)

THREE = {
    "serial": "QMB-0301",
    "stage": "baseline",
    "temperature": "22 degC",
    "feed_1": "12 psi", "retentate_1": "9 psi", "flow_1": "228 mL/min",
    "feed_2": "15 psi", "retentate_2": "11 psi", "permeate_2": "0.5 psi",
    "flow_2": "0.27 L/min",
    "feed_4": "1.2 bar", "retentate_4": "0.9 bar", "volume_4": "300 mL", "time_4": "50 s",
}  # fmt: skip


def test_three_rows_parse_to_si_and_blank_rows_are_skipped() -> None:
    e = water_test_rows({**THREE, "feed_3": "  ", "flow_3": ""})
    assert e.rows == (1, 2, 4)
    p1, p2, p4 = e.points
    assert p1.feed_pa == pytest.approx(12 * PSI) and p1.permeate_pa == 0.0
    assert p1.flow_m3_s == pytest.approx(228 * ML_MIN)
    assert p2.permeate_pa == pytest.approx(0.5 * PSI) and p2.flow_m3_s == pytest.approx(4.5e-6)
    assert p4.feed_pa == pytest.approx(1.2e5) and p4.flow_m3_s is None
    assert (p4.volume_m3, p4.time_s) == pytest.approx((3e-4, 50.0))
    assert e.temperature_k == pytest.approx(295.15)
    # Several points are kept in SI as from a points file; the temperature as typed.
    assert e.entered == {"temperature": "22 degC"}


def test_one_row_is_the_cli_single_point_test() -> None:
    typed = {"serial": "QMB-0301", "stage": "pre-use", "temperature": "20 degC",
             "water_grade": "WFI", "note": "after flush"}  # fmt: skip
    cells = {"feed": "3.2 psi", "retentate": "2.8 psi", "flow": "90 mL/min"}
    table = water_test_rows({**typed, **{f"{k}_1": v for k, v in cells.items()}})
    options = water_test({**typed, **cells})
    assert table.points == options.points
    assert table.entered == options.entered  # the same text kept as typed
    assert (table.stage, table.temperature_k, table.water_grade, table.note) == (
        options.stage, options.temperature_k, options.water_grade, options.note)  # fmt: skip


@settings(max_examples=40, deadline=None)
@given(
    row=st.integers(min_value=1, max_value=MAX_ROWS),
    cell=st.sampled_from(["feed", "retentate", "permeate", "flow"]),
    text=st.sampled_from(["12 pso", "12", "twelve psi", "12 mL"]),
)
def test_a_bad_cell_is_named_by_its_row(row: int, cell: str, text: str) -> None:
    raw = {"serial": "M", "stage": "baseline", "temperature": "20 degC",
           f"feed_{row}": "12 psi", f"retentate_{row}": "9 psi",
           f"flow_{row}": "228 mL/min"}  # fmt: skip
    raw[f"{cell}_{row}"] = text
    with pytest.raises(InputError) as caught:
        water_test_rows(raw)
    err = caught.value
    assert err.field == f"{cell}_{row}" and err.index == row - 1
    assert str(err).startswith(f"row {row}: ") and text in str(err)


@settings(max_examples=30, deadline=None)
@given(
    feed=st.floats(min_value=1.0, max_value=60.0),
    drop=st.floats(min_value=0.0, max_value=0.9),
    flow=st.floats(min_value=1.0, max_value=2000.0),
)
def test_the_unit_typed_does_not_change_the_point(feed: float, drop: float, flow: float) -> None:
    # The same point in psi and mL/min, or in kPa and L/h, is the same point in SI.
    ret = feed * (1 - drop)
    a = water_test_rows({"serial": "M", "stage": "baseline", "temperature": "20 degC",
                         "feed_1": f"{feed!r} psi", "retentate_1": f"{ret!r} psi",
                         "flow_1": f"{flow!r} mL/min"})  # fmt: skip
    b = water_test_rows({"serial": "M", "stage": "baseline", "temperature": "293.15 K",
                         "feed_3": f"{feed * PSI / 1000!r} kPa",
                         "retentate_3": f"{ret * PSI / 1000!r} kPa",
                         "flow_3": f"{flow * 0.06!r} L/h"})  # fmt: skip
    pa, pb = a.points[0], b.points[0]
    assert pb.feed_pa == pytest.approx(pa.feed_pa, rel=1e-12)
    assert pb.retentate_pa == pytest.approx(pa.retentate_pa, rel=1e-12)
    assert pb.flow_m3_s == pytest.approx(pa.flow_m3_s, rel=1e-12)
    assert b.temperature_k == pytest.approx(a.temperature_k, rel=1e-12)


@pytest.mark.parametrize(
    ("cells", "field"),
    [
        ({"feed_2": "12 psi", "flow_2": "228 mL/min"}, "retentate_2"),
        ({"feed_2": "12 psi", "retentate_2": "9 psi"}, "flow_2"),
        ({"feed_2": "12 psi", "retentate_2": "9 psi", "volume_2": "250 mL"}, "time_2"),
        ({}, "feed_1"),
    ],
)
def test_an_incomplete_row_or_none_at_all_is_refused(cells: dict[str, str], field: str) -> None:
    with pytest.raises(InputError) as caught:
        water_test_rows({"serial": "M", "stage": "baseline", "temperature": "20 degC", **cells})
    assert caught.value.field == field


def test_the_temperature_is_required() -> None:
    with pytest.raises(InputError) as caught:
        water_test_rows({"serial": "M", "stage": "baseline", "feed_1": "12 psi",
                         "retentate_1": "9 psi", "flow_1": "228 mL/min"})  # fmt: skip
    assert caught.value.field == "temperature"


def _mu(t_k: float) -> float:
    """Viscosity of water at 1 atm (Pa·s), IAPWS R12-08 through the iapws package."""
    return float(IAPWS97(T=t_k, P=0.101325).mu)


@pytest.mark.sqlite_only
def test_the_service_nwp_of_three_rows_matches_iapws_and_polyfit(sqlite_world: World) -> None:
    from ledger.logbook.waterflux import record_water_test
    from ledger.logbook.workspace import as_signed_in

    w = sqlite_world
    w.add_module("QMB-0301")
    e = water_test_rows(THREE)

    def work(s: object, a: object) -> tuple[float, float | None, int]:
        with e.blame():
            test, _ = record_water_test(s, a, e.serial, e.stage, e.points, e.temperature_k,  # type: ignore[arg-type]
                                        entered=e.entered)  # fmt: skip
        return test.nwp_m_s_pa, test.r_squared, len(test.points)

    nwp, r2, n = as_signed_in(w.engine(), "op.kim", work, writes=True)  # type: ignore[arg-type]

    # Independent: the same three points by hand, viscosity from iapws, slope from polyfit.
    t = 295.15
    pressures = [(12 * PSI, 9 * PSI, 0.0), (15 * PSI, 11 * PSI, 0.5 * PSI), (1.2e5, 0.9e5, 0.0)]
    flows = [228 * ML_MIN, 0.27e-3 / 60, 300e-6 / 50]
    tmp = np.array([(f + r) / 2 - p for f, r, p in pressures])
    flux_ref = np.array(flows) / AREA * _mu(t) / _mu(T_REF)
    slope, intercept = np.polyfit(tmp, flux_ref, 1)
    fitted = slope * tmp + intercept
    r2_ref = 1 - np.sum((flux_ref - fitted) ** 2) / np.sum((flux_ref - flux_ref.mean()) ** 2)
    assert n == 3
    assert nwp == pytest.approx(slope, rel=1e-4)  # iapws' density (IAPWS-97) vs ours: ~1e-5
    assert r2 == pytest.approx(r2_ref, rel=1e-6)


@pytest.mark.sqlite_only
def test_a_service_error_on_a_point_names_the_row_it_was_typed_in(sqlite_world: World) -> None:
    from ledger.logbook.waterflux import record_water_test
    from ledger.logbook.workspace import as_signed_in

    w = sqlite_world
    w.add_module("QMB-0302")
    # Row 5 has no positive TMP: the service refuses point index 1, which is row 5.
    e = water_test_rows({"serial": "QMB-0302", "stage": "baseline", "temperature": "20 degC",
                         "feed_1": "12 psi", "retentate_1": "9 psi", "flow_1": "228 mL/min",
                         "feed_5": "1 psi", "retentate_5": "1 psi", "permeate_5": "2 psi",
                         "flow_5": "10 mL/min"})  # fmt: skip
    before = w.snapshot()

    def work(s: object, a: object) -> None:
        with e.blame():
            record_water_test(s, a, e.serial, e.stage, e.points, e.temperature_k)  # type: ignore[arg-type]

    with pytest.raises(InputError) as caught:
        as_signed_in(w.engine(), "op.kim", work, writes=True)  # type: ignore[arg-type]
    assert caught.value.field == "feed_5" and str(caught.value).startswith("row 5: ")
    assert w.snapshot() == before
