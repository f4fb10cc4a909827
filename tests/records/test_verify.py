"""`record print` and `record verify`: a good file verifies; each kind of tampering is named
(exit 1): a flipped byte in the PDF, a database value edited after signing, a signature row
copied onto another run, a sealed PDF changed after sealing."""

from __future__ import annotations

from pathlib import Path

import pytest
from sqlalchemy import text

from tests.records.flow import sign, to_review
from tests.world import World


def _print(w: World, out: Path, run: int = 1, *extra: str) -> Path:
    """Print a copy (an audited write: by qa.lin); the file it wrote."""
    args = ("record", "print", str(run), "--out", str(out), "--json", *extra)
    return Path(w.ok(w.as_user("qa.lin", *args)).json()["file"])


def _verify(w: World, path: Path) -> tuple[int, str]:
    r = w.cli("record", "verify", str(path), "--json")
    assert r.exception is None, r.exception  # no traceback, whatever the file holds
    return r.code, r.stdout


def test_a_printed_record_verifies_and_prints_identically_twice(
    approved: World, tmp_path: Path
) -> None:
    first = _print(approved, tmp_path)
    data = first.read_bytes()
    again = _print(approved, tmp_path)
    # Each print is its own numbered copy, so the bytes differ by the copy number; verify
    # renders each again from the database and finds it byte for byte the same.
    assert (first.name, again.name) == ("BR-000001-rev1-approved-copy1.pdf",
                                        "BR-000001-rev1-approved-copy2.pdf")  # fmt: skip
    assert again.read_bytes() != data and first.read_bytes() == data
    assert not list(tmp_path.glob("*.tmp*")) and not list(tmp_path.glob(".*.part"))
    for path in (first, again):
        code, out = _verify(approved, path)
        assert code == 0, out
        assert "byte for byte" in out and "bound to their revision" in out


def test_one_flipped_byte_in_the_pdf_is_found(approved_sqlite: World, tmp_path: Path) -> None:
    path = _print(approved_sqlite, tmp_path)
    data = bytearray(path.read_bytes())
    at = len(data) // 2
    data[at] ^= 0x01
    path.write_bytes(bytes(data))
    code, out = _verify(approved_sqlite, path)
    assert code == 1
    assert "differs from the record rendered from the database" in out


def test_a_database_value_edited_after_signing_is_found(approved: World, tmp_path: Path) -> None:
    path = _print(approved, tmp_path)
    engine = approved.engine()
    with engine.begin() as conn:
        conn.execute(text("UPDATE qc_result SET text = '7.9', value = 7.9 WHERE attribute = 'ph'"))
    code, out = _verify(approved, path)
    assert code == 1
    assert "the database no longer gives the content that was signed" in out
    assert "'7.4' when issued, '7.9' now" in out
    assert "audit trail: qc_result" in out


@pytest.mark.slow
def test_a_signature_copied_onto_another_run_is_found(approved: World, tmp_path: Path) -> None:
    # A second run on the same module, in review with one signature of its own.
    approved.ok(approved.water("QMB-0142", "post-use", "90 mL/min"))
    approved.ok(approved.clean("QMB-0142"))
    approved.ok(approved.water("QMB-0142", "post-clean", "165 mL/min"))
    approved.ok(approved.integrity("QMB-0142"))
    to_review(approved, tmp_path, run=2, lot="QB117-26-021", ready=False)
    approved.ok(sign(approved, 2, "performed", "op.kim"))
    engine = approved.engine()
    with engine.begin() as conn:
        cols = (
            "record_hash, created_at, created_by, revision_id, revision, revision_sha256, "
            "meaning, login, full_name, role, signed_at"
        )
        conn.execute(
            text(
                f"INSERT INTO signature (run_id, {cols}) SELECT 2, {cols} "
                "FROM signature WHERE run_id = 1 AND meaning = 'approved'"
            )
        )
    r = approved.cli("record", "show", "2", "--json")
    assert [s["meaning"] for s in r.json()["signatures"]] == ["performed", "approved"]
    path = _print(approved, tmp_path, run=2)
    code, out = _verify(approved, path)
    assert code == 1
    assert (
        "(approved by qa.nova) on BR-000002 claims revision 1 but points at revision 1 of "
        "BR-000001: it was copied or moved" in out
    )
    assert "audit trail: signature" in out


def test_a_file_that_is_not_a_record_is_refused(approved_sqlite: World, tmp_path: Path) -> None:
    other = tmp_path / "notes.pdf"
    other.write_bytes(b"%PDF-1.4\n%%EOF\n")
    code, out = _verify(approved_sqlite, other)
    assert code == 1 and "no fluxledger record stamp" in out
    missing = approved_sqlite.cli("record", "verify", str(tmp_path / "absent.pdf"))
    assert missing.code == 2 and "absent.pdf" in missing.stderr


def test_a_sealed_record_verifies_and_an_edit_after_sealing_is_found(
    approved_sqlite: World, tmp_path: Path
) -> None:
    from ledger.records.identity import make_identity

    ident = make_identity(
        tmp_path / "seal",
        common_name="Test seal",
        organization="Quellmoor Biotherapeutics (invented)",
        passphrase=b"seal-pass-1",
    )
    sealed = approved_sqlite.as_user(
        "qa.lin",
        "record",
        "seal",
        "1",
        "--key",
        str(ident.p12),
        "--key-password-stdin",
        "--out",
        str(tmp_path),
        "--json",
        extra=["seal-pass-1"],
    )
    approved_sqlite.ok(sealed)
    path = tmp_path / "BR-000001-rev1-approved-copy1-sealed.pdf"
    assert sealed.json()["file"] == str(path) and sealed.json()["sealed"] is True
    r = approved_sqlite.cli("record", "verify", str(path), "--trust", str(ident.cert), "--json")
    assert r.code == 0, r.stdout
    assert "digital seal intact" in r.stdout
    data = path.read_bytes()
    edited = tmp_path / "edited.pdf"
    # An edit after sealing: a plain incremental update appended to the file.
    edited.write_bytes(data + _incremental_update(data))
    code, out = _verify(approved_sqlite, edited)
    assert code == 1 and "after sealing" in out, out


def _incremental_update(data: bytes) -> bytes:
    """Append a new Info entry as an incremental update, as a PDF editor would."""
    import io

    from pyhanko.pdf_utils.generic import NameObject, TextStringObject
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter

    buf = io.BytesIO(data)
    w = IncrementalPdfFileWriter(buf)
    info = w.trailer["/Info"]
    info[NameObject("/Subject")] = TextStringObject("edited after sealing")
    w.update_container(info)
    out = io.BytesIO()
    w.write(out)
    return out.getvalue()[len(data) :]


def test_sealing_needs_an_approved_revision(review_sqlite: World, tmp_path: Path) -> None:
    sqlite_world = review_sqlite  # run 1 in review, with the second QA user
    sqlite_world.ok(sign(sqlite_world, 1, "performed", "op.kim"))
    r = sqlite_world.cli(
        "record",
        "seal",
        "1",
        "--key",
        str(tmp_path / "none.p12"),
        "--key-password-stdin",
        input="x\n",
    )
    assert r.code == 3 and "not approved" in r.stderr


def test_a_skid_log_blob_replaced_in_sql_is_named_as_such(approved: World, tmp_path: Path) -> None:
    path = _print(approved, tmp_path)
    with approved.engine().begin() as conn:
        conn.execute(text("UPDATE skid_log_file SET content = :c"), {"c": b"time,FT\n0,1\n"})
    code, out = _verify(approved, path)
    assert code == 1, out
    assert "was replaced in the database: its bytes no longer match the SHA-256" in out
    assert "skid-1.csv" in out and "temporary" not in out and "parse" not in out
