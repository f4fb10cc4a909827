"""`fluxledger demo` builds the invented scenario and writes its outputs."""

from __future__ import annotations

import gc
import json
import shutil
from collections.abc import Callable, Iterator
from pathlib import Path

import pytest

from tests.cli.conftest import Outcome
from tests.world import SAMPLES, cheap_hashes, invoke, one_click_command

Run = Callable[..., Outcome]


@pytest.fixture(scope="module", autouse=True)
def _one_click_command() -> Iterator[None]:
    """The demo runs each of its steps in-process; build the click command once for them."""
    with one_click_command():
        yield


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, dict]:  # type: ignore[type-arg]
    """One demo run shared by the tests that only read what it wrote (folder, --json output)."""
    folder = tmp_path_factory.mktemp("demo")
    with cheap_hashes():
        result = invoke(["demo", "--out", str(folder), "--json"])
    assert result.code == 0, result.stderr
    return folder, json.loads(result.stdout)


@pytest.mark.slow
def test_demo_writes_every_step(demo: tuple[Path, dict]) -> None:  # type: ignore[type-arg]
    tmp_path, summary = demo
    assert len(summary["steps"]) == 10
    assert all(s["exit_code"] == 0 for s in summary["steps"])
    data = json.loads((tmp_path / "bench_calculations.json").read_text())
    # Baseline points of QMB-0142 (invented) lie on about 900 LMH/bar.
    nwp = data["baseline_nwp"]["report"]["results"]["nwp"]
    assert nwp["unit"] == "L/(m^2*h*bar)" and nwp["value"] == pytest.approx(902, abs=5)
    assert data["integrity_decay"]["report"]["verdict"] == "PASS"
    text = (tmp_path / "bench_session.txt").read_text()
    assert "invented" in text and "validated procedures" in text


def test_demo_refuses_a_folder_without_the_scenario(cli: Run, tmp_path: Path) -> None:
    out = cli("demo", "--out", str(tmp_path / "o"), "--samples", str(tmp_path))
    assert out.code == 2 and "--samples" in out.stderr
    assert not (tmp_path / "o").exists()


def test_demo_builds_the_logbook_and_its_verdicts(
    cli: Run,
    demo: tuple[Path, dict],  # type: ignore[type-arg]
) -> None:
    tmp_path, summary = demo
    written = summary["written"]
    assert str(tmp_path / "fluxledger.db") in written
    fit = json.loads((tmp_path / "fitness_qmb0142.json").read_text())
    assert fit["verdict"] == "FIT"
    reasons = {r["check"]: r["outcome"] for r in fit["reasons"]}
    assert reasons["recovery"] == "alert"  # 82.9 % of baseline: above 80 %, below 90 %
    held = json.loads((tmp_path / "fitness_qmb0143.json").read_text())
    assert held["verdict"] == "NOT FIT"
    assert {r["check"] for r in held["reasons"] if r["outcome"] == "fail"} == {
        "status",
        "recovery",
    }
    session = (tmp_path / "logbook_session.txt").read_text()
    assert "Verdict: intact" in session and "(late entry)" in session
    # The demo's database is a real logbook: it verifies, and lists the first three modules
    # as their story left them (the fleet's other nine: test_demo_builds_a_fleet_with_each_story).
    listed = cli("module", "list", "--db", str(tmp_path / "fluxledger.db"), "--json").json()
    status = {m["serial"]: m["status"] for m in listed["modules"]}
    assert len(status) == 12
    assert (status["QMB-0142"], status["QMB-0143"], status["QMB-0151"]) == (
        "awaiting_cleaning",  # lot QB117-26-014 has just run on it
        "on_hold",
        "commissioning",
    )
    assert cli("audit", "verify", "--db", str(tmp_path / "fluxledger.db")).code == 0


def _shorter_fleet(folder: Path) -> Path:
    """A copy of sample_records/ in ``folder`` whose fleet modules have one cycle each, but for
    the two the fleet's runs use (their run needs the history as written): every step kind and
    every output of the demo, in about half its commands."""
    import re
    import tomllib

    samples = folder / "samples"
    shutil.copytree(SAMPLES, samples)
    path = samples / "fleet_history.toml"
    text = path.read_text(encoding="utf-8")
    on_runs = {r["module"] for r in tomllib.loads(text)["runs"]}
    first, *modules = text.split("[[modules]]")
    for n, block in enumerate(modules):
        serial = re.search(r'^serial = "([^"]+)"', block, flags=re.M)
        assert serial is not None
        if serial.group(1) not in on_runs:
            modules[n] = re.sub(r"^recovery = \[([^,\]]*)[^\]]*\]", r"recovery = [\1]", block,
                                flags=re.M)  # fmt: skip
    path.write_text("[[modules]]".join([first, *modules]), encoding="utf-8")
    shorter = tomllib.loads(path.read_text(encoding="utf-8"))
    assert [len(m["recovery"]) for m in shorter["modules"]] == [
        len(m["recovery"]) if m["serial"] in on_runs else min(len(m["recovery"]), 1)
        for m in tomllib.loads(text)["modules"]
    ]
    return samples


@pytest.mark.slow
def test_demo_runs_twice_into_the_same_folder(
    cli: Run,
    demo: tuple[Path, dict],  # type: ignore[type-arg]
    tmp_path: Path,
) -> None:
    """The first run is the shared one (its exit code is checked in the fixture); the second
    goes into a copy of the folder it wrote, for people: the files, the tour at its end. The
    second run's fleet histories are shorter (``_shorter_fleet``): it writes the same files,
    replacing each of the first run's, and what it proves of a rerun does not depend on how
    many cycles a module has seen."""
    gc.collect()  # the first run's engines, so its database files are whole on disk
    shutil.copytree(demo[0], tmp_path / "out")
    out = tmp_path / "out"
    before = {p.name: p.stat().st_mtime_ns for p in out.iterdir() if p.is_file()}
    again = cli("demo", "--out", str(out), "--samples", str(_shorter_fleet(tmp_path)))
    assert again.code == 0, again.stderr
    assert "Wrote:" in again.stdout and "bench_session.txt" in again.stdout
    after = {p.name: p.stat().st_mtime_ns for p in out.iterdir() if p.is_file()}
    # Each of the first run's files written again (copytree kept the first run's times).
    assert [name for name, t in before.items() if after.get(name) == t] == []
    tour = again.stdout[again.stdout.index("The fleet now") :]
    assert tour.count(" FIT") + tour.count("NOT FIT") >= 12
    assert "Try next:" in tour and "fluxledger history QMB-0121" in tour


def test_demo_builds_a_fleet_with_each_story(demo: tuple[Path, dict]) -> None:  # type: ignore[type-arg]
    """Issue 16's fleet: a dozen modules of two types, one healthy, one wearing toward its
    recovery limit, one on hold after a failed pressure hold, one at its reuse limit; the two
    fleet runs are approved and in review, each with a 1 Hz log of over three hours."""
    tmp_path, _ = demo
    fleet = {m["serial"]: m for m in json.loads((tmp_path / "fleet.json").read_text())["fleet"]}
    assert len(fleet) == 12 and {m["type"] for m in fleet.values()} == {"QM-HF750-S", "QM-HF500-M"}
    healthy, wearing = fleet["QMB-0118"], fleet["QMB-0121"]
    assert healthy["verdict"] == "FIT" and healthy["storage_expires"] is not None
    assert wearing["verdict"] == "FIT" and wearing["trend"] == "falling"
    assert wearing["last_recovery"]["value"] < 90  # under the alert limit (90 %), over 80 %
    assert 0 < wearing["cycles_left"] < healthy["cycles_left"]
    held = fleet["QMB-0127"]
    assert (held["status"], held["verdict"]) == ("on_hold", "NOT FIT")
    assert "integrity" in held["holds"][0]
    spent = fleet["QMC-0204"]
    assert (spent["cycles"], spent["reuse_limit"], spent["verdict"]) == (8, 8, "NOT FIT")
    order = list(fleet)
    assert order.index("QMB-0127") < order.index("QMC-0204") < order.index("QMB-0121")
    history = json.loads((tmp_path / "history_qmb0121.json").read_text())
    assert history["life_projection"]["status"] == "projected"
    assert history["module"]["cycles_used"] == 9
    for lot in ("qb117-26-021", "qb117-26-022"):
        lines = (tmp_path / f"{lot}_skid_export.csv").read_text().splitlines()
        assert len(lines) > 3 * 3600  # one row a second for over three hours
    session = (tmp_path / "logbook_session.txt").read_text()
    assert "record sign 2 --meaning approved" in session
    assert "record sign 3 --meaning reviewed" not in session  # run 3 waits for review


def test_demo_plans_and_imports_its_run(demo: tuple[Path, dict]) -> None:  # type: ignore[type-arg]
    tmp_path, _ = demo
    checks = json.loads((tmp_path / "run1_checks.json").read_text())["acceptance_checks"]
    verdicts = {c["name"]: c["verdict"] for c in checks}
    # The invented export has one 24 s TMP spike; everything else follows the plan.
    assert verdicts.pop("tmp") == "FAIL"
    assert set(verdicts.values()) == {"PASS"}, verdicts
    run = json.loads((tmp_path / "run1.json").read_text())
    assert run["run_1"]["status"] == "in_review"
    assert run["deviations"][0]["check"] == "tmp"
    assert run["skid_log"]["rows"] == 3106
    assert run["diafiltration_optimum_(gel_model)"]["optimum_concentration"]["unit"] == "g/L"
    session = (tmp_path / "logbook_session.txt").read_text()
    assert "was already imported" in session


def test_demo_writes_signed_and_sealed_records_the_readme_can_verify(
    cli: Run,
    demo: tuple[Path, dict],  # type: ignore[type-arg]
) -> None:
    """The demo's signed and sealed records, and the README's `console` examples on them
    (their demo-output/ paths swapped for this test's folder)."""
    import re
    import shlex

    from ledger.records.pdf import stamp_of
    from ledger.records.seal import examine

    tmp_path, _ = demo
    signed = (tmp_path / "BR-000001-rev1-approved-copy2.pdf").read_bytes()
    sealed = (tmp_path / "BR-000001-rev1-approved-copy3-sealed.pdf").read_bytes()
    stamp = stamp_of(signed)
    assert stamp is not None and stamp["record"] == "BR-000001" and stamp["revision"] == "1"
    assert len(stamp["signatures"].split(",")) == 4  # performed, verified, reviewed, approved
    report = examine(sealed, trust=[tmp_path / "demo-seal" / "seal-cert.pem"])
    assert report.sealed and report.intact and report.whole_file and report.trusted
    # The sealed file is its own copy (3) of the same revision content as the print (copy 2).
    base = stamp_of(sealed[: report.signed_length])
    assert base is not None and base["sha256"] == stamp["sha256"]
    assert (stamp["copy"], stamp["state"], base["copy"], base["state"]) == (
        "2", "approved", "3", "approved")  # fmt: skip
    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")
    lines = [
        line.strip()
        for block in re.findall(r"```console\n(.*?)```", readme, flags=re.S)
        for line in block.splitlines()
        if line.strip().startswith("fluxledger ")
    ]
    assert any(" record verify " in line for line in lines)
    for line in lines:
        args = shlex.split(line.replace("demo-output/", f"{tmp_path}/"))[1:]
        result = cli(*args)
        assert result.code == 0, (line, result.stdout, result.stderr)


def test_demo_refuses_a_folder_holding_a_real_logbook(cli: Run, tmp_path: Path) -> None:
    """`demo --out .` in someone's work folder must not replace their fluxledger.db."""
    theirs = tmp_path / "fluxledger.db"
    theirs.write_bytes(b"SQLite format 3\x00 their real logbook")
    (tmp_path / "notes.txt").write_text("mine\n")
    out = cli("demo", "--out", str(tmp_path))
    assert out.code == 2 and out.exception is None
    assert out.stderr.startswith("error: --out: ") and out.stderr.count("\n") == 1
    assert "holds files the demo did not write ('fluxledger.db', 'notes.txt')" in out.stderr
    assert theirs.read_bytes() == b"SQLite format 3\x00 their real logbook"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["fluxledger.db", "notes.txt"]


def test_demo_refuses_its_own_folder_once_other_files_were_added(
    cli: Run,
    demo: tuple[Path, dict],  # type: ignore[type-arg]
    tmp_path: Path,
) -> None:
    import shutil

    earlier, _ = demo
    folder = tmp_path / "demo-copy"
    shutil.copytree(earlier, folder)
    marker = json.loads((folder / ".fluxledger-demo").read_text())
    assert "fluxledger.db" in marker["files"]
    assert "BR-000001-rev1-approved-copy2.pdf" in marker["files"]
    (folder / "my-own-report.pdf").write_bytes(b"%PDF-1.7 mine")
    before = {p.name: p.stat().st_mtime_ns for p in folder.iterdir()}
    out = cli("demo", "--out", str(folder))
    assert out.code == 2 and "'my-own-report.pdf'" in out.stderr
    assert "fluxledger.db" not in out.stderr.split("did not write")[1]
    assert {p.name: p.stat().st_mtime_ns for p in folder.iterdir()} == before


def test_demo_refuses_a_file_as_its_folder(cli: Run, tmp_path: Path) -> None:
    target = tmp_path / "fluxledger.db"
    target.write_text("not a folder")
    out = cli("demo", "--out", str(target))
    assert out.code == 2 and "is a file, not a folder" in out.stderr
    assert target.read_text() == "not a folder"
