"""`fluxledger module-type ...` and `fluxledger module ...`: what is on the shelf."""

from __future__ import annotations

from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded, quantity_option
from ledger.cli.describe import SITE_NOTE, finish
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, USER_OPTION, read, write

types_app = typer.Typer(
    help="Module types: geometry, membrane and the site's limits.", no_args_is_help=True
)
app = typer.Typer(
    help="Modules: register, list, show history, hold, release, retire.", no_args_is_help=True
)


@types_app.command("add")
@guarded
def type_add(
    code: str = typer.Argument(..., help="The type's code, e.g. HF-750-120."),
    membrane: str = typer.Option(..., "--membrane", help="Membrane material, e.g. mPES."),
    pore_rating: str = typer.Option(..., "--pore-rating", help="As stated: '750 kDa', '0.2 um'."),
    lumen_diameter: str = quantity_option(
        ..., "--lumen-diameter", help="Fiber lumen ID, '0.5 mm'."
    ),
    fibers: int = typer.Option(..., "--fibers", help="Number of fibers."),
    length: str = quantity_option(..., "--length", help="Effective fiber length, '30 cm'."),
    area: str | None = quantity_option(
        None,
        "--area",
        help="Membrane area, '565 cm^2' (default: fibers × π × lumen diameter × length; a "
        "stated area must agree with that within 15 %).",
    ),
    decay_limit: str = quantity_option(
        ..., "--decay-limit", help="Pressure-decay limit, e.g. '0.3 psi/min'."
    ),
    test_pressure: str = quantity_option(
        ..., "--test-pressure", help="The gauge pressure that limit holds at, e.g. '30 psi'."
    ),
    reuse_limit: int = typer.Option(..., "--reuse-limit", help="Validated reuse limit, cycles."),
    storage_limit: str = quantity_option(..., "--storage-limit", help="Longest storage, '30 d'."),
    bubble_point_min: str | None = quantity_option(
        None, "--bubble-point-min", help="Lowest passing bubble point, e.g. '50 psi'."
    ),
    supplier: str | None = typer.Option(None, "--supplier", help="Supplier (free text)."),
    max_loading: str | None = quantity_option(
        None, "--max-loading", help="Highest feed volume per area, e.g. '200 L/m^2'."
    ),
    max_mass_loading: str | None = quantity_option(
        None, "--max-mass-loading", help="Highest product mass per area, e.g. '50 g/m^2'."
    ),
    clean_hold: str | None = quantity_option(
        None,
        "--clean-hold",
        help="How recent the pre-use water-flux and integrity tests must be when a run "
        "starts, e.g. '72 h' (default: the storage limit).",
    ),
    reference_temperature: str | None = quantity_option(
        None,
        "--reference-temperature",
        help="T_ref of NWP (default 20 degC).",
    ),
    recovery_min: str | None = quantity_option(
        None, "--recovery-min", help="Post-clean recovery minimum (default 80 %)."
    ),
    recovery_alert: str | None = quantity_option(
        None, "--recovery-alert", help="Alert below (default 90 %)."
    ),
    damage_ratio: str | None = quantity_option(
        None,
        "--damage-ratio",
        help="NWP above this share of baseline suggests damage (default 120 %).",
    ),
    preuse_band: str | None = quantity_option(
        None,
        "--preuse-band",
        help="Pre-use NWP band around the last post-clean (default ±10 %).",
    ),
    diffusion_max_flow: str | None = quantity_option(
        None, "--diffusion-max-flow", help="Highest passing diffusion flow, e.g. '12 mL/min'."
    ),
    diffusion_test_pressure: str | None = quantity_option(
        None,
        "--diffusion-test-pressure",
        help="The gauge pressure the diffusion limit holds at, e.g. '2.5 bar'.",
    ),
    intrusion_max_flow: str | None = quantity_option(
        None, "--intrusion-max-flow", help="Highest passing water-intrusion flow, '0.3 mL/min'."
    ),
    intrusion_test_pressure: str | None = quantity_option(
        None,
        "--intrusion-test-pressure",
        help="The gauge pressure the water-intrusion limit holds at, e.g. '2.5 bar'.",
    ),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Define a module type. The limits are your site's validated ones; defaults are common
    practice only."""
    from ledger.entries.modules import module_type
    from ledger.logbook.modules import add_type

    spec = module_type(locals())
    created = write(db, user, password_stdin, lambda s, a: add_type(s, a, spec))
    finish("module-type add", created, f"added module type {created.code}", None, as_json)


def _type_report(t: Any, site: dict[str, str] | None = None, version: Any = None) -> Any:
    """A module type's report: each value as typed, else in the site's display unit (``site``,
    kind -> unit) or the unit this screen has always used."""
    from ledger.cli.describe import shown_q
    from ledger.cli.output import Report

    def q(column: str, kind: str, default: str | None = None) -> Any:
        return shown_q(t, column, kind, site, default)

    report = Report("module-type show")
    g = report.section(f"Module type {t.code}")
    g.add("code", t.code)
    g.add("supplier", t.supplier)
    g.add("membrane", t.membrane)
    g.add("pore_rating", t.pore_rating, "pore rating")
    g.add("lumen_diameter", q("lumen_diameter_m", "length"), "lumen diameter")
    g.add("fibers", t.fiber_count)
    g.add("length", q("effective_length_m", "fiber_length"), "effective length")
    g.add("area", q("area_m2", "area"))
    lim = report.section("Site limits")
    in_force = "as registered"
    if version is not None:
        since = version.effective_from.isoformat(timespec="seconds")
        in_force = f"version {version.version}, effective from {since}, by {version.approved_by}"
    lim.add("limits_version", in_force, "limits version in force")
    lim.add(
        "reference_temperature",
        q("reference_temperature_k", "temperature"),
        "NWP reference temperature",
    )
    lim.add("recovery_min", q("recovery_min", "fraction"), "post-clean recovery minimum")
    lim.add("recovery_alert", q("recovery_alert", "fraction"), "recovery alert below")
    lim.add("damage_ratio", q("damage_ratio", "fraction"), "damage suspected above")
    lim.add("preuse_band", q("preuse_band", "fraction"), "pre-use band ±")
    lim.add("decay_limit", q("decay_limit_pa_s", "pressure_rate"), "pressure-decay limit")
    lim.add("test_pressure", q("integrity_test_pressure_pa", "pressure", "psi"), "at test pressure")
    if t.bubble_point_min_pa is not None:
        lim.add(
            "bubble_point_min", q("bubble_point_min_pa", "pressure", "psi"), "bubble point minimum"
        )
    if t.diffusion_max_flow_m3_s is not None:
        lim.add("diffusion_max_flow", q("diffusion_max_flow_m3_s", "gas_flow"), "diffusion limit")
        lim.add(
            "diffusion_test_pressure",
            q("diffusion_test_pressure_pa", "pressure", "psi"),
            "at diffusion test pressure",
        )
    if t.intrusion_max_flow_m3_s is not None:
        lim.add("intrusion_max_flow", q("intrusion_max_flow_m3_s", "flow"), "water-intrusion limit")
        lim.add(
            "intrusion_test_pressure",
            q("intrusion_test_pressure_pa", "pressure", "psi"),
            "at water-intrusion test pressure",
        )
    lim.add("reuse_limit", t.reuse_limit_cycles, "validated reuse limit (cycles)")
    lim.add("storage_limit", q("storage_limit_s", "time", "d"), "storage limit")
    if t.clean_hold_s is not None:
        lim.add("clean_hold", q("clean_hold_s", "time", "h"), "clean-hold window")
    if t.max_volume_loading_m is not None:
        lim.add("max_loading", q("max_volume_loading_m", "areal_volume"), "maximum loading")
    if t.max_mass_loading_kg_m2 is not None:
        lim.add("max_mass_loading", q("max_mass_loading_kg_m2", "areal_mass"), "maximum mass")
    report.notes.append(SITE_NOTE)
    return report


@types_app.command("show")
@guarded
def type_show(
    code: str = typer.Argument(...), db: str | None = DB_OPTION, as_json: bool = JSON_OPTION
) -> None:
    """Show a module type and the limits in force now (and which version they are)."""
    from ledger.logbook.site import display_units
    from ledger.logbook.typelimits import type_in_force

    def work(s: Any) -> Any:
        mtype, version = type_in_force(s, code)
        return _type_report(mtype, display_units(s), version)

    read(db, work).print(as_json)


def _limits_app() -> typer.Typer:
    from ledger.cli.templates import controlled_app

    return controlled_app("module-type limits", "module-type limits", "type", "QM-HF750-S",
                          "ledger.logbook.typelimits", "tests judged")  # fmt: skip


types_app.add_typer(_limits_app(), name="limits")


@types_app.command("list")
@guarded
def type_list(db: str | None = DB_OPTION, as_json: bool = JSON_OPTION) -> None:
    """List module types."""
    from ledger.cli.output import Q, Report, Table
    from ledger.logbook.modules import list_types

    report = Report("module-type list")
    table = Table(
        "Module types",
        [
            ("code", "code"),
            ("membrane", "membrane"),
            ("pore_rating", "pore rating"),
            ("area", "area"),
            ("reuse_limit", "reuse limit"),
        ],
    )
    for t in read(db, list_types):
        table.rows.append(
            [t.code, t.membrane, t.pore_rating, Q(t.area_m2, "area"), t.reuse_limit_cycles]
        )
    report.tables.append(table)
    report.print(as_json)


@app.command("add")
@guarded
def module_add(
    serial: str = typer.Argument(..., help="The module's serial number."),
    type_code: str = typer.Option(..., "--type", help="Its module type code."),
    manufacturer_lot: str | None = typer.Option(None, "--manufacturer-lot", help="Free text."),
    received: str | None = typer.Option(None, "--received", help="Date received, 2026-11-03."),
    note: str | None = typer.Option(None, "--note"),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Register a module. It starts in commissioning: baseline water flux and integrity next."""
    from ledger.entries.modules import module
    from ledger.logbook.modules import add_module

    e = module(locals())
    created = write(
        db,
        user,
        password_stdin,
        lambda s, a: add_module(
            s, a, e.serial, e.type_code, manufacturer_lot=e.manufacturer_lot,
            received_on=e.received_on, note=e.note,
        ),
    )  # fmt: skip
    line = (
        f"registered module {created.serial} ({type_code}): commissioning — record a "
        "baseline water-flux test and an integrity test next"
    )
    finish("module add", created, line, None, as_json)


@app.command("list")
@guarded
def module_list(
    status: str | None = typer.Option(None, "--status", help="Only modules with this status."),
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """List modules with their type, status, product and cycles."""
    from ledger.cli.output import Report, Table
    from ledger.logbook import latest
    from ledger.logbook.modules import list_modules, row_id

    def gather(s: Any) -> Any:
        return [(m, t, latest.cycles(s, row_id(m.id))) for m, t in list_modules(s, status)]

    report = Report("module list")
    table = Table(
        "Modules",
        [
            ("serial", "serial"),
            ("type", "type"),
            ("status", "status"),
            ("product", "dedicated to"),
            ("cycles", "cycles"),
        ],
    )
    for m, t, n in read(db, gather):
        table.rows.append(
            [
                m.serial,
                t.code,
                m.status,
                m.dedicated_product,
                f"{n} of {t.reuse_limit_cycles}",
            ]
        )
    report.tables.append(table)
    report.print(as_json)


@app.command("show")
@guarded
def module_show(
    serial: str = typer.Argument(...), db: str | None = DB_OPTION, as_json: bool = JSON_OPTION
) -> None:
    """A module's details and its whole history, oldest first."""
    from ledger.cli.describe import history_report

    read(db, lambda s: history_report(s, serial)).print(as_json)


@app.command("hold")
@guarded
def module_hold(
    serial: str = typer.Argument(...),
    reason: str = typer.Option(..., "--reason", help="Why the module is held."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Put a module on hold until an engineer or QA signs its disposition."""
    from ledger.logbook.modules import hold

    held = write(db, user, password_stdin, lambda s, a: hold(s, a, serial, reason))
    finish("module hold", held, f"module {serial} is on hold (hold {held.id})", None, as_json)


@app.command("release")
@guarded
def module_release(
    serial: str = typer.Argument(...),
    decision: str = typer.Option(
        ...,
        "--decision",
        help="retest (clean and test again), return (manual holds only) or retire.",
    ),
    reason: str = typer.Option(..., "--reason", help="The reason for the disposition."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Sign the disposition of a hold (engineer or QA; your password is your signature)."""
    from ledger.logbook.modules import disposition_words, release

    done = write(db, user, password_stdin, lambda s, a: release(s, a, serial, decision, reason))
    when = done.decided_at.isoformat() if done.decided_at else ""
    line = (
        f"module {serial}: disposition {done.decision} signed by {done.decided_by} at "
        f"{when} (meaning: {disposition_words(done.meaning)})"
    )
    finish("module release", done, line, None, as_json)


@app.command("retire")
@guarded
def module_retire(
    serial: str = typer.Argument(...),
    reason: str = typer.Option(..., "--reason", help="Why it is retired."),
    user: str = USER_OPTION,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Retire a module for good (engineer or QA)."""
    from ledger.logbook.modules import retire

    done = write(db, user, password_stdin, lambda s, a: retire(s, a, serial, reason))
    finish("module retire", done, f"module {serial} is retired", None, as_json)
