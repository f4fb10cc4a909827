"""plan_run refuses a template written for another product unless a reason is given; the
reason is kept in the plan record and the audit event. Invented products (the demo's)."""

from __future__ import annotations

from typing import Any

import pytest

from ledger.errors import InputError, RefusedError
from tests.cli.test_runs import ready_for_a_run
from tests.reference.test_plan_reference import INPUTS
from tests.world import World

pytestmark = pytest.mark.sqlite_only  # the rule is the subject, not the database

LNP = "QB-MR-LNP-101"  # written for QB-117


def _plan(w: World, product: str, **kw: Any) -> Any:
    from ledger.logbook.auth import find_user
    from ledger.runs.service import plan_run
    from ledger.store.engine import transaction

    engine = w.engine()
    try:
        with transaction(engine) as s:
            actor = find_user(s, "eng.ray")
            assert actor is not None
            return plan_run(s, actor, LNP, "QMB-0142", product, "L-1", INPUTS, **kw)
    finally:
        engine.dispose()


def _audit_reasons(w: World) -> list[str]:
    from sqlalchemy import text

    engine = w.engine()
    try:
        with engine.connect() as conn:
            return [r[0] for r in conn.execute(text("SELECT reason FROM audit_event"))]
    finally:
        engine.dispose()


def test_another_product_is_refused_naming_both(sqlite_world: World) -> None:
    ready_for_a_run(sqlite_world)
    before = sqlite_world.snapshot()
    with pytest.raises(RefusedError) as err:
        _plan(sqlite_world, "QB-204")
    assert "'QB-117'" in err.value.message and "'QB-204'" in err.value.message
    assert "--product-override-reason" in err.value.message
    assert err.value.field == "product"
    assert sqlite_world.snapshot() == before


def test_with_a_reason_it_is_planned_and_the_reason_kept(sqlite_world: World) -> None:
    ready_for_a_run(sqlite_world)
    why = "engineering run: QB-204 feed on the QB-117 record to compare flux"
    run = _plan(sqlite_world, "QB-204", product_override_reason=why)
    assert run.product == "QB-204"
    assert run.plan["product_override_reason"] == why
    assert run.override_reason is None  # that one is for a module that is not fit
    assert any(why in (r or "") and "QB-117" in (r or "") for r in _audit_reasons(sqlite_world))


def test_a_reason_for_the_same_product_is_refused(sqlite_world: World) -> None:
    ready_for_a_run(sqlite_world)
    before = sqlite_world.snapshot()
    with pytest.raises(InputError) as err:
        _plan(sqlite_world, "QB-117", product_override_reason="no reason needed")
    assert err.value.field == "product_override_reason"
    assert sqlite_world.snapshot() == before


def test_the_same_product_needs_no_reason(sqlite_world: World) -> None:
    ready_for_a_run(sqlite_world)
    run = _plan(sqlite_world, "qb-117")  # identifiers compare case-folded
    assert run.plan["product_override_reason"] is None
