"""Skid-log import speed against pandas.read_csv(engine="pyarrow") of the same file (DEVELOPERS.md).

What is measured, and how:

1. The log. tests/reference/skidsim.py (the independent simulator of the accuracy tests)
   writes a 24 h, 1 Hz run: 86,400 rows, ISO 8601 timestamps with offset, a step column
   (concentrate, diafilter, concentrate, recover) and ten channels: the eight the mapping maps
   (feed, retentate and permeate pressure in psi; feed and permeate flow in mL/min; the
   permeate balance in g; the retentate level in mL; temperature in degC) and two it does not
   (pH, conductivity). Four excursions are in it; three ranges are checked.
2. Timing, in this one process, after a warm-up call of each: the baseline
   ``pandas.read_csv(path, engine="pyarrow")`` (all twelve columns, nothing else) and the
   importer ``read_log(path, mapping, wait=False)`` + ``summarize(log, Geometry(...),
   ranges)`` (the SHA-256 is computed on a second thread while the columns are converted and
   the actuals computed; summarize waits for it at its end, as `log summarize` runs it), with
   the digest on and off, alternated call by call; the median of ``--repeats`` calls each
   (``time.perf_counter``); the minimum is printed too, as the figure least disturbed by
   other load. read_log and summarize are also timed alone. Target: importer within 1.5x of
   the baseline (judged on the medians, with the digest on, as the CLI runs it).
3. Memory. A 1,000,000-row file of the same format is written first; then fresh
   subprocesses report their own peak RSS (VmHWM of /proc/self/status): one that reads and
   summarizes it, one that only runs the bare read_csv, and one that only imports pandas,
   pyarrow and the importer modules (the floor).

Run alone with ``.venv/bin/python bench/skidlog.py`` or through ``bench/run.py``.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
from pathlib import Path
from typing import TYPE_CHECKING

from table import Row  # bench/table.py
from timing import alternate  # bench/timing.py

ROOT = Path(__file__).resolve().parent.parent
TARGET = 1.5

if TYPE_CHECKING:
    from ledger.runs.actuals import ChannelLimit, Geometry


def _case_objects(rows: int) -> tuple[Geometry, list[ChannelLimit]]:
    """The geometry and the SI ranges of the simulator's long case."""
    from ledger.runs.actuals import ChannelLimit, Geometry

    sys.path.insert(0, str(ROOT))
    from tests.reference import skidsim

    case = skidsim.long_case(rows)
    p = case.process
    geometry = Geometry(p.area_m2, p.fibers, p.lumen_diameter_m)
    ranges = [
        ChannelLimit(lim.name, lim.channel, lim.low, lim.high, lim.phase) for lim in case.limits
    ]
    return geometry, ranges


def _write(rows: int, folder: Path) -> tuple[Path, Path]:
    sys.path.insert(0, str(ROOT))
    from tests.reference import skidsim

    return skidsim.write_long_log(rows, folder)


# ru_maxrss of a child started by fork + exec can report the parent's peak (Linux keeps the
# high-water mark across exec), so each child reads its own VmHWM from /proc when it can.
_PEAK = """
def peak():
    try:
        with open("/proc/self/status") as f:
            return next(int(line.split()[1]) for line in f if line.startswith("VmHWM:"))
    except (OSError, StopIteration):
        import resource
        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
"""
_RSS = {
    "summarize": """
import resource, sys
sys.path.insert(0, {root!r})
from ledger.runs.actuals import Geometry, ChannelLimit, summarize
from ledger.runs.mapping import load_mapping
from ledger.runs.skidlog import read_log
from tests.reference import skidsim
case = skidsim.long_case({rows})
p = case.process
ranges = [ChannelLimit(x.name, x.channel, x.low, x.high, x.phase) for x in case.limits]
s = summarize(read_log({csv!r}, load_mapping({mapping!r})),
              Geometry(p.area_m2, p.fibers, p.lumen_diameter_m), ranges)
assert s.rows == {rows}, s.rows
print(peak())
""",
    "read_csv": """
import resource
import pandas as pd
frame = pd.read_csv({csv!r}, engine="pyarrow")
assert len(frame) == {rows}
print(peak())
""",
    "imports": """
import resource, sys
import pandas, pyarrow, numpy
import ledger.runs.actuals, ledger.runs.mapping, ledger.runs.skidlog
print(peak())
""",
}


def _peak_rss_mb(kind: str, csv: Path, mapping: Path, rows: int) -> float:
    code = _PEAK + _RSS[kind].format(root=str(ROOT), csv=str(csv), mapping=str(mapping), rows=rows)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=ROOT)  # fmt: skip
    return float(out.stdout.split()[-1]) / 1024  # KiB


def run(repeats: int = 15, rows: int = 86_400, memory_rows: int = 1_000_000) -> list[Row]:
    """Print the figures; return them as table rows (the target is judged on the first)."""
    import pandas as pd

    from ledger.runs.actuals import summarize
    from ledger.runs.mapping import load_mapping
    from ledger.runs.skidlog import read_log

    geometry, ranges = _case_objects(rows)
    with tempfile.TemporaryDirectory(prefix="fluxledger-bench-skidlog-") as tmp:
        csv, mapping_path = _write(rows, Path(tmp))
        mapping = load_mapping(mapping_path)
        size = csv.stat().st_size
        log = read_log(csv, mapping)
        found = summarize(log, geometry, ranges)
        medians = alternate(
            {
                "read_csv": lambda: pd.read_csv(csv, engine="pyarrow"),
                "import": lambda: summarize(read_log(csv, mapping, wait=False), geometry, ranges),
                "import_nodigest": lambda: summarize(
                    read_log(csv, mapping, digest=False),
                    geometry,
                    ranges,
                ),
                "read_log": lambda: read_log(csv, mapping),
                "summarize": lambda: summarize(log, geometry, ranges),
            },
            repeats,
        )
        memory: dict[str, float] = {}
        if memory_rows:
            big, big_mapping = _write(memory_rows, Path(tmp) / "big")
            big_size = big.stat().st_size
            for kind in ("summarize", "read_csv", "imports"):
                memory[kind] = _peak_rss_mb(kind, big, big_mapping, memory_rows)
    b, b_min = medians["read_csv"]
    ratio = medians["import"][0] / b
    ratio_nodigest = medians["import_nodigest"][0] / b
    ratio_min = medians["import"][1] / b_min
    verdict = "meets" if ratio <= TARGET else "MISSES"
    print(f"Skid-log import: {rows:,} rows, 1 Hz, ISO timestamps, step + 10 channels "
          f"({size / 1e6:.1f} MB; {len(found.phases)} phases, {len(found.excursions)} "
          f"excursions found)")  # fmt: skip
    rows_out = [
        ("baseline", 'pandas.read_csv(engine="pyarrow")', medians["read_csv"]),
        ("measured", "read_log + summarize (SHA-256 on)", medians["import"]),
        ("", "read_log + summarize (SHA-256 off)", medians["import_nodigest"]),
        ("  parts", "read_log alone (SHA-256 on)", medians["read_log"]),
        ("", "summarize alone", medians["summarize"]),
    ]
    for label, what, (med, low) in rows_out:
        print(f"  {label:<9} {what:<40} median {med * 1e3:7.1f} ms  (min {low * 1e3:6.1f})")
    print(f"  ratio     {ratio:.2f}x with SHA-256, {ratio_nodigest:.2f}x without; ratio of the "
          f"minimums {ratio_min:.2f}x  (target <= {TARGET}x on the medians with SHA-256: "
          f"{verdict}; {repeats} runs each)")  # fmt: skip
    if memory:
        print(f"  memory    peak RSS, {memory_rows:,} rows ({big_size / 1e6:.0f} MB), fresh "
              f"process: read_log + summarize {memory['summarize']:.0f} MB; bare read_csv "
              f"{memory['read_csv']:.0f} MB; imports only {memory['imports']:.0f} MB")  # fmt: skip
    base = '/ read_csv(engine="pyarrow")'
    b_ms = b * 1e3
    out = [
        Row(f"Skid-log import + actuals, SHA-256 on {base}", medians["import"][0] * 1e3, "ms",
            b_ms, f"<= {TARGET}x baseline", ratio <= TARGET,
            note=f"{rows:,}-row 1 Hz log, ISO timestamps, step + 10 channels, {size / 1e6:.1f} MB; "
            f"medians of {repeats} calls; ratio of the minimums {ratio_min:.2f}x"),
        Row(f"  the same, SHA-256 off {base}", medians["import_nodigest"][0] * 1e3, "ms", b_ms),
        Row(f"  read_log alone (SHA-256 on) {base}", medians["read_log"][0] * 1e3, "ms", b_ms),
        Row(f"  summarize alone {base}", medians["summarize"][0] * 1e3, "ms", b_ms),
    ]  # fmt: skip
    if memory:
        note = (f"{big_size / 1e6:.0f} MB file, fresh processes; one that only imports pandas, "
                f"pyarrow and the importer peaks at {memory['imports']:.0f} MB")  # fmt: skip
        out.append(Row(f"Skid-log import peak RSS, {memory_rows:,} rows / bare read_csv",
                       memory["summarize"], "MB", memory["read_csv"], note=note))  # fmt: skip
    return out


def dialects(repeats: int = 15, rows: int = 86_400) -> list[Row]:
    """The same 24 h log exported with semicolons and decimal commas, and as an .xlsx
    workbook (tests/reference/dialect_writers.py rewrites it), each against its reader's
    own bare read: pandas.read_csv(sep=";", decimal=",", engine="pyarrow") of the CSV, and
    python-calamine's read of the sheet into Python rows."""
    import pandas as pd
    from python_calamine import CalamineWorkbook

    from ledger.runs.actuals import summarize
    from ledger.runs.mapping import load_mapping
    from ledger.runs.skidlog import read_log

    sys.path.insert(0, str(ROOT))
    from tests.reference import dialect_writers

    geometry, ranges = _case_objects(rows)
    out: list[Row] = []
    with tempfile.TemporaryDirectory(prefix="fluxledger-bench-dialects-") as tmp:
        folder = Path(tmp)
        csv, mapping_path = _write(rows, folder)
        mapping = load_mapping(mapping_path)
        header, body = dialect_writers.read(csv)
        (semi,), _ = dialect_writers.semicolon_decimal_comma(folder, header, body, "", {})
        # the workbook holds text times (ISO 8601 with offset, as in the CSV)
        book = folder / "log.xlsx"
        _workbook(book, header, body)
        medians = alternate(
            {
                "semi_base": lambda: pd.read_csv(semi, sep=";", decimal=",", engine="pyarrow"),
                "semi": lambda: summarize(read_log(semi, mapping, wait=False), geometry, ranges),
                "book_base": lambda: (
                    CalamineWorkbook.from_path(str(book)).get_sheet_by_index(0).to_python()
                ),
                "book": lambda: summarize(read_log(book, mapping, wait=False), geometry, ranges),
            },
            max(3, repeats // 3),
        )
    # the design sets a target for the workbook; the semicolon export is shown for comparison
    for key, label, target in (
        ("semi", 'Skid-log import, ";" and decimal comma / read_csv(sep=";", decimal=",")', None),
        ("book", "Workbook import + actuals / python-calamine's bare read of the sheet", 3.0),
    ):
        m, b = medians[key][0], medians[f"{key}_base"][0]
        goal = f" (target <= {target:g}x)" if target else " (no target of its own)"
        print(f"  {label}: {m * 1e3:.0f} ms against {b * 1e3:.0f} ms, {m / b:.2f}x{goal}")
        note = f"{rows:,}-row 1 Hz log, SHA-256 on; medians"
        if target is None:
            out.append(Row(label, m * 1e3, "ms", b * 1e3, note=note))
        else:
            out.append(Row(label, m * 1e3, "ms", b * 1e3, f"<= {target:g}x baseline",
                           m / b <= target, note=note))  # fmt: skip
    return out


def _workbook(path: Path, header: list[str], body: list[list[str]]) -> None:
    import xlsxwriter

    book = xlsxwriter.Workbook(str(path), {"constant_memory": True})
    sheet = book.add_worksheet("Data")
    sheet.write_row(0, 0, header)
    for n, r in enumerate(body, start=1):
        for k, c in enumerate(r):
            try:
                sheet.write_number(n, k, float(c))
            except ValueError:
                sheet.write_string(n, k, c)
    book.close()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--repeats", type=int, default=15, help="timed calls of each (>= 7)")
    parser.add_argument("--rows", type=int, default=86_400, help="rows of the timed log")
    parser.add_argument("--memory-rows", type=int, default=1_000_000,
                        help="rows of the peak-memory log (0 skips it)")  # fmt: skip
    args = parser.parse_args(argv)
    found = run(max(args.repeats, 7), args.rows, args.memory_rows)
    return 0 if all(r.ok is not False for r in found) else 1


if __name__ == "__main__":
    sys.exit(main())
