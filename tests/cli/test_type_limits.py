"""A module type's limits under change control (issue 15 item 3): a new limits version is
written by an engineer, approved by QA (not its author) from a stated time, and from then the
tests are judged against it and name it; a draft changes nothing; a version cannot reach
back past a test already judged; history shows which version was in force when.

The limits are invented test values (HF-750 of tests/world.py: recovery minimum 80 %, as
registered).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from sqlmodel import select

from ledger.store.engine import transaction
from ledger.store.tables import WaterFluxTest
from tests.world import World

pytestmark = pytest.mark.sqlite_only

RAISED = """\
[limits]
type = "HF-750"
version = "2"
reason = "Recovery minimum raised after revalidation"
recovery_min = "97 %"
recovery_alert = "98 %"
decay_limit = "0.04 psi/min"
"""


def limits_file(tmp_path: Path, text: str = RAISED) -> Path:
    path = tmp_path / "limits.toml"
    path.write_text(text, encoding="utf-8")
    return path


def post_clean(w: World) -> dict[str, object]:
    """One cycle on QMB-0142 ending in a post-clean test at 165 of the baseline's 170 mL/min
    (97.06 % recovery at the same TMP and temperature); its JSON record."""
    w.ok(w.as_user("op.kim", "use", "start", "QMB-0142", "--product", "QB-117", "--lot", "L-1"))
    w.ok(w.as_user("op.kim", "use", "end", "QMB-0142"))
    w.ok(w.water("QMB-0142", "post-use", "90 mL/min"))
    w.ok(w.clean())
    return w.ok(w.water("QMB-0142", "post-clean", "164 mL/min", "--json")).json()["record"]  # type: ignore[no-any-return]


def test_a_draft_changes_nothing_and_an_approved_version_judges_the_next_test(
    sqlite_world: World, tmp_path: Path
) -> None:
    w = sqlite_world
    w.ready()
    submitted = w.ok(w.as_user("eng.ray", "module-type", "limits", "submit",
                               str(limits_file(tmp_path)), "--json")).json()  # fmt: skip
    assert submitted["version"]["state"] == "draft"
    shown = w.ok(w.cli("module-type", "show", "HF-750", "--json")).json()
    assert shown["site_limits"]["limits_version"] == "as registered"
    first = post_clean(w)  # 164/170 = 96.5 %: passes the 80 % registered minimum
    assert first["verdict"] == "pass" and first["limits_version_id"] is None

    # Its author may not approve it; QA may.
    own = w.as_user("eng.ray", "module-type", "limits", "approve", "HF-750", "2",
                    "--effective-from", "now")  # fmt: skip
    assert own.code == 3 and "may not approve" in own.stderr
    # Not from before the test already judged under the registered limits.
    before = w.snapshot()
    back = w.as_user("qa.lin", "module-type", "limits", "approve", "HF-750", "2",
                     "--effective-from", "2020-01-01T00:00Z",
                     "--late-reason", "backdated")  # fmt: skip
    assert back.code == 3 and w.snapshot() == before
    w.ok(w.as_user("qa.lin", "module-type", "limits", "approve", "HF-750", "2",
                   "--effective-from", "now"))  # fmt: skip

    shown = w.ok(w.cli("module-type", "show", "HF-750", "--json")).json()
    assert shown["site_limits"]["limits_version"].startswith("version 2, effective from ")
    assert shown["site_limits"]["recovery_min"]["entered"] == "97 %"
    assert shown["site_limits"]["decay_limit"]["entered"] == "0.04 psi/min"
    # From now the fitness verdict uses the new minimum: the last recovery (96.5 %) fails it.
    fit = w.cli("fitness", "QMB-0142")
    assert fit.code == 1 and "minimum 97.0 %" in fit.stdout
    # and a test recorded now names the version it was judged under
    pre = w.ok(w.water("QMB-0142", "pre-use", "164 mL/min", "--json")).json()["record"]
    assert pre["limits_version_id"] is not None
    history = w.ok(w.cli("module-type", "limits", "history", "HF-750", "--json")).json()
    rows = next(v for k, v in history.items() if k.startswith("versions"))
    assert [(r["version"], r["status"]) for r in rows] == [("2", "effective")]
    with transaction(w.engine()) as s:
        tests = s.exec(select(WaterFluxTest).order_by(WaterFluxTest.id)).all()  # type: ignore[arg-type]
        assert [t.limits_version_id is None for t in tests] == [True, True, True, False]


@pytest.mark.parametrize(
    ("old", "new", "words"),
    [
        ('recovery_min = "97 %"', 'recovery_min = "97 psi"', "limits.recovery_min"),
        ('decay_limit = "0.04 psi/min"', 'decay_limti = "0.04 psi/min"', "limits.decay_limti"),
        ('type = "HF-750"', 'type = "HF-999"', "no module type"),
        ('recovery_alert = "98 %"', 'recovery_alert = "90 %"', "alert"),
    ],
)
def test_a_bad_limits_file_is_refused_naming_the_key(
    sqlite_world: World, tmp_path: Path, old: str, new: str, words: str
) -> None:
    w = sqlite_world
    assert old in RAISED
    before = w.snapshot()
    refused = w.as_user("eng.ray", "module-type", "limits", "submit",
                        str(limits_file(tmp_path, RAISED.replace(old, new))))  # fmt: skip
    assert refused.code == 2, refused
    assert words in refused.stderr
    assert w.snapshot() == before


def test_a_file_that_changes_nothing_is_refused(sqlite_world: World, tmp_path: Path) -> None:
    w = sqlite_world
    same = '[limits]\ntype = "HF-750"\nversion = "2"\nreason = "r"\nrecovery_min = "80 %"\n'
    refused = w.as_user("eng.ray", "module-type", "limits", "submit",
                        str(limits_file(tmp_path, same)))  # fmt: skip
    assert refused.code == 2 and "changes nothing" in refused.stderr


def test_an_operator_cannot_submit_limits(sqlite_world: World, tmp_path: Path) -> None:
    w = sqlite_world
    refused = w.as_user("op.kim", "module-type", "limits", "submit", str(limits_file(tmp_path)))
    assert refused.code == 3
