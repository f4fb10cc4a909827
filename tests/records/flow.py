"""A run taken to review through the CLI, for the record tests (invented values)."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

from tests.cli.test_runs import INPUTS, MAPPING
from tests.world import World

# QC results inside the LNP template's specifications (the demo's values).
GOOD_QC = [
    "particle_size=78 nm",
    "pdi=0.12",
    "encapsulation=94 %",
    "residual_ethanol=0.2 %",
    "step_yield=91 %",
    "ph=7.4",
]
SECOND_QA = ("qa.nova", "Nova Hallström", "quality-pass-2")


def add_second_qa(w: World) -> None:
    """The LNP template needs a reviewer and an approver who are different people."""
    from tests.world import PASSWORDS

    login, name, password = SECOND_QA
    PASSWORDS.setdefault(login, password)
    w.add_user(login, name, "qa", password)


def planned(w: World, serial: str, lot: str, *, ready: bool = True) -> int:
    """A module made ready (baseline, integrity; unless ``ready`` is False), its pre-use
    test, and a run planned on it by the engineer and approved by QA; the run's number."""
    if ready:
        w.ready(serial)
    w.ok(w.water(serial, "pre-use", "168 mL/min"))
    out = w.ok(
        w.as_user(
            "eng.ray",
            "run",
            "plan",
            "QB-MR-LNP-101",
            "--module",
            serial,
            "--product",
            "QB-117",
            "--lot",
            lot,
            *INPUTS,
            "--json",
        )
    ).json()
    number = next(k for k in out if k.startswith("run_")).removeprefix("run_")
    w.ok(w.as_user("qa.lin", "run", "approve-plan", number))
    return int(number)


def to_review(
    w: World,
    tmp_path: Path,
    *,
    run: int = 1,
    lot: str = "QB117-26-020",
    qc: list[str] | None = None,
    ready: bool = True,
) -> None:
    """Plan, start, import the demo skid log, enter QC, record and close the TMP deviation,
    finish and submit run ``run`` on QMB-0142."""
    from ledger.cli.demo_log import write_log

    planned(w, "QMB-0142", lot, ready=ready)
    r = str(run)
    w.ok(w.as_user("op.kim", "run", "start", r))
    w.wide_log_tolerance()
    log = write_log(tmp_path / f"skid-{run}.csv", datetime.now(UTC) - timedelta(hours=2))
    w.ok(w.as_user("op.kim", "run", "import", r, str(log), "--mapping", str(MAPPING)))
    results = GOOD_QC if qc is None else qc
    if results:
        w.ok(w.as_user("op.kim", "run", "qc", r, *(x for q in results for x in ("--result", q))))
    w.ok(
        w.as_user(
            "op.kim",
            "run",
            "deviation",
            r,
            "--check",
            "tmp",
            "--description",
            "TMP spike for 24 s: permeate line pinched",
            "--impact",
            "none expected",
        )
    )
    w.ok(w.as_user("qa.lin", "run", "close-deviation", r, "1", "--class", "minor",
                   "--closure", "line re-routed"))  # fmt: skip
    w.ok(w.as_user("op.kim", "run", "finish", r))
    w.ok(w.as_user("op.kim", "run", "submit", r))


def sign(w: World, run: int, meaning: str, user: str) -> object:
    return w.as_user(user, "record", "sign", str(run), "--meaning", meaning)


def approve(w: World, run: int = 1) -> None:
    for meaning, user in (
        ("performed", "op.kim"),
        ("verified", "eng.ray"),
        ("reviewed", "qa.lin"),
        ("approved", "qa.nova"),
    ):
        w.ok(sign(w, run, meaning, user))


# Recipes for tests.world.Worlds: built once per worker and backend, copied per test.


def reviewed(w: World, folder: Path) -> None:
    """A second QA user, and run 1 taken to review (its skid log is written into ``folder``)."""
    add_second_qa(w)
    to_review(w, folder)


def approved(w: World, folder: Path) -> None:
    """Run 1 in review, then signed by all four signers: approved and locked."""
    reviewed(w, folder)
    approve(w)
