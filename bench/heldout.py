"""Held-out accuracy of `fluxledger log summarize` on simulated skid logs with known truth.

``python bench/heldout.py --out DIR [--seeds N] [--first-seed S]`` writes every case of
tests/reference/skidsim.py (six invented skid formats) for N noise seeds into DIR, a folder
outside the repository, runs the installed console script ``fluxledger log summarize ...
--json`` on each as a subprocess, and prints the error of every checked quantity against the
simulator's truth (the worst over the run and its phases), the excursion start and duration
errors in samples, and the worst of each column over all logs. The default seeds (101...) are
not the ones the test suite uses (1, 2, 3).

Errors are relative, except diavolumes of phases without a real wash (truth < 0.5 DV), which
are absolute in diavolumes (column "DV abs"). Tolerance: 0.5 % / 0.005 DV; excursions within
one sample. Exit 0 when every check holds, 1 otherwise, 2 for a bad --out. bench/run.py runs
it in a temporary folder (two seeds; one with --quick) and puts the worst figures in its table.
"""

from __future__ import annotations

import argparse
import json
import math
import shutil
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from table import Row  # noqa: E402  (bench/table.py)

from tests.reference import skidsim  # noqa: E402  (the repository root is on the path now)

COLUMNS = [
    ("duration_s", "rel", "duration"),
    ("permeate_volume_m3", "rel", "permeate"),
    ("diavolumes", "rel", "DV"),
    ("diavolumes", "abs DV", "DV abs"),
    ("concentration_factor", "rel", "CF"),
    ("tmp_mean_pa", "rel", "mean TMP"),
]


def _script() -> str | None:
    exe = Path(sys.executable)
    return shutil.which("fluxledger", path=str(exe.parent)) or shutil.which("fluxledger")


def _fmt(err: float, measure: str) -> str:
    if not math.isfinite(err):
        return "missing"
    return f"{err:.4f}" if measure == "abs DV" else f"{err * 100:.4f}%"


def check(out: Path, seeds: range, script: str, detail: bool = False) -> dict[str, Any]:
    """Run every case for every seed into ``out``, print the table, return the worst errors."""
    header = ["case", "seed", "rows", *(c[2] for c in COLUMNS), "exc", "d start", "d dur", "s"]
    widths = [24, 4, 6, 9, 9, 9, 7, 9, 9, 6, 7, 6, 5]
    print(f"fluxledger log summarize ({script}) against tests/reference/skidsim.py truth; "
          f"tolerance {skidsim.TOLERANCE:.1%} (DV abs: {skidsim.TOLERANCE} DV), excursions "
          "within 1 sample")  # fmt: skip
    print("  ".join(h.rjust(w) if i > 1 else h.ljust(w) for i, (h, w) in
                    enumerate(zip(header, widths, strict=True))))  # fmt: skip
    worst = {c[2]: 0.0 for c in COLUMNS}
    worst_start = worst_dur = 0.0
    failures: list[str] = []
    totals = {"excursions": 0, "found": 0, "spurious": 0, "logs": 0}
    for case in skidsim.CASES:
        for seed in seeds:
            paths = skidsim.generate(case, seed, out / f"{case}-s{seed}")
            t0 = time.perf_counter()
            proc = subprocess.run([script, "log", "summarize", *paths.args],
                                  capture_output=True, text=True)  # fmt: skip
            secs = time.perf_counter() - t0
            totals["logs"] += 1
            if proc.returncode != 0:
                failures.append(f"{case} s{seed}: exit {proc.returncode}: {proc.stderr.strip()}")
                print(f"{case:<24}  {seed:>4}  exit {proc.returncode}: {proc.stderr.strip()}")
                continue
            truth = json.loads(paths.truth.read_text(encoding="utf-8"))
            checks, excursions, spurious = skidsim.compare(truth, json.loads(proc.stdout))
            cells = []
            for quantity, measure, label in COLUMNS:
                errs = [c.error for c in checks if c.quantity == quantity and c.measure == measure]
                err = max(errs) if errs else 0.0
                worst[label] = max(worst[label], err)
                cells.append(_fmt(err, measure) if errs else "-")
            found = [e for e in excursions if e.got is not None]
            d_start = max((abs(e.start_error_samples) for e in found), default=0.0)
            d_dur = max((abs(e.duration_error_samples) for e in found), default=0.0)
            worst_start, worst_dur = max(worst_start, d_start), max(worst_dur, d_dur)
            totals["excursions"] += len(excursions)
            totals["found"] += len(found)
            totals["spurious"] += len(spurious)
            extra = f"+{len(spurious)}" if spurious else ""
            row = [case, str(seed), str(truth["rows"]), *cells,
                   f"{len(found)}/{len(excursions)}{extra}", f"{d_start:.2f}", f"{d_dur:.2f}",
                   f"{secs:.2f}"]  # fmt: skip
            print("  ".join(v.rjust(w) if i > 1 else v.ljust(w) for i, (v, w) in
                            enumerate(zip(row, widths, strict=True))))  # fmt: skip
            failures += [f"{case} s{seed}: {c}" for c in checks if not c.ok]
            failures += [f"{case} s{seed}: excursion {e}" for e in excursions if not e.ok]
            failures += [f"{case} s{seed}: spurious excursion {s}" for s in spurious]
    row = ["worst", "", "", *(_fmt(worst[c[2]], c[1]) for c in COLUMNS),
           f"{totals['found']}/{totals['excursions']}"
           + (f"+{totals['spurious']}" if totals["spurious"] else ""),
           f"{worst_start:.2f}", f"{worst_dur:.2f}", ""]  # fmt: skip
    print("  ".join(v.rjust(w) if i > 1 else v.ljust(w) for i, (v, w) in
                    enumerate(zip(row, widths, strict=True))))  # fmt: skip
    print(f"{totals['logs']} logs in {out}; excursion errors (d start, d dur) in samples; "
          f"{len(failures)} failed checks")  # fmt: skip
    if failures and detail:
        print("\n".join(failures))
    elif failures:
        print("\n".join(failures[:20]))
    return {"worst": worst, "start": worst_start, "duration": worst_dur, "totals": totals,
            "failures": failures}  # fmt: skip


def rows(seeds: int = 2, first_seed: int = 101) -> list[Row]:
    """The held-out check in a temporary folder, as rows of the bench table."""
    import tempfile

    script = _script()
    if script is None:
        raise RuntimeError("fluxledger is not installed in this environment")
    with tempfile.TemporaryDirectory(prefix="fluxledger-bench-heldout-") as tmp:
        found = check(Path(tmp), range(first_seed, first_seed + seeds), script)
    worst, totals, failed = found["worst"], found["totals"], len(found["failures"])
    rel = max(worst[label] for _, measure, label in COLUMNS if measure == "rel")
    note = (f"{totals['logs']} simulated logs ({len(skidsim.CASES)} formats x {seeds} seeds, "
            f"seeds from {first_seed}) against the simulator's truth; {failed} failed checks"
            + (f"; first: {found['failures'][0]}" if failed else ""))  # fmt: skip
    return [
        Row("`log summarize` held-out accuracy: worst relative error", rel * 100, "%", None,
            f"<= {skidsim.TOLERANCE * 100:g} %", rel <= skidsim.TOLERANCE,
            note=note),
        Row("  worst absolute diavolume error (phases < 0.5 DV)", worst["DV abs"], "DV",
            None, f"<= {skidsim.TOLERANCE} DV", worst["DV abs"] <= skidsim.TOLERANCE),
        Row(f"  excursions found / planted ({totals['spurious']} spurious)",
            float(totals["found"]), "", float(totals["excursions"]), "all, none spurious",
            totals["found"] == totals["excursions"] and totals["spurious"] == 0),
        Row("  worst excursion start / duration error", max(found["start"],
            found["duration"]), "samples", None, "<= 1 sample",
            max(found["start"], found["duration"]) <= 1.0),
    ]  # fmt: skip


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--out", type=Path, required=True, help="folder outside the repository")
    parser.add_argument("--seeds", type=int, default=3, help="noise seeds per case")
    parser.add_argument("--first-seed", type=int, default=101, help="first seed")
    parser.add_argument("--detail", action="store_true", help="also print every failed check")
    args = parser.parse_args(argv)
    out = args.out.resolve()
    if out == ROOT or ROOT in out.parents:
        print(f"--out {out} is inside the repository; give a folder outside it", file=sys.stderr)
        return 2
    script = _script()
    if script is None:
        print("fluxledger is not installed in this environment", file=sys.stderr)
        return 2
    found = check(out, range(args.first_seed, args.first_seed + args.seeds), script, args.detail)
    return 1 if found["failures"] else 0


if __name__ == "__main__":
    sys.exit(main())
