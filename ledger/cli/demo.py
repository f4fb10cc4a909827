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

from ledger.cli.common import JSON_OPTION
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
    written = [
        _write_atomically(out / name, text + "\n")
        for name, text in (
            ("bench_calculations.json", json.dumps(results, indent=2, ensure_ascii=False)),
            ("bench_session.txt", "\n".join(transcript)),
        )
    ]
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
