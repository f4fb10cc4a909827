"""`fluxledger template ...` and `run plan` through the CLI: a new template version goes
draft -> approved (by QA, not its author) -> effective; a run planned before its effective
time is refused on it and uses the old version; a draft cannot be used (issue 15 item 3)."""

from __future__ import annotations

from collections.abc import Iterator
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import cast

import pytest
from freezegun import freeze_time
from freezegun.api import FrozenDateTimeFactory

from tests.cli.test_runs import INPUTS, ready_for_a_run
from tests.runs.test_versions import lnp_version
from tests.world import Result, World

pytestmark = pytest.mark.sqlite_only  # the rules are the subject, not the database

LNP = "QB-MR-LNP-101"


@pytest.fixture
def clock() -> Iterator[FrozenDateTimeFactory]:
    # pandas and pyarrow are imported before the clock stops: importing them under a frozen
    # clock crashes the interpreter.
    import pandas  # noqa: F401
    import pyarrow.csv  # noqa: F401

    start = datetime.now(UTC).replace(microsecond=0) + timedelta(days=1)
    with freeze_time(start, ignore=["_pytest"]) as frozen:
        yield cast(FrozenDateTimeFactory, frozen)


def plan(w: World, lot: str, *more: str) -> Result:
    return w.as_user("eng.ray", "run", "plan", LNP, "--module", "QMB-0142", "--product",
                     "QB-117", "--lot", lot, *INPUTS, *more, "--json")  # fmt: skip


def planned_version(result: Result) -> tuple[str, str]:
    out = World.ok(result).json()
    run = next(v for k, v in out.items() if k.startswith("run_"))
    return run["template"], run["template_sha256"]


def test_a_new_version_from_draft_to_effective(
    sqlite_world: World, clock: FrozenDateTimeFactory, tmp_path: Path
) -> None:
    w = sqlite_world
    ready_for_a_run(w)
    v8 = lnp_version(tmp_path, "8")
    submitted = w.ok(w.as_user("eng.ray", "template", "submit", str(v8), "--json")).json()
    assert submitted["version"]["state"] == "draft"
    sha8 = submitted["version"]["sha256"]

    # A draft cannot be used: not by its version, nor by its file.
    before = w.snapshot()
    refused = plan(w, "L-1", "--template-version", "8")
    assert refused.code == 3, refused
    assert "template QB-MR-LNP-101 version 8 is draft" in refused.stderr
    assert "v7 is in force" in refused.stderr
    by_file = w.as_user("eng.ray", "run", "plan", str(v8), "--module", "QMB-0142",
                        "--product", "QB-117", "--lot", "L-1", *INPUTS)  # fmt: skip
    assert by_file.code == 3 and "version 8 is draft" in by_file.stderr
    assert w.snapshot() == before

    # Approval: QA only, never the author.
    effective = datetime.now(UTC) + timedelta(hours=2)
    approve = ["template", "approve", LNP, "8", "--effective-from", effective.isoformat()]
    for login in ("op.kim", "eng.ray"):
        denied = w.as_user(login, *approve)
        assert denied.code == 3 and "needs the role qa" in denied.stderr, denied
    w.ok(w.as_user("sysadm", "user", "role", "eng.ray", "--role", "qa", "--reason", "to QA"))
    own = w.as_user("eng.ray", *approve)
    assert own.code == 3 and "wrote this version and may not approve it" in own.stderr
    w.ok(w.as_user("sysadm", "user", "role", "eng.ray", "--role", "engineer", "--reason", "back"))
    w.ok(w.as_user("qa.lin", *approve))

    # Planned before the effective time: the old version, and the new one is refused.
    template, sha = planned_version(plan(w, "L-1"))
    assert template == f"{LNP} v7" and sha != sha8
    early = plan(w, "L-2", "--template-version", "8")
    assert early.code == 3
    assert f"effective from {effective.isoformat()}" in early.stderr
    assert "v7 is in force" in early.stderr

    # From the effective time on, the new version, bound by its hash.
    clock.move_to(effective + timedelta(minutes=1))
    template, sha = planned_version(plan(w, "L-3"))
    assert (template, sha) == (f"{LNP} v8", sha8)
    old = plan(w, "L-4", "--template-version", "7")
    assert old.code == 3 and "superseded" in old.stderr

    # Retired: the version before is in force again.
    w.ok(w.as_user("qa.lin", "template", "retire", LNP, "8", "--reason", "limit typo"))
    template, _ = planned_version(plan(w, "L-5"))
    assert template == f"{LNP} v7"

    history = w.ok(w.cli("template", "history", LNP, "--json")).json()
    rows = {r["version"]: r for r in history["versions_of_qb_mr_lnp_101"]}
    assert rows["8"]["status"] == "retired"
    assert (rows["8"]["authored_by"], rows["8"]["approved_by"], rows["8"]["retired_by"]) == (
        "eng.ray", "qa.lin", "qa.lin",
    )  # fmt: skip
    assert rows["8"]["effective_from"].startswith(effective.isoformat()[:19])
    assert rows["8"]["reason"] == "limit typo"
    assert rows["7"]["status"] == "effective"
    shown = w.ok(w.cli("template", "history", LNP)).stdout
    assert "retired" in shown and "qa.lin" in shown


def test_bad_input_names_the_field_and_writes_nothing(sqlite_world: World, tmp_path: Path) -> None:
    w = sqlite_world
    w.ok(w.as_user("eng.ray", "template", "submit", str(lnp_version(tmp_path, "8"))))
    before = w.snapshot()
    cases = [
        (["template", "approve", LNP, "8", "--effective-from", "tomorrow"], "--effective-from: "),
        (["template", "approve", LNP, "8", "--effective-from", "2026-12-01T10:00"], "offset"),
        (["template", "approve", LNP, "9", "--effective-from", "2030-01-01T00:00Z"], "no version"),
        (["template", "approve", LNP, "8", "--effective-from", "2026-01-02T00:00Z"],
         "--late-reason"),
    ]  # fmt: skip
    for args, needle in cases:
        result = w.as_user("qa.lin", *args)
        assert result.code == 2 and needle in result.stderr, (args, result)
        assert "Traceback" not in result.stderr
    missing = w.as_user("eng.ray", "template", "submit", str(tmp_path / "none.toml"))
    assert missing.code == 2 and "no such file" in missing.stderr
    assert w.snapshot() == before


def test_effective_from_now_is_the_approval_time(sqlite_world: World, tmp_path: Path) -> None:
    w = sqlite_world
    w.ok(w.as_user("eng.ray", "template", "submit", str(lnp_version(tmp_path, "8"))))
    before = datetime.now(UTC)
    done = w.ok(w.as_user("qa.lin", "template", "approve", LNP, "8", "--effective-from", "now",
                          "--json")).json()["version"]  # fmt: skip
    assert done["effective_from"] == done["approved_at"]
    assert datetime.fromisoformat(done["effective_from"]) >= before.replace(microsecond=0)
    listed = w.ok(w.cli("template", "history", LNP, "--json")).json()
    statuses = {r["version"]: r["status"] for r in listed["versions_of_qb_mr_lnp_101"]}
    assert statuses == {"7": "superseded", "8": "effective"}


def test_list_shows_every_version(sqlite_world: World) -> None:
    listed = sqlite_world.ok(sqlite_world.cli("template", "list", "--json")).json()
    rows = listed["template_versions"]
    assert {(r["template"], r["version"], r["status"]) for r in rows} == {
        ("QB-MR-LNP-101", "7", "effective"), ("QB-MR-UFDF-201", "3", "effective"),
    }  # fmt: skip
