"""``fluxledger demo``: run the invented demo scenario from sample_records/ and write its outputs.

For now the scenario is a bench session on one invented module: each step is a ``calc``
command line, run in-process exactly as a user would type it, printed to the terminal and
saved as JSON under the output folder.
"""

from __future__ import annotations

import contextlib
import io
import json
import os
import shlex
import tomllib
from pathlib import Path

import typer

from ledger.errors import InputError

SAMPLES = Path(__file__).resolve().parents[2] / "sample_records"


def _run(args: list[str]) -> tuple[int, str]:
    """Run one fluxledger command in-process; return its exit code and stdout."""
    from typer.main import get_command

    from ledger.cli.main import app

    out = io.StringIO()
    code = 0
    with contextlib.redirect_stdout(out):
        try:
            result = get_command(app).main(args=args, prog_name="fluxledger", standalone_mode=False)
            code = result if isinstance(result, int) else 0
        except typer.Exit as exc:
            code = exc.exit_code
    return code, out.getvalue()


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


def demo(
    out: Path = typer.Option(..., "--out", help="Folder to write the demo's outputs into."),
    samples: Path = typer.Option(
        SAMPLES, "--samples", help="Folder holding the demo scenario (sample_records/)."
    ),
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
    scenario = tomllib.loads(scenario_file.read_text(encoding="utf-8"))
    out.mkdir(parents=True, exist_ok=True)
    site = scenario["site"]
    typer.echo(f"Demo scenario: {site['company']} — {site['setting']}")
    typer.echo(site["disclaimer"])
    written: list[Path] = []
    results: dict[str, object] = {}
    transcript: list[str] = [site["company"] + " — " + site["setting"], site["disclaimer"]]
    for step in scenario["steps"]:
        args = shlex.split(step["command"].replace("{samples}", shlex.quote(_shown(samples))))
        typer.echo("")
        typer.echo(f"== {step['title']}")
        typer.echo(f"$ fluxledger {shlex.join(args)}")
        code, text = _run(args)
        typer.echo(text.rstrip())
        transcript += ["", f"== {step['title']}", f"$ fluxledger {shlex.join(args)}", text.rstrip()]
        jcode, jtext = _run([*args, "--json"])
        if jcode != code or jcode not in (0, 1):
            raise RuntimeError(f"demo step {step['name']!r} failed with exit code {jcode}")
        results[step["name"]] = {"exit_code": jcode, "report": json.loads(jtext)}
    for name, text in (
        ("bench_calculations.json", json.dumps(results, indent=2, ensure_ascii=False)),
        ("bench_session.txt", "\n".join(transcript)),
    ):
        written.append(_write_atomically(out / name, text + "\n"))
    typer.echo("")
    typer.echo("Wrote:")
    for path in written:
        typer.echo(f"  {path}")
