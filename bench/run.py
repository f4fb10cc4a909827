"""Benchmarks of fluxledger, each figure beside a baseline measured in the same run.

Run with `make bench`. Each benchmark prints its own figures as it goes; the run ends with one
table of every figure (what, measured, baseline, ratio, target, result), also written to
bench/latest.md and bench/latest.json with the date and size of the machine. Nothing here is
part of the test suite: the figures are ratios against baselines taken on the same machine at
the same time, so they travel between machines, but a loaded machine makes them noisy.
Exit status: 0 when every benchmark ran (a missed target shows as MISSES in the table; with
--strict it exits 1), 1 when a benchmark failed to run.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import time
import traceback
from collections.abc import Callable
from pathlib import Path

BENCH = Path(__file__).resolve().parent
sys.path.insert(0, str(BENCH))

from table import Row, as_json, error_row, machine, markdown, render  # noqa: E402

HELP_TARGET = 2.5  # `fluxledger --help` against `python -c "import typer"`


def _cpu_children() -> float:
    """User + system CPU seconds of the finished children so far (0 where not known)."""
    try:
        import resource
    except ImportError:  # not on POSIX
        return 0.0
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def _wall(cmd: list[str], stdin: str | None = None) -> tuple[float, float]:
    """Wall-clock and CPU seconds of one run of ``cmd``; RuntimeError if it fails."""
    cpu = _cpu_children()
    start = time.perf_counter()
    done = subprocess.run(cmd, input=stdin, text=True, stdout=subprocess.DEVNULL,
                          stderr=subprocess.PIPE)  # fmt: skip
    seconds = time.perf_counter() - start
    if done.returncode != 0:
        last = (done.stderr.strip().splitlines() or ["(no message)"])[-1]
        raise RuntimeError(f"`{' '.join(cmd[-3:])}` exited {done.returncode}: {last}")
    return seconds, _cpu_children() - cpu


def _label(cmd: list[str]) -> str:
    """The command as a reader would type it, without the temporary --db path."""
    words = [Path(cmd[0]).name, *cmd[1:]]
    if "--db" in words:
        i = words.index("--db")
        del words[i : i + 2]
    text = " ".join(words)
    return text if len(text) <= 40 else text[:37] + "..."


def compare(
    name: str,
    baseline: list[str],
    subject: list[str],
    repeats: int,
    target: float,
    subject_input: str | None = None,
) -> Row:
    """Time two commands alternately (whole process, wall clock); print medians and ratio.

    The target is judged on the wall-clock medians. The ratio of the CPU times (user + system
    of the child) is printed too: other load on the machine disturbs it less.
    """
    _wall(baseline), _wall(subject, subject_input)  # warm the file cache
    base: list[tuple[float, float]] = []
    subj: list[tuple[float, float]] = []
    for _ in range(repeats):
        base.append(_wall(baseline))
        subj.append(_wall(subject, subject_input))
    b, s = statistics.median(t for t, _ in base), statistics.median(t for t, _ in subj)
    b_cpu, s_cpu = statistics.median(c for _, c in base), statistics.median(c for _, c in subj)
    b_min, s_min = min(t for t, _ in base), min(t for t, _ in subj)
    ratio = s / b
    cpu_ratio = s_cpu / b_cpu if b_cpu > 0 else float("nan")
    verdict = "meets" if ratio <= target else "MISSES"
    print(f"{name}")
    print(f"  baseline  {_label(baseline):<40} median {b * 1e3:7.1f} ms  "
          f"(min {b_min * 1e3:6.1f}; CPU {b_cpu * 1e3:6.1f})")  # fmt: skip
    print(f"  measured  {_label(subject):<40} median {s * 1e3:7.1f} ms  "
          f"(min {s_min * 1e3:6.1f}; CPU {s_cpu * 1e3:6.1f})")  # fmt: skip
    others = f"ratio of the minimums {s_min / b_min:.2f}x, of the CPU times {cpu_ratio:.2f}x"
    print(f"  ratio     {ratio:.2f}x  (target <= {target}x: {verdict}; {repeats} runs each; "
          f"{others})")  # fmt: skip
    note = f"wall-clock medians of {repeats} runs each, alternated; {others}"
    return Row(name, s * 1e3, "ms", b * 1e3, f"<= {target}x baseline", ratio <= target, note)


def _section(rows: list[Row], what: str, run: Callable[[], list[Row]]) -> None:
    """Run one benchmark; a failure becomes an ERROR row and the others still run."""
    print()
    try:
        rows.extend(run())
    except Exception as exc:  # one broken benchmark must not hide the others' figures
        traceback.print_exc()
        rows.append(error_row(what, exc))
    sys.stdout.flush()


def _options(argv: list[str], quick: bool) -> str:
    return " ".join(argv) + (" (scaled down)" if quick else "")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--quick", action="store_true",
                        help="scaled down (5 repeats, 1,000 modules / 100,000 water-flux tests, "
                             "200,000-row memory log, one held-out seed, 40 requests a web "
                             "page): a few minutes, fitness target not judged")  # fmt: skip
    parser.add_argument("--repeats", type=int, default=None, help="runs of each timing (15)")
    parser.add_argument("--modules", type=int, default=None,
                        help="modules in the fitness database (10,000)")  # fmt: skip
    parser.add_argument("--tests", type=int, default=None,
                        help="water-flux tests in the fitness database (1,000,000)")  # fmt: skip
    parser.add_argument("--verdicts", type=int, default=300, help="fitness verdicts timed")
    parser.add_argument("--memory-rows", type=int, default=None,
                        help="rows of the skid-log memory file (1,000,000; 0 skips)")  # fmt: skip
    parser.add_argument("--heldout-seeds", type=int, default=None,
                        help="noise seeds per held-out case (2)")  # fmt: skip
    parser.add_argument("--demo-db", type=Path, default=None,
                        help="demo logbook the web benchmark copies (demo-output/fluxledger.db; "
                             "built in a temporary folder when missing)")  # fmt: skip
    for part in ("commands", "skidlog", "records", "heldout", "fitness", "import", "web"):
        parser.add_argument(f"--skip-{part}", action="store_true", help=f"leave out {part}")
    parser.add_argument("--out", type=Path, default=BENCH,
                        help="folder for latest.md and latest.json (default: bench/)")  # fmt: skip
    parser.add_argument("--no-write", action="store_true", help="print the table only")
    parser.add_argument("--strict", action="store_true", help="exit 1 when a target is missed")
    args = parser.parse_args(argv)
    quick = args.quick
    repeats = args.repeats or (5 if quick else 15)
    modules = args.modules or (1_000 if quick else 10_000)
    tests = args.tests or (100_000 if quick else 1_000_000)
    memory_rows = args.memory_rows if args.memory_rows is not None else (
        200_000 if quick else 1_000_000)  # fmt: skip
    seeds = args.heldout_seeds or (1 if quick else 2)

    exe = sys.executable
    script = shutil.which("fluxledger", path=str(Path(exe).parent)) or shutil.which("fluxledger")
    if script is None:
        print("fluxledger is not installed in this environment; run `make bench`", file=sys.stderr)
        return 2
    info = machine()
    started = time.perf_counter()
    rows: list[Row] = []
    help_name = '`fluxledger --help` / `python -c "import typer"`'
    _section(rows, help_name, lambda: [
        compare(help_name, [exe, "-c", "import typer"], [script, "--help"], repeats, HELP_TARGET)
    ])  # fmt: skip
    if not args.skip_commands:
        import commands  # bench/commands.py

        _section(rows, "Logbook commands", lambda: commands.run(exe, script, repeats, compare))
    if not args.skip_skidlog:
        import skidlog  # bench/skidlog.py

        _section(rows, "Skid-log import", lambda: skidlog.run(repeats, memory_rows=memory_rows))
        _section(rows, "Skid-log dialects", lambda: skidlog.dialects(repeats))
    if not args.skip_records:
        import records  # bench/records.py

        _section(rows, "Batch record", lambda: records.run_all(max(repeats, 3)))
    if not args.skip_heldout:
        import heldout  # bench/heldout.py

        _section(rows, "Held-out accuracy of log summarize", lambda: heldout.rows(seeds))
    if not args.skip_fitness:

        def fitness_rows() -> list[Row]:
            import fitness  # bench/fitness.py; here so --skip-fitness loads no database code

            return fitness.run(modules, tests, args.verdicts)

        _section(rows, "Fitness verdict", fitness_rows)
    if not args.skip_import:
        import import_logbook  # bench/import_logbook.py

        n_import = 20_000 if quick else 100_000
        _section(rows, "import-logbook", lambda: import_logbook.run(n_import, 3))
    if not args.skip_web:
        import web  # bench/web.py

        _section(rows, "Web pages", lambda: web.run(script, quick, demo_db=args.demo_db))
    info["load_average_end"] = [round(x, 2) for x in os.getloadavg()]
    info["seconds"] = round(time.perf_counter() - started)
    options = _options(sys.argv[1:] if argv is None else argv, quick)
    print()
    print(f"All benchmarks took {info['seconds']} s.")
    if not args.no_write:
        args.out.mkdir(parents=True, exist_ok=True)
        md, js = args.out / "latest.md", args.out / "latest.json"
        md.write_text(markdown(rows, info, options), encoding="utf-8")
        js.write_text(json.dumps(as_json(rows, info, options), indent=2) + "\n", encoding="utf-8")
        print(f"The table below is also in {md} and {js}.")
    print()
    print(render(rows, info, options))
    failed = any(r.status == "ERROR" for r in rows)
    missed = any(r.ok is False for r in rows)
    return 1 if failed or (missed and args.strict) else 0


if __name__ == "__main__":
    sys.exit(main())
