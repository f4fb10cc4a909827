"""Reports on logbook records: one-line outcomes, a module's history, the fitness verdict."""

from __future__ import annotations

from typing import Any

from ledger.cli.output import Q, Report, Table, human

SITE_NOTE = (
    "Acceptance limits come from the site's validated procedures and its quality unit; "
    "fluxledger applies them and supports, but does not make, the decision."
)


# Column-name suffixes (SI names end in their unit) and the kind they hold.
_SUFFIX_KINDS = (
    ("_m_s_pa", "permeability"),
    ("_pa_s", "pressure_rate"),
    ("_m3_s", "flow"),
    ("_s_m", "conductivity"),
    ("_per_m", "resistance"),
    ("_m_s", "flux"),
    ("_m3", "volume"),
    ("_m2", "area"),
    ("_pa", "pressure"),
    ("_k", "temperature"),
    ("_s", "time"),
    ("_m", "length"),
)
_NAMED_KINDS = {"recovery": "fraction", "recovery_min": "fraction",
                "recovery_alert": "fraction", "damage_ratio": "fraction",
                "preuse_band": "fraction"}  # fmt: skip


def quantity_of(name: str, value: Any) -> tuple[str, Any]:
    """(JSON key, value): an SI float becomes a quantity by its column's unit suffix, and the
    key loses the suffix ("temperature_k" -> "temperature": {"value": 20.0, "unit": "degC"})."""
    if isinstance(value, bool):
        return name, value
    kind, key = _NAMED_KINDS.get(name), name
    if kind is None:
        for suffix, k in _SUFFIX_KINDS:
            if name.endswith(suffix):
                kind, key = k, name[: -len(suffix)]
                break
    if kind is None:
        return name, value
    if not isinstance(value, int | float):
        return key, value  # None stays None
    return key, Q(float(value), kind)


def shown_q(
    rec: Any,
    column: str,
    kind: str,
    site: dict[str, str] | None = None,
    default: str | None = None,
) -> Q | None:
    """The stored value of ``column`` as people read it: as typed (the record's ``entered``),
    else in the unit :func:`ledger.units.display_unit` picks (``default`` instead of the
    kind's own when neither the record nor the site names one). None stays None."""
    from ledger import units
    from ledger.audittext import entered_key, typed_units

    value = getattr(rec, column)
    if value is None:
        return None
    entered = getattr(rec, "entered", None) or {}
    text = entered.get(entered_key(column))
    columns = {c.name: getattr(rec, c.name) for c in rec.__table__.columns}
    typed = [] if text else typed_units(columns).get(kind, [])
    if default is not None and not typed and not (site and site.get(kind)):
        unit = default
    else:
        unit = units.display_unit(kind, site, typed)
    return Q(float(value), kind, unit, entered=str(text) if text else None)


def record_json(record: Any) -> dict[str, Any]:
    """Every column of a record, quantities with their units, points and readings included."""
    out: dict[str, Any] = {}
    for column in record.__table__.columns:
        value = getattr(record, column.name)
        if column.name == "points" and value:
            value = [dict(quantity_of(k, v) for k, v in point.items()) for point in value]
        elif column.name == "readings" and value:
            value = [{"time": Q(t, "time", "s"), "pressure": Q(p, "pressure", "psi")}
                     for t, p in value]  # fmt: skip
        key, shown = quantity_of(column.name, value)
        out[key] = shown
    if getattr(record, "kind", None) == "pressure_decay" and "limit_value" in out:
        out["limit_value"] = Q(record.limit_value, "pressure_rate")
    elif getattr(record, "kind", None) == "bubble_point" and "limit_value" in out:
        out["limit_value"] = Q(record.limit_value, "pressure", "psi")
    elif getattr(record, "kind", None) in _FLOW_COLUMNS and "limit_value" in out:
        flow, limit = flow_values(record)
        out[_FLOW_COLUMNS[record.kind].removesuffix("_m3_s")] = flow
        out["limit_value"] = limit
    return out


# Flow-type integrity tests: the column holding the flow, and the test's name in words.
_FLOW_COLUMNS = {"diffusion": "gas_flow_m3_s", "water_intrusion": "intrusion_flow_m3_s"}
_FLOW_WORDS = {"diffusion": "diffusion", "water_intrusion": "water intrusion"}


def flow_values(t: Any, site: dict[str, str] | None = None) -> tuple[Q | None, Q]:
    """(flow, limit) of a diffusion or water-intrusion test: the flow as typed or in the
    display unit, the limit (m³/s stored) in the unit the flow was typed in, else the same."""
    from ledger import units

    flow = shown_q(t, _FLOW_COLUMNS[t.kind], "flow", site)
    unit = flow.unit if flow is not None else None
    if flow is not None and flow.entered:
        unit = units.entered_unit(flow.entered) or unit
    return flow, Q(t.limit_value, "flow", unit)


def _pct(x: float | None) -> str:
    return "—" if x is None else f"{100 * x:.1f} %"


def water_line(t: Any, site: dict[str, str] | None = None) -> str:
    """One line for a recorded water-flux test (``site``: the site's display units)."""
    text = (
        f"water-flux test {t.id} ({t.stage.replace('_', '-')}): NWP "
        f"{human(shown_q(t, 'nwp_m_s_pa', 'permeability', site))} at "
        f"{human(shown_q(t, 'reference_temperature_k', 'temperature', site))}, TMP "
        f"{human(shown_q(t, 'tmp_pa', 'pressure', site))}, "
        f"flux {human(shown_q(t, 'flux_m_s', 'flux', site))}"
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


def _rate_unit(t: Any, site: dict[str, str] | None) -> str | None:
    """A decay rate in the units typed for its pressures and hold ("psi" and "min" ->
    "psi/min"); None when nothing was typed for them."""
    from ledger.audittext import typed_units

    columns = {c.name: getattr(t, c.name) for c in t.__table__.columns}
    typed = typed_units(columns)
    pressures = set(typed.get("pressure", []))
    if len(pressures) != 1:
        return None
    times = set(typed.get("time", [])) or {"min"}
    return f"{pressures.pop()}/{times.pop() if len(times) == 1 else 'min'}"


def integrity_line(t: Any, site: dict[str, str] | None = None) -> str:
    """One line for a recorded integrity test (``site``: the site's display units)."""
    if t.kind == "bubble_point":
        text = (
            f"integrity test {t.id} (bubble point): "
            f"{human(shown_q(t, 'bubble_point_pa', 'pressure', site, 'psi'))}"
            f", minimum {human(Q(t.limit_value, 'pressure', _site(site, 'pressure', 'psi')))}"
        )
    elif t.kind in _FLOW_COLUMNS:
        flow, limit = flow_values(t, site)
        text = (
            f"integrity test {t.id} ({_FLOW_WORDS[t.kind]}): {human(flow)} at "
            f"{human(shown_q(t, 'test_pressure_pa', 'pressure', site, 'psi'))}, limit "
            f"{human(limit)}"
        )
        if t.decay_rate_pa_s is not None:
            from ledger import units

            rate = _rate_unit(t, site)
            unit = units.display_unit("pressure_rate", site, [rate] if rate else [])
            text += f", from a decay of {human(Q(t.decay_rate_pa_s, 'pressure_rate', unit))}"
    else:
        from ledger import units

        rate = _rate_unit(t, site)
        rate_unit = units.display_unit("pressure_rate", site, [rate] if rate else [])
        text = (
            f"integrity test {t.id} (pressure decay): "
            f"{human(Q(t.decay_rate_pa_s, 'pressure_rate', rate_unit))} at "
            f"{human(shown_q(t, 'test_pressure_pa', 'pressure', site, 'psi'))}, limit "
            f"{human(Q(t.limit_value, 'pressure_rate', rate_unit))}"
        )
        if t.gas_flow_m3_s is not None:
            text += f", gas flow {human(shown_q(t, 'gas_flow_m3_s', 'gas_flow', site))}"
    text += " — " + ("pass" if t.passed else "FAIL")
    if t.late:
        text += " (late entry)"
    return text


def _site(site: dict[str, str] | None, kind: str, default: str) -> str:
    return (site or {}).get(kind) or default


def _summary(kind: str, rec: Any, site: dict[str, str] | None = None) -> tuple[str, Any, str]:
    """(what, value, result) of one history entry (``site``: the site's display units)."""
    if kind == "water-test":
        result = f"{_pct(rec.recovery)} of baseline" if rec.recovery is not None else ""
        if rec.verdict:
            result = f"{result}, {rec.verdict}"
        return rec.stage.replace("_", "-"), shown_q(rec, "nwp_m_s_pa", "permeability", site), result
    if kind == "integrity-test":
        if rec.kind == "bubble_point":
            value = shown_q(rec, "bubble_point_pa", "pressure", site, "psi")
        elif rec.kind in _FLOW_COLUMNS:
            value = flow_values(rec, site)[0]
        else:
            from ledger import units

            rate = _rate_unit(rec, site)
            unit = units.display_unit("pressure_rate", site, [rate] if rate else [])
            value = Q(rec.decay_rate_pa_s, "pressure_rate", unit)
        return rec.kind.replace("_", "-"), value, "pass" if rec.passed else "FAIL"
    if kind == "cleaning" and getattr(rec, "procedure_version_id", None) is not None:
        solutions = "" if rec.reagent_lot == "—" else f", solutions {rec.reagent_lot}"
        return (
            f"cycle: {rec.agent}",
            None,
            f"total contact {human(shown_q(rec, 'contact_time_s', 'time', site))}{solutions}",
        )
    if kind == "cleaning":
        strength = _strength(rec, site)
        return (
            rec.agent,
            shown_q(rec, "temperature_k", "temperature", site),
            f"{strength}, {human(shown_q(rec, 'contact_time_s', 'time', site))}, "
            f"reagent lot {rec.reagent_lot}",
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


_ENDPOINT_WORDS = {"ph": "pH", "conductivity": "conductivity", "toc": "TOC", "volume": "volume"}
_ENDPOINT_QKINDS = {"conductivity": "conductivity", "toc": "concentration", "volume": "volume"}


def step_text(step: Any, site: dict[str, str] | None = None) -> str:
    """One cleaning-cycle step as done: its values as typed (else in display units), its
    endpoint, and whether it kept its procedure step ("conforms") or how it departed."""
    what = f"({step.agent}, solution {step.solution_code})" if step.solution_code else (
        f"({step.agent})")  # fmt: skip
    return f"step {step.number} {step.name} {what}: {step_values(step, site)}"


def step_values(step: Any, site: dict[str, str] | None = None) -> str:
    """A cycle step's values and verdict, without its name (see :func:`step_text`)."""
    parts = []
    if step.concentration is not None:
        parts.append(_strength(step, site))
    for column, kind in (("temperature_k", "temperature"), ("contact_time_s", "time"),
                         ("flow_m3_s", "flow"), ("tmp_pa", "pressure")):  # fmt: skip
        if getattr(step, column) is not None:
            parts.append(human(shown_q(step, column, kind, site)))
    if step.endpoint_kind is not None and step.endpoint_value is not None:
        typed = (step.entered or {}).get("endpoint")
        if step.endpoint_kind == "ph":
            value = typed or f"{step.endpoint_value:g}"
        else:
            qkind = _ENDPOINT_QKINDS[step.endpoint_kind]
            value = human(Q(step.endpoint_value, qkind, entered=typed))
        parts.append(f"endpoint {_ENDPOINT_WORDS[step.endpoint_kind]} {value}")
    verdict = "DEPARTS: " + "; ".join(step.departures) if step.departures else "conforms"
    return (", ".join(parts) or "no values") + f" — {verdict}"


def cycle_report(
    serial: str, cleaning: Any, steps: list[Any], status: str | None, version: Any, as_json: bool
) -> None:
    """Print a recorded cleaning cycle: one line for the cycle, one per step, the status
    step, and the caution of each hazard class met (once each); or one JSON object."""
    import typer

    where = f"{version.template_id} v{version.version}" if version is not None else "?"
    if as_json:
        import json

        from ledger.cli.output import plain

        body = {
            "command": "care cycle",
            "record": plain(record_json(cleaning)),
            "procedure": {"id": version.template_id, "version": version.version,
                          "sha256": version.sha256},
            "steps": [plain({**record_json(r.row), "caution": r.caution}) for r in steps],
            "status_note": status,
        }  # fmt: skip
        typer.echo(json.dumps(body, indent=2, ensure_ascii=False))
        return
    late = " (late entry)" if cleaning.late else ""
    departed = sum(1 for r in steps if r.row.departures)
    outcome = (f"{departed} of {len(steps)} steps depart from the procedure" if departed
               else f"all {len(steps)} steps follow the procedure")  # fmt: skip
    typer.echo(f"cleaning cycle {cleaning.id} recorded for {serial} under {where}{late}: "
               f"{outcome}")  # fmt: skip
    for r in steps:
        typer.echo("  " + step_text(r.row))
    if status:
        typer.echo(f"status: {status}")
    seen: list[str] = []
    for r in steps:
        if r.caution and r.caution not in seen:
            seen.append(r.caution)
            typer.echo(r.caution)


def solution_text(row: Any, site: dict[str, str] | None = None) -> str:
    """A prepared solution in one line: agent, target and verified strength, reagent lot and
    expiry, use-by, who prepared and verified it."""
    text = (f"{row.agent}, target {_strength(row, site, 'target_concentration')}, reagent lot "
            f"{row.reagent_lot} (expires {row.reagent_expiry.isoformat()}), prepared by "
            f"{row.prepared_by}, use by {human(row.use_by)} UTC")  # fmt: skip
    if row.verified_concentration is None:
        return text + "; not verified"
    how = row.verification_method
    v = row.verification or {}
    if how == "conductivity" and v.get("conductivity_s_m") is not None:
        typed = (v.get("entered") or {}).get("conductivity")
        how += f" {human(Q(v['conductivity_s_m'], 'conductivity', entered=typed))}"
    return text + (f"; verified {_strength(row, site, 'verified_concentration')} by {how}, "
                   f"{row.verified_by}")  # fmt: skip


def solutions_report(rows: list[tuple[Any, str]]) -> Report:
    """The prepared solutions as a table, each with its state."""
    report = Report("care solution list")
    table = Table(
        "Prepared solutions",
        [("code", "code"), ("agent", "agent"), ("target", "target"), ("verified", "verified"),
         ("use_by", "use by (UTC)"), ("reagent", "reagent lot (expiry)"), ("state", "state")],
    )  # fmt: skip
    for r, state in rows:
        verified = "—"
        if r.verified_concentration is not None:
            verified = f"{_strength(r, None, 'verified_concentration')} ({r.verification_method})"
        table.rows.append([r.code, r.agent, _strength(r, None, "target_concentration"), verified,
                           r.use_by, f"{r.reagent_lot} ({r.reagent_expiry.isoformat()})",
                           state])  # fmt: skip
    report.tables.append(table)
    from ledger.rules.hazards import cautions_for

    report.notes += [*cautions_for([r.agent for r, _ in rows]), SITE_NOTE]
    return report


def _strength(rec: Any, site: dict[str, str] | None, column: str = "concentration") -> str:
    """A concentration (a cleaning's, a procedure's limit) as typed, else in its kind's
    display unit; its kind comes from the record's ``concentration_unit``."""
    kind = _CONCENTRATION_KINDS.get(rec.concentration_unit, "fraction")
    return human(shown_q(rec, column, kind, site))


_CONCENTRATION_KINDS = {"mol/m**3": "molarity", "kg/m**3": "concentration", "": "fraction"}


def history_report(session: Any, serial: str) -> Report:
    from ledger.logbook import latest
    from ledger.logbook.history import module_history
    from ledger.logbook.modules import list_types, row_id
    from ledger.logbook.site import display_units

    site = display_units(session)
    module, entries = module_history(session, serial)
    mtype = next(t for t in list_types(session) if t.id == module.type_id)
    report = Report("module show")
    s = report.section("Module")
    s.add("serial", module.serial)
    s.add("type", mtype.code)
    s.add("status", module.status)
    cycles = latest.cycles(session, row_id(module.id))
    s.add("cycles", f"{cycles} of {mtype.reuse_limit_cycles}")
    s.add("dedicated_product", module.dedicated_product, "dedicated to")
    s.add("manufacturer_lot", module.manufacturer_lot, "manufacturer lot")
    s.add("received_on", module.received_on.isoformat() if module.received_on else None, "received")
    base = latest.water(session, row_id(module.id), "baseline")
    post = latest.water(session, row_id(module.id), "post_clean")
    s.add("baseline_nwp", shown_q(base, "nwp_m_s_pa", "permeability", site) if base else None,
          "baseline NWP")  # fmt: skip
    s.add("last_recovery", Q(post.recovery, "fraction") if post and post.recovery else None,
          "last post-clean recovery")  # fmt: skip
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
    from ledger.logbook.cycles import steps_of

    agents: list[str] = []
    for e in entries:
        what, value, result = _summary(e.kind, e.record, site)
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
        if e.kind == "cleaning" and getattr(e.record, "procedure_version_id", None) is not None:
            for step in steps_of(session, e.record.id):
                agents.append(step.agent)
                solution = f", solution {step.solution_code}" if step.solution_code else ""
                done = f"{step.agent}{solution}: {step_values(step, site)}"
                table.rows.append(["", "", f"  step {step.number} {step.name}", "", done])
        elif e.kind == "cleaning":
            agents.append(e.record.agent)
    report.tables.append(table)
    from ledger.logbook.site import agent_hazards
    from ledger.rules.hazards import cautions_for

    agents += [e.record.solution for e in entries if e.kind == "storage"]
    report.notes += [*cautions_for(agents, agent_hazards(session)), SITE_NOTE]
    return report


def _number(x: float | None, kind: str | None) -> Any:
    if x is None or kind is None:
        return None
    if kind == "count":
        return int(x)
    return Q(x, kind, "d" if kind == "time" else None)


def fitness_report(v: Any, product: str | None) -> Report:
    report = Report("fitness", verdict=v.word)
    s = report.section("Module")
    s.add("serial", v.serial)
    if product:
        s.add("product", product)
    table = Table(
        "Reasons",
        [("check", "check"), ("outcome", "outcome"), ("reason", "reason"), ("value", "value"),
         ("limit", "limit")],
        json_only=frozenset({"value", "limit"}),
    )  # fmt: skip
    for r in v.reasons:
        table.rows.append(
            [r.check, r.outcome, r.message, _number(r.value, r.kind), _number(r.limit, r.kind)]
        )
    report.tables.append(table)
    report.notes.append(SITE_NOTE)
    return report


def finish(
    command: str,
    record: Any,
    line: str,
    note: str | None,
    as_json: bool,
    caution: str | None = None,
) -> None:
    """Print what was recorded: one line (the status step, the agent's caution), or one JSON
    object."""
    import typer

    if as_json:
        import json

        from ledger.cli.output import plain

        body = {"command": command, "record": plain(record_json(record)), "status_note": note}
        if caution is not None:
            body["caution"] = caution
        typer.echo(json.dumps(body, indent=2, ensure_ascii=False))
        return
    typer.echo(line)
    if note:
        typer.echo(f"status: {note}")
    if caution:
        typer.echo(caution)


def procedure_row(p: Any) -> list[Any]:
    """One cleaning procedure as a table row: code, agent and its ranges."""
    rinse = []
    if p.rinse_ph_min is not None or p.rinse_ph_max is not None:
        rinse.append(f"pH {p.rinse_ph_min if p.rinse_ph_min is not None else 0:g}–"
                     f"{p.rinse_ph_max if p.rinse_ph_max is not None else 14:g}")  # fmt: skip
    if p.rinse_conductivity_max_s_m is not None:
        rinse.append(f"≤ {human(Q(p.rinse_conductivity_max_s_m, 'conductivity'))}")
    return [
        p.code,
        p.agent,
        f"{_strength(p, None, 'concentration_min')} – {_strength(p, None, 'concentration_max')}",
        f"{human(shown_q(p, 'temperature_min_k', 'temperature'))} – "
        f"{human(shown_q(p, 'temperature_max_k', 'temperature'))}",
        shown_q(p, "contact_time_min_s", "time"),
        ", ".join(rinse) or "—",
    ]
