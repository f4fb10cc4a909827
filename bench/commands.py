"""Whole-process time of logbook commands against `python -c "import sqlmodel, typer"`.

A read (`module list`, `fitness`) and a write (`care store`, which also checks the user's
argon2 password hash) run on a small fresh SQLite logbook made here with the CLI itself.
Target: within 1.5x of the bare import of sqlmodel and typer, measured in the same run.
"""

from __future__ import annotations

import subprocess
import tempfile
from collections.abc import Callable
from pathlib import Path

from table import Row, error_row  # bench/table.py

PASSWORD = "bench-pass-2026"  # an invented account of a throwaway database
TARGET = 1.5


def _cli(script: str, db: str, *args: str, stdin: str = "") -> None:
    done = subprocess.run([script, *args, "--db", db], input=stdin, text=True,
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)  # fmt: skip
    if done.returncode != 0:
        last = (done.stderr.strip().splitlines() or ["(no message)"])[-1]
        raise RuntimeError(f"setting up: `fluxledger {' '.join(args[:2])}` exited "
                           f"{done.returncode}: {last}")  # fmt: skip


def prepare(script: str, folder: Path) -> str:
    """A logbook with an engineer, an operator, one module type and one available module."""
    db = str(folder / "bench.db")
    pw = f"{PASSWORD}\n"
    _cli(script, db, "init", "--admin", "bench.admin", "--password-stdin", stdin=pw)
    for login, role in (("bench.eng", "engineer"), ("bench.op", "operator")):
        _cli(script, db, "user", "add", login, "--name", login, "--role", role, "--user",
             "bench.admin", "--password-stdin", stdin=pw + pw)  # fmt: skip
        # The administrator's password is temporary until its owner changes it.
        _cli(script, db, "user", "passwd", login, "--user", login, "--password-stdin",
             stdin=pw + pw)  # fmt: skip
    _cli(script, db, "module-type", "add", "BENCH-1", "--membrane", "mPES", "--pore-rating",
         "750 kDa", "--lumen-diameter", "0.5 mm", "--fibers", "120", "--length", "30 cm",
         "--area", "565 cm^2", "--decay-limit", "0.05 psi/min", "--test-pressure", "15 psi",
         "--reuse-limit", "20", "--storage-limit", "30 d", "--user", "bench.eng",
         "--password-stdin", stdin=pw)  # fmt: skip
    op = ["--user", "bench.op", "--password-stdin"]
    _cli(script, db, "module", "add", "BM-0001", "--type", "BENCH-1", *op, stdin=pw)
    _cli(script, db, "test", "water", "BM-0001", "--stage", "baseline", "--feed", "4.6 psi",
         "--retentate", "4.2 psi", "--flow", "240 mL/min", "--temperature", "20 degC", *op,
         stdin=pw)  # fmt: skip
    _cli(script, db, "test", "integrity", "BM-0001", "--start", "15 psi", "--end", "14.95 psi",
         "--hold-time", "5 min", *op, stdin=pw)  # fmt: skip
    return db


def run(exe: str, script: str, repeats: int, compare: Callable[..., Row]) -> list[Row]:
    """Time the three commands; ``compare`` is run.compare (kept there, shared)."""
    baseline = [exe, "-c", "import sqlmodel, typer"]
    rows = []
    with tempfile.TemporaryDirectory(prefix="fluxledger-bench-") as tmp:
        db = prepare(script, Path(tmp))
        base = '/ `python -c "import sqlmodel, typer"`'
        cases = [
            (f"`fluxledger module list` {base}",
             [script, "module", "list", "--db", db], None),
            (f"`fluxledger fitness BM-0001` {base}",
             [script, "fitness", "BM-0001", "--db", db], None),
            (f"`fluxledger care store` (a write, argon2 check) {base}",
             [script, "care", "store", "BM-0001", "--solution", "20 % ethanol", "--user",
              "bench.op", "--password-stdin", "--db", db], f"{PASSWORD}\n"),
        ]  # fmt: skip
        for name, cmd, stdin in cases:
            print()
            try:
                rows.append(compare(name, baseline, cmd, repeats, TARGET, subject_input=stdin))
            except RuntimeError as exc:
                rows.append(error_row(name, exc))
    return rows
