"""Controlled copies (issue 14 item 5): every `record print` is a numbered, audited copy; a
revision not fully signed carries its state on every page and in the file name; `record
verify` says what a copy carries and lacks, refuses (exit 1) a copy claiming more than the
database holds and states (exit 0) a copy older than the database."""

from __future__ import annotations

import io
import json
from pathlib import Path

from pypdf import PdfReader

from tests.records.flow import sign
from tests.world import World

BAND = "revision 1 — in review — not for release"


def _print(w: World, out: Path, user: str = "op.kim", *extra: str) -> dict:  # type: ignore[type-arg]
    return w.ok(w.as_user(user, "record", "print", "1", "--out", str(out), "--json", *extra)).json()


def _pages(path: Path) -> list[str]:
    return [p.extract_text() for p in PdfReader(io.BytesIO(path.read_bytes())).pages]


def _verify(w: World, path: Path) -> tuple[int, dict]:  # type: ignore[type-arg]
    r = w.cli("record", "verify", str(path), "--json")
    assert r.exception is None or isinstance(r.exception, SystemExit), r.exception
    return r.code, json.loads(r.stdout)


def _file(report: dict) -> dict:  # type: ignore[type-arg]
    return dict(report["file"])


def _texts(report: dict, title: str) -> list[str]:  # type: ignore[type-arg]
    found = report.get(title.lower(), {})
    return [str(v) for v in (found if isinstance(found, list) else found.values())]


def _copy_events(w: World) -> list[dict]:  # type: ignore[type-arg]
    shown = w.ok(w.cli("audit", "show", "--entity", "record_copy", "--json")).json()
    return list(shown["events"])


def test_a_partly_signed_copy_carries_its_state_and_is_older_after_more_signatures(
    review: World, tmp_path: Path
) -> None:
    review.ok(sign(review, 1, "performed", "op.kim"))
    info = _print(review, tmp_path)
    path = Path(info["file"])
    assert path.name == "BR-000001-rev1-in-review-copy1.pdf"
    assert (info["copy"], info["state"], info["signatures"]) == (1, "in review", ["performed"])
    pages = _pages(path)
    assert len(pages) > 2
    for number, text in enumerate(pages, start=1):
        assert BAND in text, f"page {number} has no status band"
        assert "copy 1" in text
    events = _copy_events(review)
    assert len(events) == 1 and events[0]["action"] == "create"
    assert "copy 1 (in review)" in events[0]["reason"]
    new = json.loads(events[0]["new_value"])
    assert new["copy_number"] == 1 and new["signatures"] == ["performed"]

    # Fresh: verified, saying what it lacks.
    code, report = _verify(review, path)
    assert code == 0, report
    shown = _file(report)
    assert (shown["copy"], shown["state"], shown["signatures"]) == (1, "in review", "performed")
    assert shown["lacks"] == "verified, reviewed, approved"
    assert any("copy 1 is registered" in t for t in _texts(report, "Passed"))

    # Signed further since: older than the current state, stated, exit 0.
    review.ok(sign(review, 1, "verified", "eng.ray"))
    code, report = _verify(review, path)
    assert code == 0, report
    notes = " | ".join(_texts(report, "Notes"))
    assert "copy 1 is older than the current state (in review)" in notes
    assert "the database now also holds verified" in notes
    assert "lacks verified, reviewed, approved" in notes


def test_a_copy_claiming_more_than_the_database_holds_fails(
    review_sqlite: World, tmp_path: Path
) -> None:
    w = review_sqlite
    w.ok(sign(w, 1, "performed", "op.kim"))
    path = Path(_print(w, tmp_path)["file"])
    data = path.read_bytes()
    claims = {
        "approved": (b"state=in review;meanings=performed;",
                     b"state=approved;meanings=performed,verified,reviewed,approved;"),
        "extra": (b"meanings=performed;", b"meanings=performed,verified;"),
        "state only": (b"state=in review;", b"state=approved;"),
        "unknown copy": (b"copy=1;", b"copy=7;"),
    }  # fmt: skip
    for name, (old, new) in claims.items():
        assert data.count(old) == 1, name
        forged = tmp_path / f"forged-{name}.pdf"
        forged.write_bytes(data.replace(old, new))
        code, report = _verify(w, forged)
        problems = " | ".join(_texts(report, "Problems"))
        assert code == 1, (name, report)
        if name == "approved":
            assert "claims signature(s) verified, reviewed, approved that the database" in problems
        if name == "extra":
            assert "claims signature(s) verified that the database does not hold" in problems
        if name == "state only":
            assert "claims the state 'approved', but the signatures it carries make it " in problems
            assert "make it 'in review'" in problems
        if name == "unknown copy":
            assert "has no copy 7 registered" in problems
        if name != "unknown copy":
            assert "is not the one registered as copy 1" in problems


def test_a_fully_signed_copy_has_no_band_and_verifies_approved(
    approved: World, tmp_path: Path
) -> None:
    info = _print(approved, tmp_path, "qa.lin")
    path = Path(info["file"])
    assert path.name == "BR-000001-rev1-approved-copy1.pdf"
    assert info["state"] == "approved"
    pages = _pages(path)
    assert all("not for release" not in t for t in pages)
    assert all("copy 1" in t for t in pages)
    code, report = _verify(approved, path)
    assert code == 0, report
    shown = _file(report)
    assert shown["state"] == "approved" and shown["lacks"] == "nothing"
    assert shown["signatures"] == "performed, verified, reviewed, approved"
    assert not _texts(report, "Problems")


def test_copy_numbers_count_up_per_run_and_a_refused_write_registers_nothing(
    review_sqlite: World, tmp_path: Path
) -> None:
    w = review_sqlite
    # Before any signature: a draft, registered too.
    first = _print(w, tmp_path)
    assert Path(first["file"]).name == "BR-000001-draft-copy1.pdf" and first["state"] == "draft"
    assert all("not for release" not in t and "DRAFT" in t for t in _pages(Path(first["file"])))
    w.ok(sign(w, 1, "performed", "op.kim"))
    second = _print(w, tmp_path, "eng.ray")
    third = _print(w, tmp_path / "BR-000001-rev1-in-review-copy3.pdf", "qa.lin")
    assert [c["copy"] for c in (first, second, third)] == [1, 2, 3]
    assert Path(second["file"]).name == "BR-000001-rev1-in-review-copy2.pdf"
    events = _copy_events(w)
    assert [json.loads(e["new_value"])["copy_number"] for e in events] == [1, 2, 3]
    assert [e["actor"] for e in events] == ["op.kim", "eng.ray", "qa.lin"]

    # The next default name is free, so name an existing file: refused, nothing written.
    taken = Path(third["file"])
    kept = taken.read_bytes()
    before = w.snapshot()
    refused = w.as_user("op.kim", "record", "print", "1", "--out", str(taken))
    assert refused.code == 2 and "the file exists; nothing was written" in refused.stderr
    assert w.snapshot() == before and taken.read_bytes() == kept
    assert not list(tmp_path.glob(".*.part"))
    # A wrong password prints nothing and registers nothing.
    wrong = w.cli("record", "print", "1", "--out", str(tmp_path / "x.pdf"), "--user", "op.kim",
                  "--password-stdin", input="not-the-password\n")  # fmt: skip
    assert wrong.code != 0 and not (tmp_path / "x.pdf").exists()
    assert w.snapshot()["record_copy"] == before["record_copy"]


def test_a_copy_of_a_revision_corrected_since_is_older_and_a_superseded_print_says_so(
    approved_sqlite: World, tmp_path: Path
) -> None:
    w = approved_sqlite
    before = Path(_print(w, tmp_path, "qa.lin")["file"])
    w.ok(w.as_user("eng.ray", "record", "correct", "1", "--reason", "pH transcribed wrongly"))
    code, report = _verify(w, before)
    assert code == 0, report
    notes = " | ".join(_texts(report, "Notes"))
    assert "copy 1 is older than the current state (superseded)" in notes
    assert "revision 1 was superseded since" in notes
    # Revision 1 printed now: superseded, banded, and numbered on.
    info = _print(w, tmp_path, "qa.lin", "--revision", "1")
    path = Path(info["file"])
    assert path.name == "BR-000001-rev1-superseded-copy2.pdf" and info["state"] == "superseded"
    assert all("revision 1 — superseded — not for release" in t for t in _pages(path))
    code, report = _verify(w, path)
    assert code == 0 and _file(report)["state"] == "superseded", report
    # A superseded copy claiming approval claims what the database no longer gives it.
    forged = tmp_path / "forged.pdf"
    forged.write_bytes(path.read_bytes().replace(b"state=superseded;", b"state=approved;"))
    code, report = _verify(w, forged)
    assert code == 1, report
