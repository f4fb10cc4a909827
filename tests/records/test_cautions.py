"""Cautions by chemistry in the batch record (issue 15 item 4, context version 3).

The record's cautions come from the hazard class of each agent it names, in the one wording
of ``ledger.rules.hazards``: the recent cleanings' agents and the agents a step names. A
revision issued at version 2 (one caustic caution for everything) is assembled again the old
way, so it still verifies, and a value edited under it is still found. The classes used
(sodium hydroxide caustic, nitric acid an acid) follow CLP Annex VI as recalled from memory.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterator
from pathlib import Path

import pytest
import sqlalchemy as sa
from sqlmodel import select

from ledger.records import context as c
from ledger.records.assemble import assemble
from ledger.records.pdf import render
from ledger.records.service import stored_context
from ledger.records.verify import revision_problems
from ledger.rules.hazards import CAUTIONS
from ledger.store.engine import transaction
from ledger.store.tables import RecordRevision
from tests.records.flow import add_second_qa, sign, to_review
from tests.world import World, Worlds


def _cleaned_then_issued(w: World, folder: Path) -> None:
    """A cycle with a sodium hydroxide cleaning, then run 1 to review and signed once (so
    revision 1 is issued)."""
    add_second_qa(w)
    w.ready()
    w.ok(w.cycle())
    w.ok(w.integrity())
    to_review(w, folder, ready=False)
    w.ok(sign(w, 1, "performed", "op.kim"))


@pytest.fixture
def issued(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    with worlds.copy("sqlite", tmp_path, _cleaned_then_issued) as w:
        yield w


def test_an_issued_record_carries_the_cautions_of_its_agents(issued: World) -> None:
    with transaction(issued.engine()) as s:
        rev = s.exec(select(RecordRevision)).one()
        ctx = stored_context(s, rev)
    assert ctx.version == c.CONTEXT_VERSION == 4
    agents = {r.agent.casefold() for r in ctx.history.cleanings}
    assert agents == {"sodium hydroxide"}  # the world cleans with it before the run
    caustic = CAUTIONS["caustic"].format(agent=ctx.history.cleanings[0].agent)
    assert ctx.history.cleaning_cautions == (caustic,)
    assert caustic in ctx.cautions and c.CAUSTIC_CAUTION not in ctx.cautions
    assert ctx.cautions[0] == c.SITE_CAUTION
    # a step that names an agent carries that agent's caution; the others none
    for st in ctx.steps:
        assert st.cautions is not None
        text = f"{st.title} {st.text}".casefold()
        assert bool(st.cautions) == ("ethanol" in text), st.title


def test_a_step_naming_an_acid_shows_the_acid_caution_in_the_pdf(issued: World) -> None:
    import io

    from pypdf import PdfReader

    with transaction(issued.engine()) as s:
        ctx = stored_context(s, s.exec(select(RecordRevision)).one())
    acid = CAUTIONS["acid"].format(agent="nitric acid")
    step = dataclasses.replace(ctx.steps[0], text="Rinse with 0.1 M nitric acid.",
                               cautions=(acid,))  # fmt: skip
    pdf = render(dataclasses.replace(ctx, steps=(step, *ctx.steps[1:])), software_version="t")
    words = " ".join(" ".join(p.extract_text().split()) for p in PdfReader(io.BytesIO(pdf)).pages)
    assert "nitric acid is an acid" in words
    assert "(e.g. sodium hydroxide) are caustic" not in words


def test_a_revision_issued_at_version_2_still_verifies(issued: World) -> None:
    engine = issued.engine()
    with transaction(engine) as s:
        rev = s.exec(select(RecordRevision)).one()
        old = assemble(s, rev.run_id, revision=rev.number, reason=rev.reason, as_of=rev.as_of,
                       audit_seq=rev.audit_seq, version=2).content()  # fmt: skip
    assert old["version"] == 2
    assert old["cautions"] == [c.SITE_CAUTION, c.CAUSTIC_CAUTION]
    assert all(st["cautions"] is None for st in old["steps"])
    # Make the stored revision one issued before version 3 (content and its hash).
    with transaction(engine) as s:
        row = s.exec(select(RecordRevision)).one()
        row.content = old
        row.sha256 = c.content_sha256(old)
        s.add(row)
    with transaction(engine) as s:
        rev = s.exec(select(RecordRevision)).one()
        assert revision_problems(s, rev) == []
        # the old context renders with its one caustic caution, as it was issued
        shown = stored_context(s, rev)
    assert shown.history.cleaning_cautions is None
    assert render(shown, software_version="t")[:4] == b"%PDF"
    # an edit under the old revision is still found
    with engine.begin() as conn:
        conn.execute(sa.text("UPDATE cleaning SET agent = 'citric acid'"))
    with transaction(engine) as s:
        problems = revision_problems(s, s.exec(select(RecordRevision)).one())
    assert any("no longer gives the content that was signed" in p for p in problems), problems
