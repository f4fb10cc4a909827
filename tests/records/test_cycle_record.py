"""A cleaning cycle in the batch record (issue 15 items 1 and 4, context version 4): the
record's recent cleanings list each step of a cycle with its values as typed and its verdict,
under the procedure version it was recorded against; the caution of each hazard class met (a
caustic, an acid and an oxidizer step) is printed in the PDF in the same words as on the
terminal (``ledger.rules.hazards.CAUTIONS``). A revision issued at version 3 is assembled
again without the steps, so it still compares equal.

Hazard classes as in tests/rules/test_hazards.py (CLP Annex VI, recalled from memory).
"""

from __future__ import annotations

import io
from collections.abc import Iterator
from pathlib import Path

import pytest
from pypdf import PdfReader
from sqlmodel import select

from ledger.records import context as c
from ledger.records.assemble import assemble
from ledger.records.pdf import render
from ledger.records.service import stored_context
from ledger.rules.hazards import CAUTIONS
from ledger.store.engine import transaction
from ledger.store.tables import RecordRevision
from tests.cli.test_cleaning_cycles import approved_procedure, values, verified_naoh
from tests.records.flow import add_second_qa, sign, to_review
from tests.world import World, Worlds

pytestmark = pytest.mark.sqlite_only

STEPS = ["flush", "caustic", "acid", "sanitize", "rinse"]


def _cycled_then_issued(w: World, folder: Path) -> None:
    """A used module cleaned by the five-step cycle, then run 1 to review and signed once."""
    add_second_qa(w)
    approved_procedure(w, folder)
    verified_naoh(w)
    w.ready()
    w.ok(w.as_user("op.kim", "use", "start", "QMB-0142", "--product", "QB-117", "--lot", "L-1"))
    w.ok(w.as_user("op.kim", "use", "end", "QMB-0142"))
    w.ok(w.water("QMB-0142", "post-use", "90 mL/min"))
    w.ok(w.as_user("op.kim", "care", "cycle", "QMB-0142", "--procedure", "QC-CYCLE-05",
                   *values()))  # fmt: skip
    w.ok(w.water("QMB-0142", "post-clean", "165 mL/min"))
    w.ok(w.integrity())
    to_review(w, folder, ready=False)
    w.ok(sign(w, 1, "performed", "op.kim"))


@pytest.fixture
def issued(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    with worlds.copy("sqlite", tmp_path, _cycled_then_issued) as w:
        yield w


def _context(w: World) -> c.Context:
    with transaction(w.engine()) as s:
        return stored_context(s, s.exec(select(RecordRevision)).one())


def test_the_record_lists_each_step_of_the_cycle(issued: World) -> None:
    ctx = _context(issued)
    cycle = ctx.history.cleanings[-1]
    assert cycle.procedure == "QC-CYCLE-05 v1"
    assert cycle.steps is not None
    assert [s.name for s in cycle.steps] == STEPS
    assert all(s.conforms == "yes" for s in cycle.steps)
    caustic = cycle.steps[1]
    assert caustic.solution == "SOL-NAOH-01"
    assert "45 degC" in caustic.values and "7 psi" in caustic.values  # as typed
    assert cycle.steps[4].values == "endpoint conductivity 1.1 uS/cm"
    # the record names the module type's limits it was judged against
    assert ctx.history.limits == "HF-750 limits as registered"


def test_the_pdf_prints_the_steps_and_one_caution_per_class_as_the_terminal_does(
    issued: World,
) -> None:
    ctx = _context(issued)
    pdf = render(ctx, software_version="t")
    words = " ".join(" ".join(p.extract_text().split()) for p in PdfReader(io.BytesIO(pdf)).pages)
    assert "under procedure QC-CYCLE-05 v1" in words
    for name in STEPS:
        assert f". {name}" in words
    cautions = [CAUTIONS[k].format(agent=a) for k, a in (("caustic", "sodium hydroxide"),
                ("acid", "phosphoric acid"), ("oxidizer", "sodium hypochlorite"))]  # fmt: skip
    assert len(set(cautions)) == 3  # three classes, three wordings
    for text in cautions:
        assert text in ctx.history.cleaning_cautions  # type: ignore[operator]
        assert text in words, text
    # the terminal printed the same words when the cycle was recorded (the CLI test checks
    # them there); water has no caution
    assert "water for injection is" not in words


def test_a_revision_assembled_at_version_3_has_no_steps(issued: World) -> None:
    with transaction(issued.engine()) as s:
        rev = s.exec(select(RecordRevision)).one()
        old = assemble(s, rev.run_id, revision=rev.number, reason=rev.reason, as_of=rev.as_of,
                       audit_seq=rev.audit_seq, version=3)  # fmt: skip
    assert old.version == 3
    assert all(r.steps is None and r.procedure == "" for r in old.history.cleanings)
    assert old.history.limits == ""
