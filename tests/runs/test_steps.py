"""The step service (ledger.runs.steps) called directly: values parsed into SI and kept as
typed, ranges evaluated against the plan, the step views before and after an entry, and the
time order of entries.

Unit references: 1 bar = 100 000 Pa and 1 mL = 1e-6 m³ (SI Brochure, 9th ed., table 8 and
the definition of the litre); 1 mS/cm = 0.1 S/m (by the SI prefixes). The plan's
``df_volume`` of 300 mL is worked out by hand in tests/cli/test_run_steps.py.
"""

from __future__ import annotations

import math
from datetime import timedelta

import pytest

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import find_user
from ledger.runs import steps
from ledger.runs.service import get_run, run_plan, run_template
from ledger.store.engine import transaction
from tests.cli.test_run_steps import DF_VOLUME_ML, clock_ahead, started
from tests.world import World

pytestmark = pytest.mark.sqlite_only
FIRST = {"permeate_ph": "7.4", "permeate_conductivity": "15.2 mS/cm"}
SECOND = {"retentate_volume": "302 mL", "tmp_observed": "0.31 bar"}


def _user(s: object, login: str) -> object:
    actor = find_user(s, login)  # type: ignore[arg-type]
    assert actor is not None
    return actor


def test_values_are_kept_as_typed_beside_their_si_value(sqlite_world: World) -> None:
    w = sqlite_world
    started(w)
    with transaction(w.engine()) as s:
        op = _user(s, "op.kim")
        steps.record_step(s, op, 1, 1, "performed",  # type: ignore[arg-type]
                          FIRST)  # fmt: skip
        got = steps.record_step(s, op, 1, 2, "performed",  # type: ignore[arg-type]
                                SECOND)  # fmt: skip
    values = {v["name"]: v for v in got.entry.values or []}
    tmp = values["tmp_observed"]
    assert (tmp["text"], tmp["unit"]) == ("0.31 bar", "bar")
    assert tmp["si"] == pytest.approx(0.31 * 100_000, rel=1e-12)
    vol = values["retentate_volume"]
    assert vol["si"] == pytest.approx(302e-6, rel=1e-12)
    # range: df_volume x 0.95 .. x 1.05, in SI
    assert vol["low"] == pytest.approx(DF_VOLUME_ML * 0.95e-6, rel=1e-9)
    assert vol["high"] == pytest.approx(DF_VOLUME_ML * 1.05e-6, rel=1e-9)
    assert vol["in_range"] is True and got.out_of_range == ()
    assert got.entry.late is False


def test_step_views_show_ranges_before_and_values_after(sqlite_world: World) -> None:
    w = sqlite_world
    started(w)
    with transaction(w.engine()) as s:
        run = get_run(s, 1)
        before = steps.step_views(s, run)
        assert [v.number for v in before] == list(range(1, len(run_template(run).steps) + 1))
        conductivity = before[0].values[1]
        assert conductivity.text is None and conductivity.range == "14–17 mS/cm"
        volume = before[1].values[0]
        assert volume.range == f"{DF_VOLUME_ML * 0.95:g}–{DF_VOLUME_ML * 1.05:g} mL"
        assert not before[0].complete
        op = _user(s, "op.kim")
        steps.record_step(s, op, 1, 1, "performed",  # type: ignore[arg-type]
                          {"permeate_ph": "7.4", "permeate_conductivity": "1.52 S/m"})  # fmt: skip
        after = steps.step_views(s, get_run(s, 1))
    first = after[0]
    assert first.complete  # step 1 needs "performed" only
    assert first.values[1].text == "1.52 S/m"  # shown as typed, not converted
    assert first.values[1].si == pytest.approx(1.52, rel=1e-12)
    assert first.values[1].in_range is True  # 1.52 S/m = 15.2 mS/cm, within 14-17 mS/cm


def test_a_range_evaluated_from_the_plan(sqlite_world: World) -> None:
    w = sqlite_world
    started(w)
    with transaction(w.engine()) as s:
        run = get_run(s, 1)
        plan = run_plan(run)
        diafilter = run_template(run).steps[2]
        (buffer,) = diafilter.entries
        lim = steps.limits(buffer, plan, "test")
    # buffer_volume = ln(1 / 0.005) diavolumes x 300 mL (worked out by hand)
    expected = math.log(1 / 0.005) * DF_VOLUME_ML * 1e-6
    assert lim.low == pytest.approx(expected, rel=1e-9)
    assert lim.high == pytest.approx(expected * 1.25, rel=1e-9)


@pytest.mark.parametrize(
    ("given", "field"),
    [
        ({"permeate_ph": "7.4 bar", "permeate_conductivity": "15 mS/cm"}, "value"),
        ({"permeate_ph": "7.4", "permeate_conductivity": "15 bar"}, "value"),
        ({"permeate_ph": "7.4"}, "value"),
        ({"permeate_ph": "7.4", "permeate_conductivity": "15 mS/cm", "colour": "red"}, "value"),
    ],
)
def test_wrong_values_are_refused_and_nothing_is_written(
    sqlite_world: World, given: dict[str, str], field: str
) -> None:
    w = sqlite_world
    started(w)
    before = w.snapshot()
    with pytest.raises(InputError) as err, transaction(w.engine()) as s:
        steps.record_step(s, _user(s, "op.kim"), 1, 1, "performed", given)  # type: ignore[arg-type]
    assert err.value.field == field and err.value.exit_code == 2
    assert w.snapshot() == before


def test_an_entry_before_the_step_it_follows_is_refused(
    sqlite_world: World, monkeypatch: pytest.MonkeyPatch
) -> None:
    w = sqlite_world
    start = started(w)
    clock_ahead(monkeypatch, 1)
    with transaction(w.engine()) as s:
        steps.record_step(s, _user(s, "op.kim"), 1, 1, "performed",  # type: ignore[arg-type]
                          FIRST,
                          start + timedelta(minutes=10))  # fmt: skip
    with (
        pytest.raises(InputError, match="before step 1 was performed") as err,
        transaction(w.engine()) as s,
    ):
        steps.record_step(s, _user(s, "op.kim"), 1, 2, "performed",  # type: ignore[arg-type]
                          SECOND,
                          start + timedelta(minutes=5))  # fmt: skip
    assert err.value.field == "activity_time"
    with transaction(w.engine()) as s:
        later = start + timedelta(minutes=15)
        steps.record_step(s, _user(s, "op.kim"), 1, 2, "performed", SECOND, later)  # type: ignore[arg-type]
    with (
        pytest.raises(RefusedError, match="another person verifies it"),
        transaction(w.engine()) as s,
    ):
        steps.record_step(s, _user(s, "op.kim"), 1, 2, "verified", {})  # type: ignore[arg-type]
