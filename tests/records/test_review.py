"""Review by exception: the record opens with what a reviewer must look at, and
`record review RUN` prints the same; a clean run says "none" for every topic.

The clock is frozen and moved on by hand so that the log lies inside the run's times and the
only late entry is the one the test makes.
"""

from __future__ import annotations

from collections.abc import Iterator
from datetime import UTC, datetime, timedelta
from io import BytesIO
from pathlib import Path
from typing import cast

import pytest
from freezegun import freeze_time
from freezegun.api import FrozenDateTimeFactory

from ledger.records.review import TOPICS
from tests.cli.test_runs import INPUTS, MAPPING
from tests.records.flow import GOOD_QC
from tests.world import World


@pytest.fixture
def clock() -> Iterator[FrozenDateTimeFactory]:
    # pandas and pyarrow are imported before the clock stops: importing them under a frozen
    # clock crashes the interpreter.
    import pandas  # noqa: F401
    import pyarrow.csv  # noqa: F401

    start = datetime.now(UTC).replace(microsecond=0) + timedelta(days=1)
    with freeze_time(start, ignore=["_pytest"]) as frozen:
        yield cast(FrozenDateTimeFactory, frozen)


def _run(w: World, clock: FrozenDateTimeFactory, tmp_path: Path, *, exceptions: bool) -> None:
    from ledger.cli.demo_log import write_log

    w.ready()
    w.ok(w.water("QMB-0142", "pre-use", "168 mL/min"))
    clock.tick(timedelta(minutes=5))
    now = datetime.now(UTC)
    extra: list[str] = []
    product = "QB-117"
    if exceptions:  # a late plan, and a template of another product with a reason
        extra = ["--activity-time", (now - timedelta(minutes=3)).isoformat(),
                 "--product-override-reason", "bridging lot QB-204 on the QB-117 SOP"]  # fmt: skip
        product = "QB-204"
    w.ok(w.as_user("eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0142",
                   "--product", product, "--lot", "QB-26-031", *INPUTS, *extra))  # fmt: skip
    w.ok(w.as_user("qa.lin", "run", "approve-plan", "1"))
    w.ok(w.as_user("op.kim", "run", "start", "1"))
    start = datetime.now(UTC)
    log = write_log(tmp_path / "skid.csv", start + timedelta(seconds=30),
                    pinch_s=2100.0 if exceptions else None)  # fmt: skip
    clock.tick(timedelta(hours=4))
    w.ok(w.as_user("op.kim", "run", "import", "1", str(log), "--mapping", str(MAPPING)))
    w.ok(w.as_user("op.kim", "run", "qc", "1", *(x for q in GOOD_QC for x in ("--result", q))))
    w.ok(w.as_user("op.kim", "run", "finish", "1"))


def _topics(w: World) -> dict[str, list[str]]:
    body = w.ok(w.cli("record", "review", "1", "--json")).json()
    out: dict[str, list[str]] = {}
    for topic in TOPICS:
        section = body[topic.replace(" ", "_")]
        values = [v for v in section.values()]
        out[topic] = [] if values == ["none"] else values
    return out


def test_a_run_with_one_fail_one_override_and_one_late_entry_shows_exactly_those(
    world: World, clock: FrozenDateTimeFactory, tmp_path: Path
) -> None:
    _run(world, clock, tmp_path, exceptions=True)
    topics = _topics(world)
    found = {t: f for t, f in topics.items() if f}
    assert set(found) == {"failed or missing checks", "overrides", "late entries"}, found
    assert all(len(f) == 1 for f in found.values()), found
    assert "FAIL" in found["failed or missing checks"][0]
    assert (
        "TMP" in found["failed or missing checks"][0]
        or "tmp" in found["failed or missing checks"][0]
    )
    assert "bridging lot QB-204" in found["overrides"][0]
    assert found["late entries"][0].startswith("plan entered at")
    human = world.cli("record", "review", "1").stdout
    assert "3 to look at" in human
    # The printed record opens with the same summary, before anything else.
    world.ok(world.as_user("eng.ray", "record", "print", "1", "--out", str(tmp_path)))
    (pdf,) = tmp_path.glob("BR-*.pdf")
    text = _pdf_text(pdf)
    assert text.index("Review by exception") < text.index("Cautions")
    assert "bridging lot QB-204" in text and "plan entered at" in text


def test_a_clean_run_says_none_for_every_topic(
    world: World, clock: FrozenDateTimeFactory, tmp_path: Path
) -> None:
    _run(world, clock, tmp_path, exceptions=False)
    assert _topics(world) == {t: [] for t in TOPICS}
    assert "nothing to look at" in world.cli("record", "review", "1").stdout


def _pdf_text(path: Path) -> str:
    from pypdf import PdfReader

    reader = PdfReader(BytesIO(path.read_bytes()))
    return "\n".join(page.extract_text() or "" for page in reader.pages)
