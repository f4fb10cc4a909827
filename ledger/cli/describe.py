"""Reports on logbook records: one-line outcomes, a module's history, the fitness verdict."""

from __future__ import annotations

from typing import Any

from ledger.cli.output import Q, Report, Table, human

SITE_NOTE = (
    "Acceptance limits come from the site's validated procedures and its quality unit; "
    "fluxledger applies them and supports, but does not make, the decision."
)


def _pct(x: float | None) -> str:
    return "—" if x is None else f"{100 * x:.1f} %"


def water_line(t: Any) -> str:
    """One line for a recorded water-flux test."""
    text = (
        f"water-flux test {t.id} ({t.stage.replace('_', '-')}): NWP "
        f"{human(Q(t.nwp_m_s_pa, 'permeability'))} at "
        f"{human(Q(t.reference_temperature_k, 'temperature'))}, TMP "
        f"{human(Q(t.tmp_pa, 'pressure'))}, flux {human(Q(t.flux_m_s, 'flux'))}"
    )
    if t.r_squared is not None:
        text += f", r² {t.r_squared:.4f}"
    if t.recovery is not None:
        text += f"; {_pct(t.recovery)} of baseline"
    if t.verdict:
        text += f" — {t.verdict}"
    if t.late:
        text += " (late entry)"
    return text


def integrity_line(t: Any) -> str:
    if t.kind == "bubble_point":
        text = (
            f"integrity test {t.id} (bubble point): "
            f"{human(Q(t.bubble_point_pa, 'pressure', 'psi'))}"
            f", minimum {human(Q(t.limit_value, 'pressure', 'psi'))}"
        )
    else:
        text = (
            f"integrity test {t.id} (pressure decay): "
            f"{human(Q(t.decay_rate_pa_s, 'pressure_rate'))} at "
            f"{human(Q(t.test_pressure_pa, 'pressure', 'psi'))}, limit "
            f"{human(Q(t.limit_value, 'pressure_rate'))}"
        )
        if t.gas_flow_m3_s is not None:
            text += f", gas flow {human(Q(t.gas_flow_m3_s, 'gas_flow'))}"
    text += " — " + ("pass" if t.passed else "FAIL")
    if t.late:
        text += " (late entry)"
    return text


def _summary(kind: str, rec: Any) -> tuple[str, Any, str]:
    """(what, value, result) of one history entry."""
    if kind == "water-test":
        result = f"{_pct(rec.recovery)} of baseline" if rec.recovery is not None else ""
        if rec.verdict:
            result = f"{result}, {rec.verdict}"
        return rec.stage.replace("_", "-"), Q(rec.nwp_m_s_pa, "permeability"), result
    if kind == "integrity-test":
        value = (
            Q(rec.bubble_point_pa, "pressure", "psi")
            if rec.kind == "bubble_point"
            else Q(rec.decay_rate_pa_s, "pressure_rate")
        )
        return rec.kind.replace("_", "-"), value, "pass" if rec.passed else "FAIL"
    if kind == "cleaning":
        return (
            rec.agent,
            Q(rec.temperature_k, "temperature"),
            f"{human(Q(rec.contact_time_s, 'time'))}, reagent lot {rec.reagent_lot}",
        )
    if kind == "storage":
        return rec.solution, None, ""
    if kind == "use":
        ended = rec.ended_at.strftime("%Y-%m-%d %H:%M") if rec.ended_at else "open"
        override = f"; override: {rec.override_reason}" if rec.override_reason else ""
        return f"{rec.product} lot {rec.lot}", None, f"ended {ended}{override}"
    if kind == "hold":
        decided = (
            f"{rec.decision}, signed by {rec.decided_by}"
            if rec.decision
            else "open: needs a disposition"
        )
        return f"{rec.cause} hold: {rec.reason}", None, decided
    return kind, None, ""


def history_report(session: Any, serial: str) -> Report:
    from ledger.logbook import latest
    from ledger.logbook.history import module_history
    from ledger.store.tables import ModuleType

    module, entries = module_history(session, serial)
    mtype = session.get(ModuleType, module.type_id)
    report = Report("module show")
    s = report.section("Module")
    s.add("serial", module.serial)
    s.add("type", mtype.code)
    s.add("status", module.status)
    s.add("cycles", f"{latest.cycles(session, module.id)} of {mtype.reuse_limit_cycles}")
    s.add("dedicated_product", module.dedicated_product, "dedicated to")
    s.add("manufacturer_lot", module.manufacturer_lot, "manufacturer lot")
    s.add("received_on", module.received_on.isoformat() if module.received_on else None, "received")
    table = Table(
        "History",
        [
            ("at", "when (UTC)"),
            ("record", "record"),
            ("what", "what"),
            ("value", "value"),
            ("result", "result"),
        ],
    )
    for e in entries:
        what, value, result = _summary(e.kind, e.record)
        flags = [result] if result else []
        if getattr(e.record, "late", False):
            flags.append("late")
        if getattr(e.record, "voided_at", None) is not None:
            flags.append(f"VOID: {e.record.void_reason}")
        table.rows.append(
            [
                e.at,
                f"{e.kind} {e.record_id}",
                what,
                value,
                "; ".join(flags),
            ]
        )
    report.tables.append(table)
    report.notes.append(SITE_NOTE)
    return report


def fitness_report(v: Any, product: str | None) -> Report:
    report = Report("fitness", verdict=v.word)
    s = report.section("Module")
    s.add("serial", v.serial)
    if product:
        s.add("product", product)
    table = Table("Reasons", [("check", "check"), ("outcome", "outcome"), ("reason", "reason")])
    for r in v.reasons:
        table.rows.append([r.check, r.outcome, r.message])
    report.tables.append(table)
    report.notes.append(SITE_NOTE)
    return report
