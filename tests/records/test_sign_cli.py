"""Electronic signatures through the CLI (DEVELOPERS.md; 21 CFR 11.50, 11.70, 11.200; Annex 11 §14):
password at every signature, the template's order and roles, different people, no
administrator, approval blocked by open problems, lock after approval, corrections as new
revisions. Every refusal exits 3 and writes nothing."""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.records.flow import add_second_qa, approve, sign, to_review
from tests.world import World


def _show(w: World, run: int = 1) -> dict:  # type: ignore[type-arg]
    return w.ok(w.cli("record", "show", str(run), "--json")).json()


def test_four_people_sign_in_order_and_approval_locks(review: World) -> None:
    out = review.ok(
        review.as_user("op.kim", "record", "sign", "1", "--meaning", "performed", "--json")
    ).json()
    assert out["revision"] == 1 and out["name"] == "Kim Varga" and out["role"] == "operator"
    assert out["signed_at"].endswith("+00:00") and len(out["revision_sha256"]) == 64
    for meaning, user in (("verified", "eng.ray"), ("reviewed", "qa.lin")):
        review.ok(sign(review, 1, meaning, user))
    assert _show(review)["record"]["run_status"] == "in_review"
    last = review.ok(sign(review, 1, "approved", "qa.nova"))
    assert "approved and locked" in last.stdout
    shown = _show(review)
    assert shown["record"]["run_status"] == "approved"
    sigs = shown["signatures"]
    assert [s["meaning"] for s in sigs] == ["performed", "verified", "reviewed", "approved"]
    assert {s["revision_sha256"] for s in sigs} == {shown["revisions"][0]["sha256"]}
    # Locked: no data entry, no further signature.
    before = review.snapshot()
    qc = review.as_user(
        "op.kim", "run", "qc", "1", "--result", "ph=7.5", "--correction-reason", "typo"
    )
    assert qc.code == 3 and "approved and locked" in qc.stderr
    again = sign(review, 1, "approved", "qa.lin")
    assert again.code == 3  # type: ignore[attr-defined]
    assert review.snapshot() == before
    review.ok(review.cli("audit", "verify"))


@pytest.mark.parametrize(
    ("meaning", "user", "needle"),
    [
        ("approved", "qa.nova", "sign in order: performed, verified, reviewed first"),
        ("performed", "sysadm", "administrators cannot sign"),
        ("reviewed", "op.kim", "needs the role engineer or qa"),
    ],
)
def test_refused_signatures_write_nothing(
    review_sqlite: World, meaning: str, user: str, needle: str
) -> None:
    before = review_sqlite.snapshot()
    refused = sign(review_sqlite, 1, meaning, user)
    assert refused.code == 3, refused  # type: ignore[attr-defined]
    assert needle in refused.stderr  # type: ignore[attr-defined]
    assert review_sqlite.snapshot() == before


def test_one_person_cannot_sign_two_meanings(review_sqlite: World) -> None:
    review_sqlite.ok(sign(review_sqlite, 1, "performed", "eng.ray"))
    refused = sign(review_sqlite, 1, "verified", "eng.ray")
    assert refused.code == 3 and "different person" in refused.stderr  # type: ignore[attr-defined]


def test_password_is_asked_every_time_and_a_wrong_one_signs_nothing(review_sqlite: World) -> None:
    before = review_sqlite.snapshot()["signature"]
    wrong = review_sqlite.cli(
        "record",
        "sign",
        "1",
        "--meaning",
        "performed",
        "--user",
        "op.kim",
        "--password-stdin",
        input="not-her-password\n",
    )
    assert wrong.code == 3 and "wrong password" in wrong.stderr
    assert review_sqlite.snapshot()["signature"] == before
    # Without --user the user ID is asked for too (here from stdin, as a script would).
    from tests.world import PASSWORDS

    asked = review_sqlite.cli(
        "record",
        "sign",
        "1",
        "--meaning",
        "performed",
        "--password-stdin",
        input=f"op.kim\n{PASSWORDS['op.kim']}\n",
    )
    review_sqlite.ok(asked)
    assert "performed by Kim Varga (op.kim, operator)" in asked.stdout


def test_an_unknown_meaning_is_bad_input(review_sqlite: World) -> None:
    bad = review_sqlite.as_user("qa.lin", "record", "sign", "1", "--meaning", "released")
    assert bad.code == 2 and "--meaning 'released'" in bad.stderr and "performed" in bad.stderr


def test_approval_is_refused_while_a_check_is_missing(sqlite_world: World, tmp_path: Path) -> None:
    add_second_qa(sqlite_world)
    to_review(sqlite_world, tmp_path, qc=["particle_size=78 nm", "ph=7.4"])
    for meaning, user in (("performed", "op.kim"), ("verified", "eng.ray"), ("reviewed", "qa.lin")):
        sqlite_world.ok(sign(sqlite_world, 1, meaning, user))
    refused = sign(sqlite_world, 1, "approved", "qa.nova")
    assert refused.code == 3  # type: ignore[attr-defined]
    assert "check pdi is MISSING" in refused.stderr  # type: ignore[attr-defined]
    assert "check encapsulation is MISSING" in refused.stderr  # type: ignore[attr-defined]
    assert _show(sqlite_world)["record"]["run_status"] == "in_review"


def test_signing_needs_the_run_in_review(sqlite_world: World, tmp_path: Path) -> None:
    from tests.cli.test_runs import plan, ready_for_a_run

    ready_for_a_run(sqlite_world)
    sqlite_world.ok(plan(sqlite_world))
    refused = sign(sqlite_world, 1, "performed", "op.kim")
    assert refused.code == 3 and "it is planned" in refused.stderr  # type: ignore[attr-defined]


def test_a_correction_makes_a_new_revision_and_keeps_the_old_signatures(review: World) -> None:
    approve(review)
    first = _show(review)["revisions"][0]
    assert review.as_user("op.kim", "record", "correct", "1", "--reason", "x").code == 3
    review.ok(
        review.as_user(
            "eng.ray", "record", "correct", "1", "--reason", "pH result was transcribed wrongly"
        )
    )
    review.ok(
        review.as_user(
            "op.kim",
            "run",
            "qc",
            "1",
            "--result",
            "ph=7.3",
            "--correction-reason",
            "transcription error",
        )
    )
    review.ok(review.as_user("op.kim", "run", "submit", "1"))
    review.ok(sign(review, 1, "performed", "op.kim"))
    shown = _show(review)
    revs = shown["revisions"]
    assert [r["number"] for r in revs] == [1, 2]
    assert revs[0]["sha256"] == first["sha256"] and revs[0]["superseded"]
    assert revs[1]["reason"] == "pH result was transcribed wrongly"
    assert revs[1]["sha256"] != revs[0]["sha256"]
    sigs = shown["signatures"]
    assert [(s["revision"], s["meaning"]) for s in sigs] == [
        (1, "performed"),
        (1, "verified"),
        (1, "reviewed"),
        (1, "approved"),
        (2, "performed"),
    ]
    assert all(s["revision_sha256"] == revs[s["revision"] - 1]["sha256"] for s in sigs)
    assert shown["record"]["current_revision"] == 2
    review.ok(review.cli("audit", "verify"))


def test_print_keeps_an_existing_file_unless_told_to_overwrite_it(
    review_sqlite: World, tmp_path: Path
) -> None:
    w = review_sqlite
    target = tmp_path / "record.pdf"
    target.write_bytes(b"the user's own file")
    before = w.snapshot()
    refused = w.as_user("op.kim", "record", "print", "1", "--out", str(target))
    assert refused.code == 2 and "--out" in refused.stderr and "--force" in refused.stderr
    assert "Traceback" not in refused.stderr
    assert target.read_bytes() == b"the user's own file"  # nothing written
    assert not list(tmp_path.glob("*.tmp*")) and not list(tmp_path.glob(".*.part"))
    assert w.snapshot() == before  # no copy registered
    # A folder whose default file name is taken is refused alike.
    w.ok(w.as_user("op.kim", "record", "print", "1", "--out", str(tmp_path)))
    default = tmp_path / "BR-000001-draft-copy1.pdf"
    first = default.read_bytes()
    (tmp_path / "BR-000001-draft-copy2.pdf").write_bytes(b"another file of the user's")
    again = w.as_user("op.kim", "record", "print", "1", "--out", str(tmp_path))
    assert again.code == 2 and str(tmp_path / "BR-000001-draft-copy2.pdf") in again.stderr
    # --force overwrites: the PDF replaces the user's file.
    forced = w.ok(
        w.as_user("op.kim", "record", "print", "1", "--out", str(target), "--force", "--json")
    )
    assert forced.json()["file"] == str(target)
    assert target.read_bytes().startswith(b"%PDF-")
    assert default.read_bytes() == first


def test_correct_reports_one_json_object(review_sqlite: World) -> None:
    approve(review_sqlite)
    before = _show(review_sqlite)["revisions"][0]
    out = review_sqlite.ok(
        review_sqlite.as_user(
            "eng.ray", "record", "correct", "1", "--reason", "pH transcribed wrongly", "--json"
        )
    ).json()
    assert out["record"] == "BR-000001" and out["run"] == 1
    assert out["run_status"] == "finished"
    assert out["superseded_revision"] == 1 and out["reason"] == "pH transcribed wrongly"
    shown = _show(review_sqlite)
    assert shown["record"]["run_status"] == "finished"
    assert shown["revisions"][0]["sha256"] == before["sha256"]
    assert shown["revisions"][0]["superseded"].startswith(out["superseded_at"])
    # A refused correction prints no JSON and exits 3 (the record is no longer in review).
    again = review_sqlite.as_user("eng.ray", "record", "correct", "1", "--reason", "x", "--json")
    assert again.code == 3 and again.stdout == ""
