"""`run import RUN FILE FILE ...`: a long run's skid log in several files, joined in order,
kept byte for byte (the first file in the log's row, the later ones in skid_log_part rows),
and read again in full by the batch record.

The reference is the same export in one file: cut into two files at a sample, it must give
the actuals the whole file gives (a join that lost, repeated or shifted a sample would move
the permeate volume, the durations or the TMP mean), and the bytes and SHA-256 of each file
are checked with hashlib against the files written here."""

from __future__ import annotations

import hashlib
import io
import sqlite3
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest
from sqlmodel import Session, select

from ledger.store.tables import SkidLogFile, SkidLogPart
from tests.cli.test_runs import MAPPING, plan, ready_for_a_run
from tests.world import Result, World

REL = 1e-9


def _start(w: World) -> None:
    """Run 1 planned, approved and started, with logs of the hours before it accepted."""
    ready_for_a_run(w)
    planned = plan(w)
    assert isinstance(planned, Result)
    w.ok(planned)
    w.ok(w.as_user("op.kim", "run", "start", "1"))
    w.wide_log_tolerance()


def _split(log: Path, at: int, overlap: int = 0) -> tuple[Path, Path]:
    """The export cut before data row ``at`` into two files, each with the header; the second
    starts ``overlap`` rows early (they then overlap)."""
    header, *rows = log.read_bytes().splitlines(keepends=True)
    first = log.with_name("skid-day1.csv")
    second = log.with_name("skid-day2.csv")
    first.write_bytes(header + b"".join(rows[:at]))
    second.write_bytes(header + b"".join(rows[at - overlap :]))
    return first, second


def _logs(w: World) -> list[SkidLogFile]:
    with Session(w.engine()) as s:
        return list(s.exec(select(SkidLogFile).order_by(SkidLogFile.id)))  # type: ignore[arg-type]


def _parts(w: World) -> list[SkidLogPart]:
    with Session(w.engine()) as s:
        return list(s.exec(select(SkidLogPart)))


def _figures(actuals: dict[str, Any]) -> dict[str, float | None]:
    """The figures of the whole run and of each phase that a join could change."""
    out: dict[str, float | None] = {"rows": actuals["rows"]}
    for a in [actuals["run"], *actuals["phases"]]:
        scope = a["phase"] or "run"
        out[f"{scope}.duration_s"] = a["duration_s"]
        out[f"{scope}.permeate_volume_m3"] = a["permeate_volume_m3"]
        out[f"{scope}.diavolumes"] = a["diavolumes"]
        out[f"{scope}.concentration_factor"] = a["concentration_factor"]
        out[f"{scope}.tmp_mean_pa"] = a["stats"]["tmp"]["mean"]
    return out


def _close(got: dict[str, float | None], want: dict[str, float | None]) -> list[str]:
    assert got.keys() == want.keys()
    return [
        f"{k}: {got[k]} != {want[k]}"
        for k in want
        if (got[k] is None) != (want[k] is None)
        or (want[k] is not None and got[k] != pytest.approx(want[k], rel=REL, abs=1e-15))
    ]


def test_a_log_in_two_files_is_joined_kept_and_read_by_the_record(
    world: World, tmp_path: Path
) -> None:
    from ledger.cli.demo_log import write_log

    _start(world)
    whole = write_log(tmp_path / "skid.csv", datetime.now(UTC) - timedelta(hours=2))
    rows = whole.read_bytes().count(b"\n") - 1
    at = 2000  # in the diafiltration (its TMP spike lies later, about row 2400)

    # The reference: the whole export in one file, imported, then voided.
    world.ok(world.as_user("op.kim", "run", "import", "1", str(whole), "--mapping", str(MAPPING)))
    (reference,) = _logs(world)
    assert reference.parts is None and reference.rows == rows
    world.ok(world.as_user("eng.ray", "void", "skid-log", str(reference.id), "--reason",
                           "re-imported as the skid's two daily files"))  # fmt: skip

    # Overlapping files: refused naming both, exit 2, nothing written.
    day1, day2 = _split(whole, at, overlap=5)
    before = world.snapshot()
    refused = world.as_user(
        "op.kim", "run", "import", "1", str(day1), str(day2), "--mapping", str(MAPPING)
    )
    assert refused.code == 2, refused
    assert "skid-day1.csv" in refused.stderr and "skid-day2.csv" in refused.stderr
    assert "Traceback" not in refused.stderr + refused.stdout
    assert world.snapshot() == before

    # The two files in order.
    day1, day2 = _split(whole, at)
    raw1, raw2 = day1.read_bytes(), day2.read_bytes()
    sha1, sha2 = hashlib.sha256(raw1).hexdigest(), hashlib.sha256(raw2).hexdigest()
    args = ["run", "import", "1", str(day1), str(day2), "--mapping", str(MAPPING), "--json"]
    done = world.ok(world.as_user("op.kim", *args)).json()
    assert done["written"] is True and done["rows"] == rows
    assert [(f["file_name"], f["sha256"], f["size_bytes"]) for f in done["files"]] == [
        ("skid-day1.csv", sha1, len(raw1)),
        ("skid-day2.csv", sha2, len(raw2)),
    ]
    old, log = _logs(world)
    assert old.voided_at is not None and log.voided_at is None
    # the first file in the log's row, the second in a part row: exact bytes
    assert (log.file_name, log.sha256, log.size_bytes, bytes(log.content)) == (
        "skid-day1.csv", sha1, len(raw1), raw1,
    )  # fmt: skip
    assert log.parts == [
        {"position": 2, "file_name": "skid-day2.csv", "sha256": sha2, "size_bytes": len(raw2)}
    ]
    (part,) = _parts(world)
    assert (part.log_id, part.position, part.file_name, part.sha256) == (
        log.id, 2, "skid-day2.csv", sha2,
    )  # fmt: skip
    assert bytes(part.content) == raw2 and hashlib.sha256(part.content).hexdigest() == sha2
    # the joined log gives the whole file's actuals
    assert log.rows == rows
    want, got = _figures(reference.actuals), _figures(log.actuals)
    # and those are the export's own story (ledger/cli/demo_log.py): 1.2 L concentrated to
    # 0.3 L, washed with 5.5 x 0.3 L of buffer, concentrated to 0.1 L, so the permeate is
    # 1.2 - 0.1 + 1.65 = 2.75 L and the concentration factor 12 (each step ends at the first
    # 2 s sample past its level, hence 1 %)
    assert got["run.permeate_volume_m3"] == pytest.approx(2.75e-3, rel=0.01)
    assert got["run.concentration_factor"] == pytest.approx(12.0, rel=0.01)
    assert got["diafilter.diavolumes"] == pytest.approx(5.5, rel=0.01)
    assert not _close(got, want), _close(got, want)
    assert len(log.actuals["excursions"]) == len(reference.actuals["excursions"]) == 1

    # The same two files again change nothing.
    before = world.snapshot()
    again = world.ok(world.as_user("op.kim", "run", "import", "1", str(day1), str(day2),
                                   "--mapping", str(MAPPING)))  # fmt: skip
    assert "skid-day1.csv + skid-day2.csv were already imported" in again.stdout
    assert "nothing written" in again.stdout
    assert world.snapshot() == before
    # only one of them, or the other order, is another log: refused while this one stands
    for files in ([day1], [day2, day1]):
        other = world.as_user("op.kim", "run", "import", "1", *map(str, files), "--mapping",
                              str(MAPPING))  # fmt: skip
        assert other.code == 3 and "void it first" in other.stderr, other
        assert world.snapshot() == before

    # `run show` lists both files.
    shown = world.ok(world.cli("run", "show", "1", "--json")).json()
    assert shown["skid_log"]["files"] == "skid-day1.csv + skid-day2.csv"
    assert [(f["file"], f["sha256"]) for f in shown["skid_log_files"]] == [
        ("skid-day1.csv", sha1), ("skid-day2.csv", sha2),
    ]  # fmt: skip

    # The record: its skid-log line lists each file with its SHA-256, and its charts were
    # drawn from every sample of both files.
    from ledger.records.assemble import assemble

    with Session(world.engine()) as s:
        ctx = assemble(s, 1)
    line = ctx.header.skid_log
    assert line is not None
    assert line.startswith(
        f"2 files joined in this order ({rows:,} rows): skid-day1.csv (SHA-256 {sha1}), "
        f"then skid-day2.csv (SHA-256 {sha2}); "
    )
    assert f"voided: skid.csv (SHA-256 {reference.sha256[:16]}…) by eng.ray" in line
    assert ctx.charts and all(series.raw_points == rows for series in ctx.charts)
    world.ok(world.as_user("eng.ray", "record", "print", "1", "--out", str(tmp_path / "br.pdf")))
    from pypdf import PdfReader

    text = " ".join(
        " ".join(p.extract_text().split())
        for p in PdfReader(io.BytesIO((tmp_path / "br.pdf").read_bytes())).pages
    )
    assert f"skid-day1.csv (SHA-256 {sha1})" in text and f"skid-day2.csv (SHA-256 {sha2})" in text

    # The audit check covers the part: it passes, and fails once the part's bytes change.
    world.ok(world.cli("audit", "verify"))
    if world.url.startswith("sqlite:///"):
        con = sqlite3.connect(world.url.removeprefix("sqlite:///"))
        with con:
            con.execute("UPDATE skid_log_part SET content = ?", (raw2.replace(b",", b";", 1),))
        con.close()
        tampered = world.cli("audit", "verify")
        assert tampered.code == 1 and "skid-day2.csv" in tampered.stdout + tampered.stderr


@pytest.mark.sqlite_only
def test_the_service_still_takes_one_path(world: World, tmp_path: Path) -> None:
    """One path (not a list) is one file: no parts, and the record's line as before."""
    from ledger.cli.demo_log import write_log
    from ledger.logbook.workspace import write
    from ledger.records.assemble import assemble
    from ledger.runs.service import import_log
    from tests.world import PASSWORDS

    _start(world)
    log = write_log(tmp_path / "skid.csv", datetime.now(UTC) - timedelta(hours=2))
    raw = log.read_bytes()
    record, new = write(
        world.url,
        "op.kim",
        lambda: PASSWORDS["op.kim"],
        lambda s, a: import_log(s, a, 1, str(log), str(MAPPING)),
    )
    assert new and record.parts is None and _parts(world) == []
    (stored,) = _logs(world)
    assert bytes(stored.content) == raw
    with Session(world.engine()) as s:
        line = assemble(s, 1).header.skid_log
    rows = raw.count(b"\n") - 1
    assert line is not None
    assert line.startswith(f"skid.csv ({rows:,} rows, SHA-256 {hashlib.sha256(raw).hexdigest()}); ")
