"""Skid-log import benchmark (DESIGN §9): reading a 24 h, 1 Hz, 10-channel log and computing
its actuals, against a bare pandas.read_csv(engine="pyarrow") of the same file, in one process.

Run alone with `.venv/bin/python bench/skidlog.py`, or through `make bench`.
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import tempfile
import time
from datetime import UTC, datetime
from pathlib import Path

MAPPING = """
[time]
column = "Timestamp"
[channels]
feed_pressure      = { column = "PT-01", unit = "psi" }
retentate_pressure = { column = "PT-02", unit = "psi" }
permeate_pressure  = { column = "PT-03", unit = "psi" }
feed_flow          = { column = "FT-01", unit = "mL/min" }
permeate_flow      = { column = "FT-02", unit = "mL/min" }
permeate_mass      = { column = "WT-02", unit = "g", density = "1.0 g/mL" }
retentate_volume   = { column = "LT-01", unit = "mL" }
temperature        = { column = "TT-01", unit = "degC" }
phase              = { column = "Step" }
"""
COLUMNS = ["PT-01", "PT-02", "PT-03", "FT-01", "FT-02", "WT-02", "LT-01", "TT-01", "AUX-1", "AUX-2"]


def write_log(path: Path, rows: int) -> None:
    """A synthetic 1 Hz log: ISO timestamps, ten numeric channels, a step column."""
    import numpy as np
    import pandas as pd

    rng = np.random.default_rng(1)
    t0 = datetime(2026, 11, 2, 6, 0, tzinfo=UTC)
    stamps = pd.date_range(t0, periods=rows, freq="s").strftime("%Y-%m-%dT%H:%M:%S+00:00")
    step = np.where(np.arange(rows) < rows // 3, "concentrate",
                    np.where(np.arange(rows) < 2 * rows // 3, "diafilter", "final"))  # fmt: skip
    data = {"Timestamp": stamps, "Step": step}
    base = [6.0, 3.5, 0.3, 350.0, 30.0, 0.0, 2000.0, 20.0, 1.0, 2.0]
    for name, b in zip(COLUMNS, base, strict=True):
        data[name] = np.round(b + rng.normal(0, 0.01 * b + 0.01, rows), 3)
    data["WT-02"] = np.round(np.arange(rows) * 0.5, 2)
    pd.DataFrame(data).to_csv(path, index=False)


def _median(fn: object, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()  # type: ignore[operator]
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def run(repeats: int = 9, rows: int = 86_400, memory_rows: int = 1_000_000) -> bool:
    import pandas as pd

    from ledger.runs.actuals import Geometry, Range, summarize
    from ledger.runs.mapping import parse_mapping
    from ledger.runs.skidlog import read_log

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "skid_24h.csv"
        write_log(path, rows)
        mapping = parse_mapping(MAPPING, "bench mapping")
        geometry = Geometry(0.0565, 120, 0.5e-3)
        ranges = [
            Range("tmp", "tmp", 0.1e5, 0.5e5),
            Range("temperature", "temperature", 288.15, 298.15),
        ]

        def baseline() -> None:
            pd.read_csv(path, engine="pyarrow")

        def subject(digest: bool) -> None:
            summarize(read_log(path, mapping, digest=digest), geometry, ranges)

        baseline(), subject(True)  # warm caches and lazy imports
        b = _median(baseline, repeats)
        s = _median(lambda: subject(True), repeats)
        s_nohash = _median(lambda: subject(False), repeats)
        size = path.stat().st_size
    ratio = s / b
    verdict = "meets" if ratio <= 2.0 else "MISSES"
    print(f"Skid-log import: {rows:,} rows x 10 channels ({size / 1e6:.1f} MB)")
    print(f"  baseline  pandas.read_csv(engine='pyarrow')          median {b * 1e3:7.1f} ms")
    print(f"  measured  read_log + summarize (with SHA-256)        median {s * 1e3:7.1f} ms")
    print(f"            read_log + summarize (without SHA-256)     median {s_nohash * 1e3:7.1f} ms")
    print(f"  ratio     {ratio:.2f}x  (target <= 2.0x: {verdict}; {repeats} runs each)")
    peak = _peak_memory(memory_rows)
    print(f"  memory    peak RSS summarizing {memory_rows:,} rows: {peak:.0f} MB")
    return ratio <= 2.0


def _peak_memory(rows: int) -> float:
    code = f"""
import resource, sys, tempfile
from pathlib import Path
sys.path.insert(0, {str(Path(__file__).resolve().parent)!r})
import skidlog
from ledger.runs.actuals import Geometry, summarize
from ledger.runs.mapping import parse_mapping
from ledger.runs.skidlog import read_log
with tempfile.TemporaryDirectory() as tmp:
    p = Path(tmp) / "big.csv"
    skidlog.write_log(p, {rows})
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    summarize(read_log(p, parse_mapping(skidlog.MAPPING, "m")), Geometry(0.0565, 120, 5e-4))
    print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return float(out.stdout.split()[-1])


if __name__ == "__main__":
    sys.exit(0 if run() else 1)
