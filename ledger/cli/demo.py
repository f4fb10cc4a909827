"""``fluxledger demo``: run the invented demo scenario from sample_records/ and write its outputs.

Two parts, each a list of command lines run in-process exactly as a user would type them:
a bench session of calculators on one module, and the module logbook (users, a module type,
three modules and their history, the fit-for-reuse verdicts, the audit check) in a fresh
SQLite database under the output folder.
"""

from __future__ import annotations

import contextlib
import functools
import io
import json
import os
import shlex
import sys
import tomllib
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import typer

from ledger.cli.common import JSON_OPTION
from ledger.errors import InputError

SAMPLES = Path(__file__).resolve().parents[2] / "sample_records"
# The demo's own note in its output folder: the names it wrote there. A later run replaces
# those and refuses a folder holding anything else (a real logbook, someone's files).
MARKER = ".fluxledger-demo"
# The controlled copies the run's steps print and seal (sample_records/run_history.toml).
COPIES = ("BR-000001-rev1-in-review-copy1.pdf", "BR-000001-rev1-approved-copy2.pdf",
          "BR-000001-rev1-approved-copy3-sealed.pdf")  # fmt: skip
# The wear reports the fleet scenario's last steps write (sample_records/fleet_history.toml).
WEAR_REPORTS = tuple(f"{stem}.{ext}" for stem in ("fleet", "history_qmb0121", "history_qmb0127")
                     for ext in ("pdf", "png"))  # fmt: skip
FIXED_OUTPUTS = ("bench_calculations.json", "bench_session.txt", "fluxledger.db",
                 "logbook_session.txt", "qb117-26-014_skid_export.csv", "demo-seal",
                 *COPIES, *WEAR_REPORTS)  # fmt: skip
TRANSCRIPT_COLUMNS = 132
# Files SQLite and our atomic writes keep beside a file for a while.
COMPANIONS = ("-wal", "-shm", "-journal", ".tmp")


@functools.cache
def _command() -> Any:
    """The app's click command, built once for all the demo's steps: typer builds the whole
    command tree (every option's type hints) on each get_command, about as long as a small
    command takes to run, and the demo runs some three hundred."""
    from typer.main import get_command

    from ledger.cli.main import app

    return get_command(app)


def _run(args: list[str], stdin: str = "") -> tuple[int, str]:
    """Run one fluxledger command in-process; return its exit code and stdout (and, when it
    failed, stderr)."""
    out, err = io.StringIO(), io.StringIO()
    code = 0
    saved_stdin, sys.stdin = sys.stdin, io.StringIO(stdin)
    # The transcript is a file: wide enough that the fleet's table keeps one line per module.
    saved_columns = os.environ.get("COLUMNS")
    given = int(saved_columns) if saved_columns and saved_columns.isdigit() else 0
    os.environ["COLUMNS"] = str(max(TRANSCRIPT_COLUMNS, given))
    with (
        contextlib.redirect_stdout(out),
        contextlib.redirect_stderr(err),
        contextlib.ExitStack() as restore,
    ):
        restore.callback(setattr, sys, "stdin", saved_stdin)
        restore.callback(_restore_columns, saved_columns)
        try:
            result = _command().main(args=args, prog_name="fluxledger", standalone_mode=False)
            code = result if isinstance(result, int) else 0
        except typer.Exit as exc:
            code = exc.exit_code
    # A refusal's message goes to stderr; the transcript shows it.
    return code, out.getvalue() + (err.getvalue() if code else "")


def _restore_columns(saved: str | None) -> None:
    if saved is None:
        os.environ.pop("COLUMNS", None)
    else:
        os.environ["COLUMNS"] = saved


def _shown(path: Path) -> str:
    """A path as short as it can be said from the current folder."""
    rel = os.path.relpath(path)
    return path.as_posix() if rel.startswith("..") else Path(rel).as_posix()


def _write_atomically(target: Path, text: str) -> Path:
    """Write through a temporary file and rename, so a crash never leaves half a file."""
    tmp = target.with_name(target.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(target)
    return target


def _own(name: str, known: set[str]) -> bool:
    ours = known | {MARKER}
    return name in ours or any(name.endswith(e) and name[: -len(e)] in ours for e in COMPANIONS)


def _earlier_outputs(out: Path) -> set[str]:
    """The names an earlier demo run wrote into OUT (none for a new or empty folder); an
    InputError on --out when OUT is not a folder or holds anything the demo did not write."""
    if not out.exists():
        return set()
    if not out.is_dir():
        raise InputError(
            f"--out: {str(out)!r} is a file, not a folder",
            field="--out",
            value=str(out),
            expected="a new or empty folder, or the folder of an earlier demo run",
        )
    known: set[str] = set()
    marker = out / MARKER
    if marker.is_file():
        with contextlib.suppress(ValueError, OSError):
            listed = json.loads(marker.read_text(encoding="utf-8")).get("files", [])
            known = {name for name in listed if isinstance(name, str)}
    foreign = sorted(p.name for p in out.iterdir() if not _own(p.name, known))
    if foreign:
        more = f" and {len(foreign) - 5} more" if len(foreign) > 5 else ""
        raise InputError(
            f"--out: {str(out)!r} holds files the demo did not write "
            f"({', '.join(repr(n) for n in foreign[:5])}{more}); the demo replaces only its own "
            "outputs (its database among them), so it refuses this folder",
            field="--out",
            value=str(out),
            expected="a new or empty folder, or the folder of an earlier demo run",
        )
    return known


def _mark(out: Path, names: set[str]) -> None:
    """Write the marker that lists the demo's outputs in OUT."""
    note = {"written_by": "fluxledger demo", "files": sorted(names - {MARKER})}
    _write_atomically(out / MARKER, json.dumps(note, indent=2) + "\n")


def demo(
    out: Path = typer.Option(..., "--out", help="Folder to write the demo's outputs into."),
    samples: Path = typer.Option(
        SAMPLES, "--samples", help="Folder holding the demo scenario (sample_records/)."
    ),
    as_json: bool = JSON_OPTION,
) -> None:
    """Build the invented demo scenario into OUT and print what was written."""
    scenario_file = samples / "bench_session.toml"
    if not scenario_file.is_file():
        raise InputError(
            f"--samples: {str(samples)!r} has no bench_session.toml",
            field="--samples",
            value=str(samples),
            expected="the sample_records/ folder of fluxledger",
        )
    earlier = _earlier_outputs(out)
    scenario = tomllib.loads(scenario_file.read_text(encoding="utf-8"))
    site = scenario["site"]
    transcript = [f"Demo scenario: {site['company']} — {site['setting']}", site["disclaimer"]]
    if not as_json:
        typer.echo("\n".join(transcript))
    results: dict[str, dict[str, object]] = {}
    for step in scenario["steps"]:
        args = shlex.split(step["command"].replace("{samples}", shlex.quote(_shown(samples))))
        code, text = _run(args)
        jcode, jtext = _run([*args, "--json"])
        if jcode != code or jcode not in (0, 1):
            # The scenario is ours, so a failing step is a bug, not user input.
            raise RuntimeError(f"demo step {step['name']!r} failed with exit code {jcode}")
        results[step["name"]] = {"exit_code": jcode, "report": json.loads(jtext)}
        chunk = ["", f"== {step['title']}", f"$ fluxledger {shlex.join(args)}", text.rstrip()]
        transcript += chunk
        if not as_json:
            typer.echo("\n".join(chunk))
    out.mkdir(parents=True, exist_ok=True)
    # Marked before anything is written, so a run that stops half-way is still recognized.
    _mark(out, earlier | set(FIXED_OUTPUTS) | _saved_names(samples))
    written = [
        _write_atomically(out / name, text + "\n")
        for name, text in (
            ("bench_calculations.json", json.dumps(results, indent=2, ensure_ascii=False)),
            ("bench_session.txt", "\n".join(transcript)),
        )
    ]
    written += _logbook(out, samples, as_json)
    _mark(out, {p.name for p in out.iterdir()})
    if as_json:
        summary = {
            "command": "demo",
            "scenario": f"{site['company']} — {site['setting']}",
            "steps": [{"name": k, "exit_code": v["exit_code"]} for k, v in results.items()],
            "written": [str(p) for p in written],
            "notes": [site["disclaimer"]],
        }
        typer.echo(json.dumps(summary, indent=2, ensure_ascii=False))
        return
    typer.echo("")
    typer.echo("Wrote:")
    for path in written:
        typer.echo(f"  {path}")
    typer.echo("\n".join(_tour(out)))


def _tour(out: Path) -> list[str]:
    """The end of the demo: each module's verdict, where the records are, what to try next."""
    db = shlex.quote(_shown(out / "fluxledger.db"))
    fleet = json.loads((out / "fleet.json").read_text(encoding="utf-8"))["fleet"]
    lines = ["", "The fleet now (most urgent first; `fleet` shows why):"]
    for m in fleet:
        holds = f"; on hold: {m['holds'][0]}" if m["holds"] else ""
        lines.append(f"  {m['serial']:<9} {m['type']:<11} {m['status']:<18} {m['verdict']}{holds}")
    lines += [
        "",
        f"Batch records (PDF): {_shown(out)}/BR-000001-rev1-*.pdf; the transcript of every "
        f"command: {_shown(out / 'logbook_session.txt')}",
        f"Wear reports (PDF and PNG): {_shown(out)}/fleet.pdf, fleet.png, "
        "history_qmb0121.pdf/.png (wearing), history_qmb0127.pdf/.png (on hold)",
        "",
        "Try next:",
        f"  fluxledger fleet --db {db}",
        f"  fluxledger history QMB-0121 --db {db}",
        f"  fluxledger fitness QMB-0127 --product QB-117 --db {db}",
        f"  fluxledger record review 2 --db {db}",
        f"  fluxledger audit verify --db {db}",
    ]
    return lines


def _saved_names(samples: Path) -> set[str]:
    """The report files the scenario's steps save into OUT."""
    names: set[str] = set()
    from ledger.cli.demo_fleet import fleet_names

    for name in ("logbook_history.toml", "run_history.toml", "fleet_history.toml"):
        scenario = tomllib.loads((samples / name).read_text(encoding="utf-8"))
        steps = scenario.get("steps", []) + scenario.get("final_steps", [])
        names |= {step["save"] for step in steps if "save" in step} | fleet_names(scenario)
    return names


def _fresh_database(out: Path) -> Path:
    """The demo's own database file, recreated on every run."""
    db = out / "fluxledger.db"
    for leftover in (db, db.with_name(db.name + "-wal"), db.with_name(db.name + "-shm")):
        leftover.unlink(missing_ok=True)
    return db


def _expand(
    command: str, samples: Path, now: datetime, more: dict[str, str] | None = None
) -> list[str]:
    import re

    def days_ago(m: re.Match[str]) -> str:
        when = now - timedelta(days=float(m.group(1)))
        return when.isoformat(timespec="seconds")

    def date_in(m: re.Match[str]) -> str:
        return (now + timedelta(days=float(m.group(1)))).date().isoformat()

    def date_ago(m: re.Match[str]) -> str:
        return (now - timedelta(days=float(m.group(1)))).date().isoformat()

    text = re.sub(r"\{days_ago:([0-9.]+)\}", days_ago, command)
    text = re.sub(r"\{date_in:([0-9.]+)\}", date_in, text)
    text = re.sub(r"\{date_ago:([0-9.]+)\}", date_ago, text)
    for key, value in {"samples": _shown(samples), **(more or {})}.items():
        text = text.replace("{" + key + "}", shlex.quote(value))
    return shlex.split(text)


def _logbook(out: Path, samples: Path, as_json: bool) -> list[Path]:
    """Build the logbook part of the scenario in OUT/fluxledger.db; return the files written."""
    scenario = tomllib.loads((samples / "logbook_history.toml").read_text(encoding="utf-8"))
    users = scenario["users"]
    db = ["--db", str(_fresh_database(out))]
    admin = next(login for login, u in users.items() if u["role"] == "admin")
    setup: list[tuple[list[str], str]] = [
        (["init", "--admin", admin, "--name", users[admin]["name"], "--password-stdin"],
         users[admin]["password"] + "\n"),
    ]  # fmt: skip
    for login, u in users.items():
        if login != admin:
            # The administrator's password for a new account is temporary: its owner then
            # chooses their own before recording anything.
            temporary = f"temporary-{login}-1"
            setup.append((
                ["user", "add", login, "--name", u["name"], "--role", u["role"], "--user", admin,
                 "--password-stdin"],
                f"{users[admin]['password']}\n{temporary}\n",
            ))  # fmt: skip
            setup.append((
                ["user", "passwd", login, "--user", login, "--password-stdin"],
                f"{temporary}\n{u['password']}\n",
            ))  # fmt: skip
    now = datetime.now(UTC)
    setup += _template_steps(users, now - timedelta(days=45))
    steps: list[tuple[str | None, list[str], str, str | None, int]] = [
        ("Users of the logbook" if i == 0 else None, args, stdin, None, 0)
        for i, (args, stdin) in enumerate(setup)
    ]
    steps += _scenario_steps(scenario["steps"], users, samples, now)
    fleet = tomllib.loads((samples / "fleet_history.toml").read_text(encoding="utf-8"))
    steps += _fleet_modules(fleet, users, samples, now)
    # Part two: a run on QMB-0142, with the skid export written to match its times.
    run_start, run_end = now - timedelta(days=0.1), now - timedelta(days=0.02)
    skid_log = out / "qb117-26-014_skid_export.csv"
    from ledger.cli.demo_log import write_log

    write_log(skid_log, run_start)
    runs = tomllib.loads((samples / "run_history.toml").read_text(encoding="utf-8"))
    seal = _demo_seal(out)
    plan_at = now - timedelta(days=0.12)  # after the pre-use test, before the start
    more = {"skid_log": _shown(skid_log), "run_start": run_start.isoformat(timespec="seconds"),
            "plan_at": plan_at.isoformat(timespec="seconds"),
            "run_end": run_end.isoformat(timespec="seconds"), "out": _shown(out),
            "seal_key": _shown(seal.p12), "seal_cert": _shown(seal.cert)}  # fmt: skip
    # Each step done at the end of its phase in the skid log (minutes after the start),
    # verified three minutes later; entered after the run, so each entry is marked late.
    for n, minutes in enumerate((5, 31, 92, 100, 105), start=1):
        done = run_start + timedelta(minutes=minutes)
        more[f"step{n}_at"] = done.isoformat(timespec="seconds")
        more[f"step{n}_checked"] = (done + timedelta(minutes=3)).isoformat(timespec="seconds")
    steps += _scenario_steps(runs["steps"], users, samples, now, more)
    written: list[Path] = [skid_log]
    for run in fleet["runs"]:
        from ledger.cli.demo_fleet import run_log, run_steps

        log = run_log(run, out, now)
        written.append(_write_atomically(log.path, log.text))
        raw = [{**s, "title": s["title"].format(**log.values)} if "title" in s else s
               for s in run_steps(fleet["run_steps"], run["signed"])]  # fmt: skip
        steps += _scenario_steps(raw, users, samples, now,
                                 {**log.values, "skid_log": _shown(log.path)})  # fmt: skip
    steps += _scenario_steps(fleet["final_steps"], users, samples, now, {"out": _shown(out)})
    transcript = ["", f"Demo scenario: {scenario['site']['title']}"]
    for title, args, stdin, save, refused in steps:
        code, text = _run([*args, *db], stdin)
        if code not in (0, 1, refused):
            raise RuntimeError(f"demo step {shlex.join(args)!r} failed with exit code {code}")
        chunk = [""] + ([f"== {title}"] if title else [])
        chunk += [f"$ fluxledger {shlex.join(args)}", text.rstrip()]
        transcript += chunk
        if not as_json:
            typer.echo("\n".join(chunk))
        if save:
            _, jtext = _run([*args, *db, "--json"], stdin)
            written.append(_write_atomically(out / save, jtext))
    written.insert(0, out / "fluxledger.db")
    written += [p for p in (out / name for name in COPIES) if p.exists()]
    written.append(_write_atomically(out / "logbook_session.txt", "\n".join(transcript) + "\n"))
    return written


def _fleet_modules(
    fleet: dict[str, Any], users: dict[str, dict[str, str]], samples: Path, now: datetime
) -> list[tuple[str | None, list[str], str, str | None, int]]:
    """The fleet's second module type and every module's history, as typed commands."""
    from ledger.cli.demo_fleet import module_steps

    raw = list(fleet["types"])
    lots: dict[str, int] = {}
    for m in fleet["modules"]:
        raw += module_steps(m, lots)
    return _scenario_steps(raw, users, samples, now)


def _template_steps(
    users: dict[str, dict[str, str]], since: datetime
) -> list[tuple[list[str], str]]:
    """The engineer submits each shipped template and QA approves it, in force from ``since``
    (before the scenario's first record: its history is entered late, from paper)."""
    from ledger.runs.template import catalogue, shipped_dir

    engineer = next(login for login, u in users.items() if u["role"] == "engineer")
    qa = next(login for login, u in users.items() if u["role"] == "qa")
    why = "the demo history is entered late from paper; the template was approved before it"
    out: list[tuple[list[str], str]] = []
    for t in catalogue():
        out.append((["template", "submit", _shown(shipped_dir() / t.file), "--user", engineer,
                     "--password-stdin"], users[engineer]["password"] + "\n"))  # fmt: skip
        out.append((["template", "approve", t.id, t.version, "--effective-from",
                     since.isoformat(timespec="seconds"), "--late-reason", why, "--user", qa,
                     "--password-stdin"], users[qa]["password"] + "\n"))  # fmt: skip
    return out


def _demo_seal(out: Path) -> Any:
    """A self-signed seal identity for the demo (a site seals with its own PKI's certificate)."""
    from ledger.records.identity import make_identity

    folder = out / "demo-seal"
    folder.mkdir(exist_ok=True)
    return make_identity(folder, common_name="Quellmoor demo batch-record seal",
                         organization="Quellmoor Biotherapeutics (invented)",
                         passphrase=b"demo-seal-2026")  # fmt: skip


def _scenario_steps(
    raw: list[dict[str, str]],
    users: dict[str, dict[str, str]],
    samples: Path,
    now: datetime,
    more: dict[str, str] | None = None,
) -> list[tuple[str | None, list[str], str, str | None, int]]:
    out: list[tuple[str | None, list[str], str, str | None, int]] = []
    for step in raw:
        args = _expand(step["command"], samples, now, more)
        stdin = ""
        if "user" in step:
            args += ["--user", step["user"], "--password-stdin"]
            stdin = users[step["user"]]["password"] + "\n"
        if "stdin" in step:
            stdin += step["stdin"] + "\n"
        # A step may show a refusal on purpose (``refused = 3``: the exit code it must give).
        out.append((step.get("title"), args, stdin, step.get("save"), int(step.get("refused", 0))))
    return out
