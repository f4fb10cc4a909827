"""`record archive`: the approved record as a numbered, audited PDF/A-3b copy with record.json.

Refused for a record that is not approved (a rule: exit 3) and for bad input (exit 2), with
nothing written either way; an archive copy is registered, shows in the audit trail and
`record verify` verifies it (exit 0) byte for byte against the database.
"""

from __future__ import annotations

import hashlib
import io
import json
from collections.abc import Iterator
from pathlib import Path

import pytest
from pypdf import PdfReader

from ledger.records.archive import ATTACHMENT, pdfa_problems, record_json
from tests.records import flow
from tests.world import Result, World, Worlds


@pytest.fixture
def approved(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """Run 1 signed by all four signers (approved and locked)."""
    with worlds.copy("sqlite", tmp_path, flow.approved) as w:
        yield w


@pytest.fixture
def review(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """Run 1 in review, with a second QA user."""
    with worlds.copy("sqlite", tmp_path, flow.reviewed) as w:
        yield w


def _archive(w: World, out: Path, *extra: str) -> Result:
    return w.as_user("qa.lin", "record", "archive", "1", "--out", str(out), *extra)


def _no_traceback(r: Result) -> None:
    assert r.exception is None or isinstance(r.exception, SystemExit), r.exception
    assert "Traceback" not in r.stderr


def _pdfs(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if ".pdf" in p.name)


def test_a_record_not_approved_is_refused_and_nothing_is_written(
    review: World, tmp_path: Path
) -> None:
    review.ok(flow.sign(review, 1, "performed", "op.kim"))
    out = tmp_path / "out"
    out.mkdir()
    before = review.snapshot()
    r = _archive(review, out)
    _no_traceback(r)
    assert r.code == 3, (r.code, r.stderr)
    assert "not approved" in r.stderr
    assert _pdfs(out) == []
    assert review.snapshot() == before


def test_bad_input_exits_2_naming_the_option_and_writes_nothing(
    approved: World, tmp_path: Path
) -> None:
    before = approved.snapshot()
    missing = tmp_path / "no-such-folder" / "x.pdf"
    r = _archive(approved, missing)
    _no_traceback(r)
    assert r.code == 2 and "--out" in r.stderr and "does not exist" in r.stderr
    r = _archive(approved, tmp_path, "--revision", "9")
    _no_traceback(r)
    assert r.code == 2 and "no revision 9" in r.stderr
    assert _pdfs(tmp_path) == []
    assert approved.snapshot() == before


def test_an_approved_record_is_archived_registered_audited_and_verifies(
    approved: World, tmp_path: Path
) -> None:
    r = approved.ok(_archive(approved, tmp_path, "--json"))
    info = r.json()
    path = tmp_path / "BR-000001-rev1-approved-copy1-archive.pdf"
    assert info["file"] == str(path) and info["archive"].startswith("PDF/A-3b")
    assert (info["copy"], info["state"], info["sealed"]) == (1, "approved", False)
    data = path.read_bytes()
    assert hashlib.sha256(data).hexdigest() == info["file_sha256"]
    assert pdfa_problems(data) == []
    (attached,) = PdfReader(io.BytesIO(data)).attachments[ATTACHMENT]
    record = json.loads(attached)
    assert record["header"]["record_id"] == "BR-000001" and len(record["signatures"]) == 4

    events = approved.ok(approved.cli("audit", "show", "--entity", "record_copy",
                                      "--json")).json()["events"]  # fmt: skip
    assert len(events) == 1 and events[0]["action"] == "create"
    assert "BR-000001 revision 1 archived as copy 1 (approved)" in events[0]["reason"]
    row = json.loads(events[0]["new_value"])
    assert row["kind"] == "archive" and row["file_sha256"] == info["file_sha256"]

    v = approved.cli("record", "verify", str(path), "--json")
    assert v.code == 0, v.stdout
    report = v.json()
    passed = " | ".join(str(x) for x in report["passed"].values())
    assert "byte for byte the record rendered from the database" in passed
    assert "copy 1 is registered (archive" in passed
    assert not report.get("problems")

    # The human line says what was written; the same revision archived again is copy 2,
    # whose attachment is the same record JSON (only the copy number differs in the PDF).
    again = approved.ok(_archive(approved, tmp_path))
    assert "copy 2 (approved)" in again.stdout and "PDF/A-3b" in again.stdout
    second = (tmp_path / "BR-000001-rev1-approved-copy2-archive.pdf").read_bytes()
    assert PdfReader(io.BytesIO(second)).attachments[ATTACHMENT] == [attached]


def test_an_archive_changed_after_writing_fails_verification(
    approved: World, tmp_path: Path
) -> None:
    approved.ok(_archive(approved, tmp_path))
    path = tmp_path / "BR-000001-rev1-approved-copy1-archive.pdf"
    data = path.read_bytes()
    # One byte of the XMP packet's padding: still a readable PDF/A file, but not the copy.
    at = data.index(b" " * 99)
    edited = tmp_path / "edited.pdf"
    edited.write_bytes(data[:at] + b"x" + data[at + 1 :])
    v = approved.cli("record", "verify", str(edited), "--json")
    assert v.code == 1, v.stdout
    problems = " | ".join(str(x) for x in v.json()["problems"].values())
    assert "differs from the record rendered from the database" in problems
    assert "not the one registered as copy 1" in problems


def test_the_attachment_is_the_stored_revision_with_its_signatures(
    approved: World, tmp_path: Path
) -> None:
    from sqlmodel import Session

    from ledger.records.service import approved_record

    approved.ok(_archive(approved, tmp_path))
    data = (tmp_path / "BR-000001-rev1-approved-copy1-archive.pdf").read_bytes()
    with Session(approved.engine()) as s:
        expected = record_json(approved_record(s, 1).context)
    assert PdfReader(io.BytesIO(data)).attachments[ATTACHMENT] == [expected]
