"""Code that runs in child processes of the reliability tests (imported there by name).

Children come from one forkserver whose process has already imported the CLI, the services
and their heavy libraries (``preload``), so a child starts in milliseconds instead of the
second a fresh ``fluxledger`` process spends importing; what it does after the fork is the
real command or service, and SIGKILL ends it as it would end a ``fluxledger`` process.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import sys
import traceback
from collections import Counter
from collections.abc import Callable, Iterator
from typing import Any

PSI = 6894.757293168  # Pa per psi (NIST SP 811)
ML_MIN = 1e-6 / 60  # m³/s per mL/min

# One cycle of mixed module writes that leaves the module available again, so it repeats.
CYCLE = ("water:pre_use", "integrity", "cleaning", "water:post_clean")
MEANINGS = (("performed", "op.kim"), ("verified", "eng.ray"), ("reviewed", "qa.lin"),
            ("approved", "qa.nova"))  # fmt: skip

_context: Any = None


def preload() -> None:
    """Import what the children need, in the forkserver (or here, before a fork)."""
    import ledger.cli.main as main

    main.build()  # every command group imported
    import importlib

    import ledger.cli.demo_log
    import ledger.logbook.care
    import ledger.logbook.integrity
    import ledger.logbook.waterflux
    import ledger.records.pdf
    import ledger.records.service
    import ledger.runs.service
    import ledger.runs.skidlog
    import ledger.store.audit  # noqa: F401

    # The libraries the commands import lazily (each would cost a child a fraction of a
    # second): the PDF, the skid-log reader, units and the fits.
    for name in ("numpy", "pandas", "pyarrow.csv", "pyarrow.compute", "scipy.stats",
                 "scipy.optimize", "pint", "reportlab.platypus", "reportlab.pdfgen.canvas",
                 "reportlab.graphics.shapes", "ledger.records.charts", "ledger.records.pages",
                 "ledger.records.layout", "ledger.records.fonts", "ledger.runs.actuals",
                 "ledger.records.assemble", "ledger.units"):  # fmt: skip
        importlib.import_module(name)


def context() -> Any:
    """The forkserver context, its server preloaded with this module (started once)."""
    global _context
    if _context is None:
        ctx = multiprocessing.get_context("forkserver")
        os.environ["_FL_PRELOAD"] = "1"  # read by this module as the server imports it
        ctx.set_forkserver_preload(["tests.reliability.procs"])
        # The server started and its imports done now (one child that does nothing), not in the
        # first real child's start: a crash test times an uninterrupted run to choose its kill
        # delays from, and the first one would count the second or so of imports.
        warm = ctx.Process(target=os.getpid)
        warm.start()
        warm.join(timeout=120)
        _context = ctx
    return _context


@contextlib.contextmanager
def _cheap_hashes() -> Iterator[None]:
    from tests.world import cheap_hashes

    with cheap_hashes():
        yield


# --- A CLI command in a child ----------------------------------------------------------------


# Statements that change the database file. Each of them, and each commit, is a "write
# point": a child can be made to SIGKILL itself just before its k-th one.
WRITES = ("INSERT", "UPDATE", "DELETE", "CREATE", "ALTER", "DROP")


def _trace_writes(trace_path: str, die_at: int | None) -> Callable[[], None]:
    """Note in ``trace_path`` when this process first writes to a database (at once) and, by
    the function returned, when it ended and how many write points it passed (JSON; times in s
    on the system-wide monotonic clock of ``time.perf_counter``). With ``die_at``, SIGKILL
    this process just before its ``die_at``-th write point (1: the first write)."""
    import json
    import signal
    import time

    from sqlalchemy import event
    from sqlalchemy.engine import Engine

    seen: dict[str, float] = {}
    points = [0]

    def _save() -> None:
        with open(trace_path, "w") as f:
            json.dump(seen, f)

    def _point() -> None:
        points[0] += 1
        if points[0] == 1:
            seen["first_write"] = time.perf_counter()
            _save()  # at once: a killed child has told whether it had begun writing
        if points[0] == die_at:
            os.kill(os.getpid(), signal.SIGKILL)

    @event.listens_for(Engine, "before_cursor_execute")
    def _statement(*args: Any) -> None:
        if str(args[2]).lstrip().upper().startswith(WRITES):
            _point()

    @event.listens_for(Engine, "commit")
    def _commit(*args: Any) -> None:
        if points[0]:  # a commit after writes (not a read's)
            _point()

    def _end() -> None:
        seen["end"] = time.perf_counter()
        seen["points"] = points[0]
        _save()

    return _end


def run_cli(argv: list[str], stdin_path: str | None, out_path: str,
            trace_path: str | None = None, die_at: int | None = None) -> None:  # fmt: skip
    """Run ``fluxledger ARGV`` here, as the console script would; stdout/stderr to a file;
    with ``trace_path``, note when it wrote to the database and SIGKILL itself just before its
    ``die_at``-th write point if given (``_trace_writes``)."""
    save_trace = _trace_writes(trace_path, die_at) if trace_path is not None else None
    fd = os.open(out_path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    os.dup2(fd, 1)
    os.dup2(fd, 2)
    sys.stdout = open(1, "w", closefd=False)  # noqa: SIM115
    sys.stderr = open(2, "w", closefd=False)  # noqa: SIM115
    if stdin_path is not None:
        sys.stdin = open(stdin_path)  # noqa: SIM115
    sys.argv = ["fluxledger", *argv]
    from ledger.cli.main import main

    code: int = 0
    with _cheap_hashes():
        try:
            main()
        except SystemExit as exit_:
            code = exit_.code if isinstance(exit_.code, int) else (0 if exit_.code is None else 1)
        except BaseException:
            traceback.print_exc()
            code = 1
    sys.stdout.flush()
    sys.stderr.flush()
    if save_trace is not None:
        save_trace()
    os._exit(code)


# --- Concurrent writers ----------------------------------------------------------------------


def _actor(session: Any, login: str) -> Any:
    from sqlmodel import select

    from ledger.store.tables import UserAccount

    return session.exec(select(UserAccount).where(UserAccount.login == login)).one()


def write_one(session: Any, kind: str, serial: str, run_id: int | None = None) -> None:
    """One module write (or a signature on ``run_id``) through the services, in SI."""
    from ledger.logbook.care import CleaningInput, record_cleaning
    from ledger.logbook.integrity import DecayInput, record_decay_test
    from ledger.logbook.waterflux import WaterPoint, record_water_test

    if kind.startswith("sign:"):
        from ledger.records.service import sign

        meaning, login = kind.split(":")[1:]
        assert run_id is not None
        sign(session, _actor(session, login), run_id, meaning)
        return
    op = _actor(session, "op.kim")
    if kind.startswith("water:"):
        stage = kind.split(":")[1]
        flow = {"baseline": 170, "pre_use": 168, "post_clean": 165, "post_use": 90}[stage]
        point = WaterPoint(3.2 * PSI, 2.8 * PSI, 0.0, flow_m3_s=flow * ML_MIN)
        record_water_test(session, op, serial, stage, [point], 293.15)
    elif kind == "integrity":
        decay = DecayInput(start_pa=15 * PSI, end_pa=14.95 * PSI, hold_time_s=300.0)
        record_decay_test(session, op, serial, decay)
    elif kind == "cleaning":
        clean = CleaningInput("sodium hydroxide", 500.0, "mol/m**3", 298.15, 3600.0,
                              "NX-2611-03", 7.2, 1.4e-4)  # fmt: skip
        record_cleaning(session, op, serial, clean)
    else:
        raise ValueError(kind)


def writer(url: str, serial: str, kinds: list[str], run_id: int | None, start: Any,
           results: Any) -> None:  # fmt: skip
    """Make every write of ``kinds``, each in its own transaction, and report what happened:
    (serial, counts of writes that committed, the errors any caller saw)."""
    from ledger.store.engine import connect, resolve_url, transaction

    # Commits are not flushed to disk one by one (SQLite synchronous NORMAL in WAL mode,
    # PostgreSQL synchronous_commit off): that changes only what survives a power cut, not
    # locking or visibility, which are the subject here, and it keeps the test in seconds.
    if url.startswith("postgresql"):
        url += ("&" if "?" in url else "?") + "options=-csynchronous_commit%3Doff"
    engine = connect(resolve_url(url))
    if engine.dialect.name == "sqlite":
        from sqlalchemy import event

        @event.listens_for(engine, "connect")
        def _normal(dbapi_connection: Any, _record: Any) -> None:
            dbapi_connection.execute("PRAGMA synchronous = NORMAL")

    done: Counter[str] = Counter()
    errors: list[str] = []
    start.wait(timeout=60)
    for kind in kinds:
        try:
            with transaction(engine) as s:
                write_one(s, kind, serial, run_id)
            done["signature" if kind.startswith("sign:") else kind] += 1
        except Exception as exc:  # recorded: the test shows every error a caller saw
            errors.append(f"{kind}: {type(exc).__name__}: {exc}")
    engine.dispose()
    results.put((serial, dict(done), errors))


def add_same_login(url: str, barrier: Any, results: Any) -> None:
    """Add the user ``op.same`` as the administrator; report "created" or the error's class
    and text. After its lookup each process waits for the other, so both look first."""
    from ledger.logbook import required, users
    from ledger.store.engine import connect, resolve_url, transaction

    real = required.existing

    def look_then_wait(session: Any, column: Any, value: str) -> Any:
        found = real(session, column, value)
        with contextlib.suppress(Exception):
            barrier.wait(timeout=3)
        return found

    required.existing = look_then_wait
    engine = connect(resolve_url(url))
    try:
        with _cheap_hashes(), transaction(engine) as s:
            users.add_user(s, _actor(s, "sysadm"), "op.same", "Sam Example", "operator",
                           "operator-pass-9")  # fmt: skip
        results.put("created")
    except Exception as exc:
        results.put(f"{type(exc).__name__}: {exc}")
    finally:
        engine.dispose()


if os.environ.get("_FL_PRELOAD"):
    preload()
