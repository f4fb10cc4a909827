"""The record context assembled from the database (ledger.records.assemble), checked exactly:
against the files it came from (template and skid log, read here independently with hashlib
and pandas), the run's own checks, and its frozen revision."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest
from sqlmodel import Session

from ledger.records import context as c
from ledger.records.assemble import assemble
from tests.records.flow import GOOD_QC, sign
from tests.world import World

PSI = 6894.757293168  # Pa per psi (NIST SP 811, B.8: 1 psi = 6.894 757 E+03 Pa)


@pytest.fixture
def review(review_sqlite: World) -> World:
    """Run 1 in review (tests/records/conftest.py), on SQLite only."""
    return review_sqlite


def _context(w: World, **kw: object) -> c.Context:
    with Session(w.engine()) as s:
        return assemble(s, 1, **kw)  # type: ignore[arg-type]


def test_header_names_the_record_template_module_and_log(review: World, tmp_path: Path) -> None:
    from ledger.runs.template import shipped_dir

    h = _context(review).header
    assert (h.record_id, h.revision, h.run_id, h.product, h.lot) == (
        "BR-000001",
        0,
        1,
        "QB-117",
        "QB117-26-020",
    )
    assert (h.template_id, h.template_version) == ("QB-MR-LNP-101", "7")
    raw = (shipped_dir() / "qb_lnp_buffer_exchange.toml").read_bytes()
    assert h.template_sha256 == hashlib.sha256(raw).hexdigest()
    assert (h.module_serial, h.module_type, h.module_area, h.cycle) == (
        "QMB-0142",
        "HF-750",
        "0.0565 m²",
        1,
    )
    log = (tmp_path / "skid-1.csv").read_bytes()
    rows = log.count(b"\n") - 1
    assert h.skid_log is not None
    first, *notes = h.skid_log.split("; ")
    assert first == f"skid-1.csv ({rows:,} rows, SHA-256 {hashlib.sha256(log).hexdigest()})"
    # where the phases came from, and the mapping that read the log
    assert notes and notes[0].startswith("phases from the log's step column")
    # the planner, then the second person who approved the plan
    assert h.planned_by.startswith("eng.ray; plan approved by qa.lin at ")
    assert h.status == "in_review"
    assert h.started_at and h.started_at.endswith("+00:00")


def test_checks_qc_and_deviations_are_the_runs(review: World) -> None:
    ctx = _context(review)
    listed = review.cli("run", "checks", "1", "--json").json()["acceptance_checks"]
    assert [(k.name, k.verdict) for k in ctx.checks] == [(x["name"], x["verdict"]) for x in listed]
    tmp = next(k for k in ctx.checks if k.name == "tmp")
    assert (tmp.verdict, tmp.deviation, tmp.deviation_closed) == ("FAIL", 1, True)
    assert all(k.verdict == "PASS" for k in ctx.checks if k.name != "tmp")
    assert [(q.attribute, q.result, q.verdict) for q in ctx.qc] == [
        (t.split("=")[0], t.split("=")[1], "PASS") for t in GOOD_QC
    ]
    assert all(q.entered_by == "op.kim" for q in ctx.qc)
    (d,) = ctx.deviations
    assert (d.number, d.check, d.recorded_by, d.closed_by, d.closure, d.classification) == (
        1,
        "tmp",
        "op.kim",
        "qa.lin",
        "line re-routed",
        "minor",
    )
    (e,) = ctx.excursions
    assert (e.check, e.duration) == ("tmp", "24 s")


def test_charts_are_downsampled_envelopes_of_the_log(review: World, tmp_path: Path) -> None:
    import pandas as pd

    ctx = _context(review)
    charts = {s.name: s for s in ctx.charts}
    assert set(charts) == {"tmp", "flux", "retentate_volume"}
    raw = pd.read_csv(tmp_path / "skid-1.csv")
    tmp = ((raw["PT-101 Feed"] + raw["PT-102 Retentate"]) / 2 - raw["PT-103 Permeate"]) * PSI
    s = charts["tmp"]
    assert s.raw_points == len(raw) and len(s.t_s) <= 400 < len(raw)
    assert max(s.high) == pytest.approx(tmp.max(), rel=1e-12)
    assert min(s.low) == pytest.approx(tmp.min(), rel=1e-12)
    assert all(lo <= hi for lo, hi in zip(s.low, s.high, strict=True))
    level = raw["LT-101 Level"] * 1e-6  # mL -> m³
    r = charts["retentate_volume"]
    assert max(r.high) == pytest.approx(level.max()) and min(r.low) == pytest.approx(level.min())
    assert [p[0] for p in s.phases] == list(dict.fromkeys(raw["Step"]))
    from ledger.runs.service import get_run, run_plan

    with Session(review.engine()) as session:
        planned = run_plan(get_run(session, 1)).value("tmp")
    assert s.bands == (c.Band("whole run", planned.low, planned.high),)


def test_history_and_audit_excerpt(review: World) -> None:
    ctx = _context(review)
    hist = ctx.history
    assert hist.cycles_done == 1 and hist.reuse_limit == 3
    assert [(x.cycle, x.lot, x.this_run) for x in hist.recent_cycles] == [(1, "QB117-26-020", True)]
    assert hist.last_integrity is not None and hist.last_integrity.passed
    assert hist.recovery == ()  # no post-clean test yet on this new module
    entities = {a.entity for a in ctx.audit}
    assert entities == {"run", "skid_log_file", "qc_result", "deviation"}
    seqs = [a.seq for a in ctx.audit]
    assert seqs == sorted(seqs)
    assert any(a.reason == "run finished" for a in ctx.audit)
    assert ctx.cautions[0] == c.SITE_CAUTION
    assert ctx.required_signatures == ("performed", "verified", "reviewed", "approved")
    assert ctx.signature_roles["approved"] == ("qa",)


def test_context_round_trips_and_hashes_without_signatures(review: World) -> None:
    ctx = _context(review)
    again = c.from_record(c.Context, c.to_record(ctx))
    assert again == ctx and c.to_record(again) == c.to_record(ctx)
    assert "signatures" not in ctx.content()
    assert _context(review).sha256() == ctx.sha256()  # deterministic
    signed = ctx.with_signatures(
        (
            c.SignatureRow(
                1, 1, "performed", "a", "A", "operator", "2026-01-01T00:00:00+00:00", "0" * 64
            ),
        )
    )
    assert signed.sha256() == ctx.sha256()


def test_a_revision_is_frozen_against_later_module_activity(review: World) -> None:
    """Tests done on the module after the revision was issued do not change its content."""
    from ledger.records.service import current_revision, recompute

    review.ok(sign(review, 1, "performed", "op.kim"))
    review.ok(review.water("QMB-0142", "post-use", "90 mL/min"))
    review.ok(review.clean("QMB-0142"))
    review.ok(review.water("QMB-0142", "post-clean", "165 mL/min"))
    with Session(review.engine()) as s:
        rev = current_revision(s, 1)
        assert rev is not None
        again = recompute(s, rev)
    assert again.sha256() == rev.sha256
    assert again.content() == rev.content
