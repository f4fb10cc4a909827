"""The template-version service (ledger.runs.versions): submit a draft, approve it (QA, not
its author) from a time, retire it, and which version a plan uses. Invented template
versions made from the shipped LNP template."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any, TypeVar

import pytest

from ledger.errors import InputError, RefusedError
from tests.reference.test_plan_reference import INPUTS
from tests.world import World

pytestmark = pytest.mark.sqlite_only  # the rules are the subject, not the database

LNP = "QB-MR-LNP-101"  # version 7 is shipped and in force in every world
T = TypeVar("T")


def lnp_version(tmp_path: Path, version: str, title: str = "LNP exchange, revised") -> Path:
    """The shipped LNP template as another version (a changed title and version)."""
    from ledger.runs.template import shipped_dir

    text = (shipped_dir() / "qb_lnp_buffer_exchange.toml").read_text(encoding="utf-8")
    text = text.replace('version = "7"', f'version = "{version}"', 1)
    text = text.replace('title = "LNP buffer exchange and concentration"', f'title = "{title}"', 1)
    path = tmp_path / f"lnp-v{version}.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture
def as_user(sqlite_world: World) -> Iterator[Callable[[str, Callable[[Any, Any], T]], T]]:
    """Run ``work(session, actor)`` as a user of the world, in one transaction."""
    from ledger.logbook.auth import find_user
    from ledger.store.engine import transaction

    engine = sqlite_world.engine()

    def run(login: str, work: Callable[[Any, Any], T]) -> T:
        with transaction(engine) as s:
            actor = find_user(s, login)
            assert actor is not None
            return work(s, actor)

    yield run  # type: ignore[misc]
    engine.dispose()


def test_the_shipped_templates_are_in_force_in_a_world(sqlite_world: World, as_user: Any) -> None:
    from ledger.runs import versions

    found = as_user("op.kim", lambda s, a: versions.in_force(s, LNP, datetime.now(UTC)))
    assert (found.version, found.state, found.authored_by, found.approved_by) == (
        "7", "approved", "eng.ray", "qa.lin",
    )  # fmt: skip


def test_submit_is_for_engineers_and_twice_writes_nothing(
    sqlite_world: World, as_user: Any, tmp_path: Path
) -> None:
    from ledger.runs import versions

    raw = lnp_version(tmp_path, "8").read_bytes()
    for login in ("qa.lin", "op.kim"):
        with pytest.raises(RefusedError, match="needs the role engineer"):
            as_user(login, lambda s, a: versions.submit(s, a, raw, "lnp-v8.toml"))
    made, created = as_user("eng.ray", lambda s, a: versions.submit(s, a, raw, "lnp-v8.toml"))
    assert created and made.state == "draft" and made.text.encode("utf-8") == raw
    before = sqlite_world.snapshot()
    again, created = as_user("eng.ray", lambda s, a: versions.submit(s, a, raw, "lnp-v8.toml"))
    assert not created and again.id == made.id
    assert sqlite_world.snapshot() == before


def test_the_same_version_with_other_bytes_is_refused(
    sqlite_world: World, as_user: Any, tmp_path: Path
) -> None:
    from ledger.runs import versions

    other = lnp_version(tmp_path, "7", title="Same version, changed text").read_bytes()
    before = sqlite_world.snapshot()
    with pytest.raises(RefusedError, match="version 7 is already submitted with other content"):
        as_user("eng.ray", lambda s, a: versions.submit(s, a, other, "lnp-v7b.toml"))
    with pytest.raises(InputError, match=r"bad\.toml"):  # not a template: the file is named
        as_user("eng.ray", lambda s, a: versions.submit(s, a, b"[template\n", "bad.toml"))
    assert sqlite_world.snapshot() == before


def test_approval_needs_qa_and_another_person(
    sqlite_world: World, as_user: Any, tmp_path: Path
) -> None:
    from ledger.runs import versions

    raw = lnp_version(tmp_path, "8").read_bytes()
    as_user("eng.ray", lambda s, a: versions.submit(s, a, raw, "lnp-v8.toml"))
    soon = datetime.now(UTC) + timedelta(hours=1)
    for login in ("eng.ray", "op.kim"):
        with pytest.raises(RefusedError, match="needs the role qa"):
            as_user(login, lambda s, a: versions.approve(s, a, LNP, "8", soon))
    # The author, later made QA, still may not approve what they wrote.
    sqlite_world.ok(sqlite_world.as_user("sysadm", "user", "role", "eng.ray", "--role", "qa",
                                         "--reason", "moved to quality"))  # fmt: skip
    with pytest.raises(RefusedError, match="wrote this version"):
        as_user("eng.ray", lambda s, a: versions.approve(s, a, LNP, "8", soon))
    done = as_user("qa.lin", lambda s, a: versions.approve(s, a, LNP, "8", soon))
    assert (done.state, done.approved_by, done.effective_from) == ("approved", "qa.lin", soon)
    with pytest.raises(RefusedError, match="not a draft"):
        as_user("qa.lin", lambda s, a: versions.approve(s, a, LNP, "8", soon))


def test_a_past_effective_time_needs_a_reason_and_never_passes_a_run(
    sqlite_world: World, as_user: Any, tmp_path: Path
) -> None:
    from ledger.runs import versions
    from ledger.runs.service import plan_run
    from tests.cli.test_runs import ready_for_a_run

    ready_for_a_run(sqlite_world)
    as_user("eng.ray", lambda s, a: plan_run(s, a, LNP, "QMB-0142", "QB-117", "L-1", INPUTS))
    raw = lnp_version(tmp_path, "8").read_bytes()
    as_user("eng.ray", lambda s, a: versions.submit(s, a, raw, "lnp-v8.toml"))
    an_hour_ago = datetime.now(UTC) - timedelta(hours=1)
    with pytest.raises(InputError, match="--late-reason") as err:
        as_user("qa.lin", lambda s, a: versions.approve(s, a, LNP, "8", an_hour_ago))
    assert err.value.field == "effective_from"
    with pytest.raises(RefusedError, match="already planned"):
        as_user("qa.lin", lambda s, a: versions.approve(s, a, LNP, "8", an_hour_ago, "paper"))


def test_plans_use_the_version_in_force(sqlite_world: World, as_user: Any, tmp_path: Path) -> None:
    from ledger.runs import versions

    path = lnp_version(tmp_path, "8")
    as_user("eng.ray", lambda s, a: versions.submit(s, a, path.read_bytes(), str(path)))
    now = datetime.now(UTC)

    def plan(ref: str, version: str | None, at: datetime) -> Any:
        return as_user("op.kim", lambda s, a: versions.for_plan(s, ref, version, at)[0])

    with pytest.raises(RefusedError, match="version 8 is draft") as err:
        plan(LNP, "8", now)
    assert "v7 is in force" in err.value.message
    with pytest.raises(RefusedError, match="version 8 is draft"):
        plan(str(path), None, now)  # the file is version 8 too
    assert plan(LNP, None, now).version == "7"
    later = now + timedelta(hours=2)
    as_user("qa.lin", lambda s, a: versions.approve(s, a, LNP, "8", later))
    with pytest.raises(RefusedError, match="approved, effective from"):
        plan(LNP, "8", now)
    assert plan(LNP, None, now).version == "7"
    assert plan(LNP, None, later).version == "8"
    assert plan(str(path), None, later).version == "8"
    with pytest.raises(RefusedError, match="superseded"):
        plan(LNP, "7", later)
    unsubmitted = lnp_version(tmp_path, "9")
    with pytest.raises(RefusedError, match="not a submitted template version"):
        plan(str(unsubmitted), None, later)
    with pytest.raises(RefusedError, match="no submitted version"):
        plan("QB-MR-NONE-1", None, now)


def test_retiring_brings_back_the_version_before(
    sqlite_world: World, as_user: Any, tmp_path: Path
) -> None:
    from ledger.runs import versions

    path = lnp_version(tmp_path, "8")
    as_user("eng.ray", lambda s, a: versions.submit(s, a, path.read_bytes(), str(path)))
    as_user("qa.lin", lambda s, a: versions.approve(s, a, LNP, "8", datetime.now(UTC)))
    assert (
        as_user("op.kim", lambda s, a: versions.in_force(s, LNP, datetime.now(UTC))).version == "8"
    )
    with pytest.raises(RefusedError, match="needs the role qa"):
        as_user("eng.ray", lambda s, a: versions.retire(s, a, LNP, "8", "withdrawn"))
    with pytest.raises(InputError) as err:
        as_user("qa.lin", lambda s, a: versions.retire(s, a, LNP, "8", "  "))
    assert err.value.field == "reason"
    as_user("qa.lin", lambda s, a: versions.retire(s, a, LNP, "8", "pressure limit wrong"))
    at = datetime.now(UTC)
    assert as_user("op.kim", lambda s, a: versions.in_force(s, LNP, at)).version == "7"
    lines = as_user("op.kim", lambda s, a: versions.history(s, LNP))
    assert [(x.record.version, x.status) for x in lines] == [("7", "effective"), ("8", "retired")]
    assert lines[1].record.retired_by == "qa.lin"
    assert lines[1].record.retire_reason == "pressure limit wrong"
