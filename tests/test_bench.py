"""The benchmarks that call into the package's own internals still run, at a tiny size.

`make bench` is not part of `make test`, so a change to a function a benchmark calls would
otherwise be found only at the next benchmark run (bench/records.py's end-to-end record once
called ``assemble._charts`` with an argument list the function no longer had). No timing is
judged here: speed is the benchmarks' business, never the test suite's.
"""

from __future__ import annotations

import sys
from pathlib import Path

BENCH = Path(__file__).resolve().parents[1] / "bench"


def test_the_end_to_end_record_benchmark_runs_and_reads_the_whole_log() -> None:
    sys.path.insert(0, str(BENCH))
    try:
        import records  # bench/records.py
    finally:
        sys.path.remove(str(BENCH))
    rows = records.end_to_end(1, 3600)  # a 3,600-row, 1 Hz export: an hour of log
    record, size = rows
    assert record.measured is not None and record.measured > 0
    assert record.baseline is not None and record.baseline > 0
    assert size.unit == "KB" and size.measured is not None and size.measured > 10
    assert "0.0 MB" not in record.note  # the export it read was not empty
