"""Benchmarks of fluxledger, each printed beside a baseline measured in the same run (§9).

Run with `make bench`. Nothing here is asserted by the test suite; the figures are ratios
against a baseline taken on the same machine at the same time, so they travel between machines.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path


def _wall(cmd: list[str], stdin: str | None = None) -> float:
    start = time.perf_counter()
    subprocess.run(cmd, check=True, input=stdin, text=True, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL)  # fmt: skip
    return time.perf_counter() - start


def compare(
    name: str,
    baseline: list[str],
    subject: list[str],
    repeats: int,
    target: float,
    subject_input: str | None = None,
) -> bool:
    """Time two commands alternately; print medians and the ratio against the target."""
    _wall(baseline), _wall(subject, subject_input)  # warm the file cache
    base, subj = [], []
    for _ in range(repeats):
        base.append(_wall(baseline))
        subj.append(_wall(subject, subject_input))
    b, s = statistics.median(base), statistics.median(subj)
    ratio = s / b
    verdict = "meets" if ratio <= target else "MISSES"
    print(f"{name}")
    print(f"  baseline  {' '.join(baseline[-2:]):<40} median {b * 1e3:7.1f} ms")
    print(f"  measured  {' '.join(subject[-2:]):<40} median {s * 1e3:7.1f} ms")
    print(f"  ratio     {ratio:.2f}x  (target <= {target}x: {verdict}; {repeats} runs each)")
    return ratio <= target


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--repeats", type=int, default=15)
    parser.add_argument(
        "--skip-fitness", action="store_true", help="skip the fitness-verdict benchmark"
    )
    parser.add_argument(
        "--modules", type=int, default=10_000, help="modules in the fitness database"
    )
    parser.add_argument(
        "--tests", type=int, default=1_000_000, help="water-flux tests in the fitness database"
    )
    parser.add_argument("--verdicts", type=int, default=300, help="fitness verdicts timed")
    parser.add_argument(
        "--skip-commands", action="store_true", help="skip the logbook command start-up timings"
    )
    parser.add_argument(
        "--skip-skidlog", action="store_true", help="skip the skid-log import benchmark"
    )
    parser.add_argument(
        "--skip-records", action="store_true", help="skip the batch-record PDF benchmark"
    )
    args = parser.parse_args()
    exe = sys.executable
    script = shutil.which("fluxledger", path=str(Path(exe).parent)) or shutil.which("fluxledger")
    if script is None:
        print("fluxledger is not installed in this environment; run `make bench`", file=sys.stderr)
        return 2
    ok = compare(
        "CLI start-up: `fluxledger --help` against bare `import typer`",
        [exe, "-c", "import typer"],
        [script, "--help"],
        args.repeats,
        2.5,
    )
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    if not args.skip_commands:
        import commands  # bench/commands.py

        ok = commands.run(exe, script, args.repeats, compare) and ok
    if not args.skip_skidlog:
        print()
        import skidlog  # bench/skidlog.py

        ok = skidlog.run() and ok
    if not args.skip_records:
        print()
        import records  # bench/records.py

        ok = records.main([]) == 0 and ok
    if not args.skip_fitness:
        print()
        import fitness  # bench/fitness.py; imported here so --skip-fitness loads no database code

        ok = fitness.run(args.modules, args.tests, args.verdicts) and ok
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
