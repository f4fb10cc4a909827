"""A hand-made batch-record context for renderer and seal tests (invented values, demo only).

``sample_context(log_seconds=...)`` gives a complete context with three charts whose series
come from a synthetic 1 Hz log of that length, downsampled by ledger.records.downsample.
"""

from __future__ import annotations

import math

from ledger.records import context as c


def _series(
    name: str,
    title: str,
    unit: str,
    scale: float,
    seconds: int,
    base: float,
    swing: float,
    bands: tuple[c.Band, ...],
) -> c.Series:
    from ledger.records.downsample import min_max

    t = [float(i) for i in range(seconds)]
    y = [
        base + swing * math.sin(i / 600.0) + (swing * 3 if 3000 <= i < 3024 else 0.0)
        for i in range(seconds)
    ]
    t_s, low, high = min_max(t, y, buckets=400)
    third = seconds / 3
    return c.Series(
        name=name,
        title=title,
        unit=unit,
        scale=scale,
        t_s=tuple(t_s),
        low=tuple(low),
        high=tuple(high),
        raw_points=seconds,
        bands=bands,
        phases=(
            ("concentrate", 0.0, third),
            ("diafilter", third, 2 * third),
            ("concentrate_final", 2 * third, float(seconds)),
        ),
    )


def sample_context(log_seconds: int = 7200, checks: int = 24, audit_rows: int = 60) -> c.Context:
    header = c.Header(
        record_id="BR-000007",
        revision=2,
        revision_reason="QC pH result corrected (typo)",
        run_id=7,
        product="QB-117",
        lot="QB117-26-011",
        status="in_review",
        template_id="QB-MR-LNP-101",
        template_version="4",
        template_title="LNP buffer exchange and concentration",
        template_sha256="ab" * 32,
        module_serial="QMB-0142",
        module_type="QHF-750K-105",
        module_area="0.105 m²",
        cycle=5,
        planned_by="eng.lindqvist",
        planned_at="2026-11-28T09:00:00+00:00",
        started_at="2026-11-28T10:00:00+00:00",
        finished_at="2026-11-28T12:00:00+00:00",
        submitted_at="2026-11-28T13:00:00+00:00",
        skid_log="qb117-26-011_skid_export.csv (7,200 rows, SHA-256 3f9a1c…)",
        override_reason=None,
    )
    verdicts = ("PASS", "FAIL", "MISSING")
    rows = tuple(
        c.CheckRow(
            name=f"param_{i}",
            source="parameter" if i < checks - 6 else "qc",
            title=f"Parameter number {i} with a long descriptive title",
            phase="diafilter",
            planned=f"{i * 1.5:.3g} bar",
            actual=f"{i * 1.47:.3g} bar",
            rule="±10 % of plan",
            verdict=verdicts[i % 3] if i < 3 else "PASS",
            note="no skid log imported" if i == 2 else "",
            deviation=1 if i == 1 else None,
            deviation_closed=i == 1,
        )
        for i in range(checks)
    )
    history = c.History(
        cycles_done=5,
        reuse_limit=50,
        recovery_min=0.80,
        recovery_alert=0.90,
        recent_cycles=tuple(
            c.CycleRow(
                cycle=k,
                product="QB-117",
                lot=f"QB117-26-00{k}",
                started_at=f"2026-11-2{k}T10:00:00+00:00",
                ended_at=f"2026-11-2{k}T12:00:00+00:00",
                this_run=k == 5,
            )
            for k in range(1, 6)
        ),
        recovery=tuple(
            c.RecoveryPoint(
                cycle=k,
                at=f"2026-11-2{k}T15:00:00+00:00",
                nwp=f"{620 - 9 * k} LMH/bar at 20 °C",
                recovery=1.0 - 0.03 * k,
                verdict="pass" if k < 4 else "alert",
            )
            for k in range(0, 5)
        ),
        last_integrity=c.IntegrityRow(
            at="2026-11-28T09:30:00+00:00",
            kind="pressure decay",
            result="0.52 mbar/min",
            limit="≤ 1.2 mbar/min",
            passed=True,
        ),
        cleanings=(
            c.CleaningRow(
                at="2026-11-27T15:00:00+00:00",
                agent="NaOH",
                concentration="0.5 mol/L",
                temperature="25 °C",
                contact_time="60 min",
                conforms="yes",
            ),
        ),
    )
    bar = 1e5
    charts = (
        _series(
            "tmp",
            "TMP",
            "bar",
            1 / bar,
            log_seconds,
            0.3 * bar,
            0.05 * bar,
            (c.Band("diafilter", 0.2 * bar, 0.45 * bar),),
        ),
        _series("flux", "Permeate flux", "LMH", 3.6e6, log_seconds, 40 / 3.6e6, 5 / 3.6e6, ()),
        _series(
            "retentate_volume", "Retentate volume", "L", 1000.0, log_seconds, 0.6e-3, 0.2e-3, ()
        ),
    )
    return c.Context(
        header=header,
        steps=(
            c.Step(
                "Preparation",
                "equilibrate",
                "Flush and equilibrate",
                "Flush with 2.0 L of buffer at 410 mL/min.",
                ("performed",),
                False,
            ),
            c.Step(
                "Buffer exchange",
                "diafilter",
                "Diafilter into storage buffer",
                "Diafilter with 7.2 L (6.0 diavolumes) at constant volume.",
                ("performed", "verified"),
                False,
            ),
            c.Step(
                "Cleaning",
                "clean",
                "Clean after use",
                "Recirculate 0.5 mol/L NaOH for 60 min at 25 °C.",
                ("performed",),
                True,
            ),
        ),
        checks=rows,
        excursions=(
            c.ExcursionRow(
                "tmp", "tmp", "diafilter", "00:50:00", "24 s", "0.51 bar", "0.20–0.45 bar"
            ),
        ),
        qc=(
            c.QcRow(
                "particle_size",
                "Particle size (Z-average)",
                "60–100 nm",
                "78 nm",
                "DLS",
                "op.brandt",
                "2026-11-28T12:30:00+00:00",
                "PASS",
            ),
            c.QcRow("ph", "pH", "7.0–7.8", "—", None, None, None, "MISSING"),
        ),
        deviations=(
            c.DeviationRow(
                1,
                "param_1",
                "TMP rose above the range for 24 s.",
                "none expected",
                "op.brandt",
                "2026-11-28T12:40:00+00:00",
                "eng.lindqvist",
                "2026-11-28T12:50:00+00:00",
                "Line re-routed.",
            ),
        ),
        history=history,
        charts=charts,
        audit=tuple(
            c.AuditRow(
                seq=100 + i,
                at="2026-11-28T12:00:00+00:00",
                actor="op.brandt",
                action="change",
                entity="run",
                entity_id="7",
                field="status",
                old='"in_progress"',
                new='"finished"',
                reason="run finished",
            )
            for i in range(audit_rows)
        ),
        required_signatures=("performed", "verified", "reviewed", "approved"),
        signature_roles={
            "performed": ("operator", "engineer"),
            "verified": ("operator", "engineer", "qa"),
            "reviewed": ("engineer", "qa"),
            "approved": ("qa",),
        },
        assumptions=("permeate volume integrated from the permeate flow",),
        cautions=(c.SITE_CAUTION, c.CAUSTIC_CAUTION),
        signatures=(
            c.SignatureRow(
                11,
                1,
                "performed",
                "op.brandt",
                "Jonas Brandt",
                "operator",
                "2026-11-28T13:05:00+00:00",
                "cd" * 32,
            ),
            c.SignatureRow(
                14,
                2,
                "performed",
                "op.brandt",
                "Jonas Brandt",
                "operator",
                "2026-11-29T09:05:00+00:00",
                "ef" * 32,
            ),
        ),
    )
