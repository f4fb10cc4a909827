"""Batch-record PDF speed and size: the 24 h record with charts against the same record as
plain tables (DEVELOPERS.md).

What is measured, and how:

1. The context. tests/records/sample.py builds an invented record from a synthetic 24 h,
   1 Hz log (86,400 samples per channel, three charted channels: TMP, permeate flux,
   retentate volume), each downsampled to 400 min/max buckets; 24 checks, 60 audit rows,
   five cycles of module history.
2. Timing, in this one process, after a warm-up call of each (fonts registered, reportlab
   imported): ``render(ctx, charts=True)`` (the full record) and the baseline
   ``render(ctx, charts=False)`` (the same record with the charts left out), alternated call
   by call; the median and minimum of ``--repeats`` calls each (``time.perf_counter``).
   Targets: the full record under 0.5 s and under 400 KB.
3. The downsampling the charts rest on: ``min_max`` of the 86,400 raw samples of three
   channels to 400 buckets each, timed alone the same way; and how many points the charts
   draw against the raw samples they stand for.

Run alone with ``.venv/bin/python bench/records.py``.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from table import Row  # bench/table.py
from timing import alternate  # bench/timing.py

ROOT = Path(__file__).resolve().parent.parent
TARGET_S = 0.5
TARGET_BYTES = 400_000
SOFTWARE = "bench"


def run(repeats: int = 10, seconds: int = 86_400) -> list[Row]:
    """Print the figures; return them as table rows (time and size of the full record)."""
    import numpy as np

    sys.path.insert(0, str(ROOT))
    from ledger.records import charts
    from ledger.records.downsample import min_max
    from ledger.records.pdf import render
    from tests.records.sample import sample_context

    ctx = sample_context(log_seconds=seconds)
    t = np.arange(seconds, dtype=float)
    raw = [0.3 + 0.05 * np.sin(t / 600.0 + k) for k in range(3)]

    def downsample() -> None:
        for y in raw:
            min_max(t, y, buckets=400)

    full = render(ctx, software_version=SOFTWARE)
    plain = render(ctx, software_version=SOFTWARE, charts=False)
    figures = alternate(
        {
            "full": lambda: render(ctx, software_version=SOFTWARE),
            "plain": lambda: render(ctx, software_version=SOFTWARE, charts=False),
            "min_max": downsample,
        },
        repeats,
    )
    drawn = sum(charts.points_drawn(s) for s in ctx.charts)
    raw_points = sum(s.raw_points for s in ctx.charts)
    recovery = len(ctx.history.recovery)
    (f_med, f_min), (p_med, p_min), (d_med, d_min) = (
        figures["full"], figures["plain"], figures["min_max"])  # fmt: skip
    ok = f_med < TARGET_S and len(full) < TARGET_BYTES
    hours = seconds / 3600
    print(f"Batch-record PDF: {hours:g} h, 1 Hz log, {len(ctx.charts)} charts, "
          f"{len(ctx.checks)} checks, {len(ctx.audit)} audit rows")  # fmt: skip
    rows = [
        ("baseline", "render(charts=False), plain tables", (p_med, p_min), len(plain)),
        ("measured", "render(charts=True), full record", (f_med, f_min), len(full)),
    ]
    for label, what, (med, low), size in rows:
        print(f"  {label:<9} {what:<40} median {med * 1e3:7.1f} ms  (min {low * 1e3:6.1f})  "
              f"{size / 1024:6.1f} KiB")  # fmt: skip
    added_kib = (len(full) - len(plain)) / 1024
    print(f"  ratio     {f_med / p_med:.2f}x time, {len(full) / len(plain):.2f}x size; charts "
          f"add {(f_med - p_med) * 1e3:.1f} ms and {added_kib:.1f} KiB")  # fmt: skip
    print(f"  downsample min_max of {seconds:,} samples x 3 channels to 400 buckets: median "
          f"{d_med * 1e3:.1f} ms (min {d_min * 1e3:.1f})")  # fmt: skip
    print(f"  points    {drawn:,} envelope points drawn for {raw_points:,} raw samples "
          f"({raw_points / max(drawn, 1):,.0f} samples per point), plus {recovery} NWP recovery "
          f"points")  # fmt: skip
    verdict = "meets" if ok else "MISSES"
    print(f"  target    full record < {TARGET_S * 1e3:.0f} ms and < {TARGET_BYTES // 1000} KB: "
          f"{verdict} ({repeats} runs each)")  # fmt: skip
    base = "/ plain tables"
    return [
        Row(f"Batch-record PDF, {len(ctx.charts)} charts, {hours:g} h log: render {base}",
            f_med * 1e3, "ms", p_med * 1e3, f"< {TARGET_S * 1e3:.0f} ms", f_med < TARGET_S,
            note=f"in process, medians of {repeats} calls; {len(ctx.checks)} checks, "
            f"{len(ctx.audit)} audit rows; {drawn:,} chart points for {raw_points:,} samples"),
        Row(f"  its PDF size {base}", len(full) / 1000, "KB", len(plain) / 1000,
            f"< {TARGET_BYTES // 1000} KB", len(full) < TARGET_BYTES),
        Row(f"  min_max downsampling of 3 x {seconds:,} samples", d_med * 1e3, "ms"),
    ]  # fmt: skip


def _day_long_export(folder: Path, seconds: int) -> Path:
    """A QF-2 export of ``seconds`` rows at 1 Hz: the demo's run repeated back to back."""
    from datetime import UTC, datetime, timedelta

    from ledger.cli.demo_log import write_log

    start = datetime(2026, 11, 2, 8, 0, tzinfo=UTC)
    one = write_log(folder / "one.csv", start, step_s=1.0).read_text().splitlines()
    header, body = one[0], [line.split(",", 1)[1] for line in one[1:]]
    out = [header]
    from zoneinfo import ZoneInfo

    local = ZoneInfo("Europe/Dublin")
    for i in range(seconds):
        stamp = (start + timedelta(seconds=i)).astimezone(local).strftime("%d/%m/%Y %H:%M:%S")
        out.append(f"{stamp},{body[i % len(body)]}")
    path = folder / "day.csv"
    path.write_text("\n".join(out) + "\n")
    return path


def end_to_end(repeats: int, seconds: int) -> list[Row]:
    """Charts assembled from a real 24 h, 1 Hz skid export (read, derived channels,
    downsampled: ledger.records.assemble._charts) and the record rendered, in process."""
    import tempfile
    from types import SimpleNamespace

    sys.path.insert(0, str(ROOT))
    from dataclasses import replace

    from ledger.records.assemble import _charts
    from ledger.records.pdf import render
    from ledger.runs.plan import Plan
    from tests.records.sample import sample_context

    mapping = (ROOT / "sample_records" / "qf2_skid_mapping.toml").read_text()
    with tempfile.TemporaryDirectory() as tmp:
        path = _day_long_export(Path(tmp), seconds)
        content = path.read_bytes()
    import hashlib

    # A one-file log as the database holds it (no parts: _charts reads no other rows).
    log = SimpleNamespace(file_name="day.csv", content=content, mapping_text=mapping,
                          windows=None, parts=None, run_id=1, size_bytes=len(content),
                          sha256=hashlib.sha256(content).hexdigest())  # fmt: skip
    mtype = SimpleNamespace(area_m2=0.0565, fiber_count=120, lumen_diameter_m=0.5e-3)
    plan = Plan("t", "1", "0" * 64, None, {}, {}, [], [], [])  # type: ignore[arg-type]
    base = sample_context(log_seconds=60)

    def whole() -> bytes:
        ctx = replace(base, charts=_charts(None, log, mtype, plan))  # type: ignore[arg-type]
        return render(ctx, software_version=SOFTWARE)

    data = whole()
    figures = alternate({"e2e": whole,
                          "plain": lambda: render(replace(base, charts=()),
                                                  software_version=SOFTWARE, charts=False)},
                         repeats)  # fmt: skip
    (e_med, e_min), (p_med, _) = figures["e2e"], figures["plain"]
    ok = e_med < TARGET_S and len(data) < TARGET_BYTES
    print(f"Batch record from a {seconds:,}-row, 1 Hz skid export ({len(content) / 1e6:.1f} MB)")
    print(f"  baseline  plain-table record, no charts            median {p_med * 1e3:7.1f} ms")
    print(f"  measured  read log + charts + full render          median {e_med * 1e3:7.1f} ms  "
          f"(min {e_min * 1e3:6.1f})  {len(data) / 1024:6.1f} KiB")  # fmt: skip
    verdict = "meets" if ok else "MISSES"
    print(f"  ratio     {e_med / p_med:.2f}x; target < {TARGET_S * 1e3:.0f} ms and "
          f"< {TARGET_BYTES // 1000} KB: {verdict}")  # fmt: skip
    return [
        Row(f"Batch record from a {seconds:,}-row skid export, end to end / plain tables",
            e_med * 1e3, "ms", p_med * 1e3, f"< {TARGET_S * 1e3:.0f} ms", e_med < TARGET_S,
            note=f"in process: read the {len(content) / 1e6:.1f} MB export, derived channels, "
            f"downsampled charts, full render; medians of {repeats} calls"),
        Row("  its PDF size", len(data) / 1000, "KB", None, f"< {TARGET_BYTES // 1000} KB",
            len(data) < TARGET_BYTES),
    ]  # fmt: skip


def run_all(repeats: int = 10, seconds: int = 86_400) -> list[Row]:
    """Both record benchmarks, the second after a blank line."""
    rows = run(max(repeats, 3), seconds)
    print()
    return rows + end_to_end(max(repeats, 3), seconds)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--repeats", type=int, default=10, help="timed calls of each (>= 3)")
    parser.add_argument("--seconds", type=int, default=86_400,
                        help="length of the synthetic 1 Hz log")  # fmt: skip
    args = parser.parse_args(argv)
    found = run_all(args.repeats, args.seconds)
    return 0 if all(r.ok is not False for r in found) else 1


if __name__ == "__main__":
    sys.exit(main())
