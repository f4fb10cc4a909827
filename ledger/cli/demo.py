"""``fluxledger demo``: run the invented demo scenario from sample_records/ and write its outputs.

For now the scenario is a bench session on one invented module: each step is a ``calc``
command line, run in-process exactly as a user would type it, printed to the terminal and
saved as JSON under the output folder.
"""

from __future__ import annotations

import contextlib
import io
import json
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
    for step in scenario["steps"]:
        args = shlex.split(step["command"].replace("{samples}", shlex.quote(str(samples))))
        typer.echo("")
        typer.echo(f"== {step['title']}")
        typer.echo(f"$ fluxledger {' '.join(shlex.quote(a) for a in args)}")
        code, text = _run(args)
        typer.echo(text.rstrip())
        jcode, jtext = _run([*args, "--json"])
        if jcode != code or jcode not in (0, 1):
            raise RuntimeError(f"demo step {step['name']!r} failed with exit code {jcode}")
        results[step["name"]] = {"exit_code": jcode, "report": json.loads(jtext)}
    target = out / "bench_calculations.json"
    tmp = target.with_suffix(".json.tmp")
    tmp.write_text(json.dumps(results, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    tmp.replace(target)
    written.append(target)
    typer.echo("")
    typer.echo("Wrote:")
    for path in written:
        typer.echo(f"  {path}")
