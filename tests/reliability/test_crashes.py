"""SIGKILL in the middle of a command: a skid-log import, a batch-record print, a signature and
`init`, each killed eight times: three times after a seeded random delay (up to the time the
same command took uninterrupted), five times just before a seeded random one of its write points
(a statement that changes the database, or a commit: the child SIGKILLs itself there, as if the
kill had come at that instant). After each kill the SQLite file passes
`PRAGMA integrity_check`, the audit chain verifies, no record stands without its audit event, no
half-written PDF carries the final name, and the same command run again completes.

The commands run in child processes forked from a server that has imported the CLI
(tests/reliability/procs.py), so a trial costs the command's own work and not a second of
imports; the kill lands on the process doing the writing, as it would on `fluxledger`.
"""

from __future__ import annotations

import random
import sqlite3
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import pytest
from sqlalchemy import select, text
from sqlmodel import Session

from ledger.store import audit
from ledger.store.engine import connect, sqlite_path
from ledger.store.registry import load_all
from ledger.store.tables import RECORDS
from tests.cli.test_runs import MAPPING
from tests.reliability import procs
from tests.world import PASSWORDS, World

pytestmark = pytest.mark.slow

SEED = 20261203
KILLS = 6  # killed runs of each command: 2 after a delay, 4 at one of its write points
TIMED = 2
CREATED = text("SELECT entity_id FROM audit_event WHERE entity = :e AND action = 'create'")


@dataclass
class Child:
    code: int | None
    output: str
    seconds: float
    # When traced, s after the start: its first database write (None: none) and its end (None:
    # killed first); and the write points it passed (procs.WRITES), when it ended.
    first_write: float | None = None
    ended: float | None = None
    points: int | None = None


@dataclass
class Tally:
    """What the trials of one command saw, for the assertion messages."""

    killed: int = 0  # killed before it ended
    killed_writing: int = 0  # of those, killed after its first write (the message says)
    finished: int = 0  # ended before the kill came
    notes: list[str] = field(default_factory=list)

    def add(self, killed: Child) -> None:
        if killed.code is None:
            self.killed += 1
            self.killed_writing += killed.first_write is not None
        else:
            self.finished += 1


def run(tmp: Path, argv: list[str], stdin: str | None = None, kill_after: float | None = None,
        trace: bool = False, die_at: int | None = None) -> Child:  # fmt: skip
    """Run ``fluxledger ARGV`` in a child; SIGKILL it after ``kill_after`` seconds if given,
    or have it SIGKILL itself just before its ``die_at``-th write point; with ``trace`` (or
    ``die_at``), note when it wrote to the database."""
    import json

    trace = trace or die_at is not None
    ctx = procs.context()
    out = tmp / "child.out"
    stdin_path = None
    if stdin is not None:
        stdin_path = tmp / "child.in"
        stdin_path.write_text(stdin)
    traced = tmp / "child.trace.json"
    traced.unlink(missing_ok=True)
    args = (argv, str(stdin_path) if stdin_path else None, str(out),
            str(traced) if trace else None, die_at)  # fmt: skip
    p = ctx.Process(target=procs.run_cli, args=args)
    t0 = time.perf_counter()
    p.start()
    if kill_after is not None:
        p.join(timeout=kill_after)
        if p.exitcode is None:
            p.kill()
    p.join(timeout=120)
    seconds = time.perf_counter() - t0
    assert p.exitcode is not None, "the child did not end"
    code = None if p.exitcode == -9 else p.exitcode
    first_write = ended = points = None
    if trace:  # the child's clock is the parent's (CLOCK_MONOTONIC, system-wide)
        try:
            noted = json.loads(traced.read_text())
        except (OSError, ValueError):  # none yet, or cut short by the kill
            noted = {}
        first_write = noted["first_write"] - t0 if "first_write" in noted else None
        ended = noted["end"] - t0 if "end" in noted else None
        points = int(noted["points"]) if "points" in noted else None
    text_ = out.read_text() if out.exists() else ""
    return Child(code, text_, seconds, first_write, ended, points)


def kill_at(rng: random.Random, i: int, n: int, like: Child) -> tuple[float | None, int | None]:
    """Where trial ``i`` of ``n`` is killed: (delay in s, None) or (None, write point).

    The first ``TIMED`` trials are killed after a delay, seeded-random within their own equal
    slice of the time ``like`` took (the latest traced uninterrupted run: the machine's load
    changes how long a run takes). Most of that time comes before the first write (for an
    import, reading the log: 95 % of it), so delays alone would seldom land in the writing;
    the other trials kill the child just before one of its write points (each statement that
    changes the database, and each commit; procs.WRITES), seeded-random within their own
    equal slice of the points ``like`` passed, from the first write to the last commit.
    """
    assert like.seconds > 0 and like.points, like
    if i < TIMED:
        return like.seconds * rng.uniform(i, i + 1) / TIMED, None
    slices = n - TIMED
    assert i - TIMED < slices
    return None, min(like.points, 1 + int(like.points * rng.uniform(i - TIMED, i - TIMED + 1)
                                          / slices))  # fmt: skip


def _timing(latest: Child, again: Child) -> Child:
    """``again`` as the timing reference if it is a traced run that wrote and ended."""
    return again if again.points and again.ended is not None else latest


def check_database(db: Path) -> None:
    """integrity_check ok, the chain verifies, and every skid log, signature and revision has
    its create event."""
    con = sqlite3.connect(db)
    try:
        assert con.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
    finally:
        con.close()
    engine = connect(f"sqlite:///{db}")
    load_all()
    try:
        with Session(engine) as s:
            result = audit.verify(s)
            assert result.ok, result.problems
            for entity, record in RECORDS.items():  # every record has its create event
                table = record.__table__  # type: ignore[attr-defined]
                (key,) = table.primary_key.columns
                rows = s.execute(select(key)).scalars().all()
                created = s.execute(CREATED, {"e": entity}).scalars().all()
                assert sorted(str(r) for r in rows) == sorted(created), entity
    finally:
        engine.dispose()


def trials(
    n: int,
    tmp: Path,
    seed: int,
    fresh: Callable[[int], tuple[list[str], str | None]],
    after: Callable[[int, Child, Child], None],
) -> Tally:
    """Calibrate on one uninterrupted run, then ``n`` killed runs (``kill_at``) each
    followed by the checks and a run to completion; ``fresh(i)`` prepares trial i and returns
    the command."""
    rng = random.Random(seed)
    argv, stdin = fresh(-1)
    latest = whole = run(tmp, argv, stdin, trace=True)
    assert whole.code == 0, whole.output
    tally = Tally()
    for i in range(n):
        argv, stdin = fresh(i)
        delay, point = kill_at(rng, i, n, latest)
        killed = run(tmp, argv, stdin, kill_after=delay, trace=True, die_at=point)
        assert point is None or killed.code is None, (point, killed)  # it died at that point
        tally.add(killed)
        again = run(tmp, argv, stdin, trace=True)
        after(i, killed, again)
        latest = _timing(latest, again)
    return tally


def _copy(w: World, dest: Path) -> Path:
    """A copy of the world's settled SQLite file (WAL folded in), for one trial."""
    src = sqlite_path(w.url)
    assert src is not None
    con = sqlite3.connect(src)
    try:
        out = sqlite3.connect(dest)
        con.backup(out)
        out.close()
    finally:
        con.close()
    return dest


def _count(db: Path, sql: str) -> int:
    con = sqlite3.connect(db)
    try:
        return int(con.execute(sql).fetchone()[0])
    finally:
        con.close()


def test_killed_skid_log_imports(started_world: World, tmp_path: Path) -> None:
    log = tmp_path / "skid-1.csv"
    dbs: dict[int, Path] = {}

    def fresh(i: int) -> tuple[list[str], str | None]:
        dbs[i] = _copy(started_world, tmp_path / f"import-{i + 1}.db")
        return (["run", "import", "1", str(log), "--mapping", str(MAPPING), "--user", "op.kim",
                 "--password-stdin", "--db", str(dbs[i])], PASSWORDS["op.kim"] + "\n")  # fmt: skip

    def after(i: int, killed: Child, again: Child) -> None:
        assert again.code == 0, again.output
        check_database(dbs[i])
        assert _count(dbs[i], "SELECT count(*) FROM skid_log_file WHERE voided_at IS NULL") == 1

    tally = trials(KILLS, tmp_path, SEED, fresh, after)
    assert tally.killed >= KILLS // 2, tally


def test_killed_record_prints(review_world: World, tmp_path: Path) -> None:
    """Each print is a numbered, audited copy: staged, registered, committed, then renamed
    into place. Whatever the kill hits, a file under the final name is whole and is a
    registered copy (its SHA-256 is a record_copy row's)."""
    import hashlib

    out = tmp_path / "pdf"
    out.mkdir()
    db = sqlite_path(review_world.url)
    assert db is not None

    def registered() -> set[str]:
        with sqlite3.connect(db) as conn:
            return {r[0] for r in conn.execute("SELECT file_sha256 FROM record_copy")}

    def fresh(i: int) -> tuple[list[str], str | None]:
        for f in out.iterdir():
            f.unlink()
        return ["record", "print", "1", "--out", str(out / "BR-1.pdf"), "--force",
                "--user", "op.kim", "--password-stdin", "--db", review_world.url], None  # fmt: skip

    stdin = PASSWORDS["op.kim"] + "\n"

    def after(i: int, killed: Child, again: Child) -> None:
        assert again.code == 0, again.output
        final = out / "BR-1.pdf"
        data = final.read_bytes()
        assert data.startswith(b"%PDF-") and data.rstrip().endswith(b"%%EOF")
        assert hashlib.sha256(data).hexdigest() in registered()

    # The kill's own leftovers are looked at before the repeat overwrites the final name.
    rng = random.Random(SEED + 1)
    argv, _ = fresh(-1)
    whole = run(tmp_path, argv, stdin, trace=True)
    assert whole.code == 0, whole.output
    after(-1, whole, whole)
    tally, latest = Tally(), whole
    for i in range(KILLS):
        argv, _ = fresh(i)
        delay, point = kill_at(rng, i, KILLS, latest)
        killed = run(tmp_path, argv, stdin, kill_after=delay, trace=True, die_at=point)
        assert point is None or killed.code is None, (point, killed)  # it died at that point
        final = out / "BR-1.pdf"
        tally.add(killed)
        if final.exists():  # only ever the whole file, and a registered copy, under its name
            assert hashlib.sha256(final.read_bytes()).hexdigest() in registered()
        check_database(db)
        again = run(tmp_path, argv, stdin, trace=True)
        after(i, killed, again)
        latest = _timing(latest, again)
    assert tally.killed >= KILLS // 2, tally
    # A temporary ".BR-1.pdf.*.part" may stay behind after SIGKILL; it never has the final name.
    assert all(f.name.startswith(".BR-1.pdf.") for f in out.iterdir() if f.name != "BR-1.pdf")


def test_killed_signatures(review_world: World, tmp_path: Path) -> None:
    dbs: dict[int, Path] = {}

    def fresh(i: int) -> tuple[list[str], str | None]:
        dbs[i] = _copy(review_world, tmp_path / f"sign-{i + 1}.db")
        return (["record", "sign", "1", "--meaning", "performed", "--user", "op.kim",
                 "--password-stdin", "--db", str(dbs[i])], PASSWORDS["op.kim"] + "\n")  # fmt: skip

    def after(i: int, killed: Child, again: Child) -> None:
        signed = "SELECT count(*) FROM signature WHERE run_id = 1 AND meaning = 'performed'"
        if again.code == 3:  # the first one had committed before it ended or was killed
            assert killed.code in (None, 0), killed.output
            assert "already signed as performed" in again.output, again.output
        else:
            assert killed.code is None and again.code == 0, (killed, again)
        check_database(dbs[i])
        assert _count(dbs[i], signed) == 1
        assert _count(dbs[i], "SELECT count(*) FROM record_revision WHERE run_id = 1") == 1

    tally = trials(KILLS, tmp_path, SEED + 2, fresh, after)
    assert tally.killed >= KILLS // 2, tally


def test_killed_inits(tmp_path: Path) -> None:
    dbs: dict[int, Path] = {}
    password = PASSWORDS["sysadm"]

    def fresh(i: int) -> tuple[list[str], str | None]:
        dbs[i] = tmp_path / f"init-{i + 1}.db"
        return (["init", "--admin", "sysadm", "--name", "Ida Brandt", "--password-stdin",
                 "--db", str(dbs[i])], f"{password}\n{password}\n")  # fmt: skip

    def after(i: int, killed: Child, again: Child) -> None:
        assert again.code == 0, again.output
        check_database(dbs[i])
        assert _count(dbs[i], "SELECT count(*) FROM user_account WHERE login = 'sysadm'") == 1

    tally = trials(KILLS, tmp_path, SEED + 3, fresh, after)
    assert tally.killed >= KILLS // 2, tally
