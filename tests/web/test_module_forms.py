"""The bench-record forms of a module (ledger/web/module_forms.py) through the ASGI client.

Each form hands its fields to the CLI's entry and service, so a record made on the web is
compared with the record the CLI makes from the same inputs on a twin module: the stored
values, what the result page and the JSON twin show, and the rows each write adds (the same
tables, the same number of audit events). The NWP itself is checked against an independent
computation (iapws, numpy) in tests/entries/test_water_rows.py. Rejected input, a POST without
this session's token, one after the idle time and one by a role that may not record write
nothing (``World.snapshot``)."""

from __future__ import annotations

import html
import re
from pathlib import Path
from typing import Any

import pytest
from sqlmodel import Session, create_engine, select

from ledger.store.tables import Cleaning, IntegrityTest, Module, WaterFluxTest
from tests.web.conftest import Site
from tests.world import PASSWORDS, World

pytestmark = pytest.mark.sqlite_only

WEB, CLI = "QMB-0201", "QMB-0202"
FORMS = ("water", "integrity", "clean", "storage", "use-start", "use-end")


def _token(site: Site, serial: str, slug: str) -> str:
    return site.csrf(f"/modules/{serial}/{slug}")


def _post(site: Site, serial: str, slug: str, data: dict[str, str], json: bool = False) -> Any:
    token = _token(site, serial, slug)
    suffix = "?format=json" if json else ""
    return site.client.post(
        f"/modules/{serial}/{slug}{suffix}", data={"csrf": token, **data}, follow_redirects=False
    )


def _delta(before: dict[str, Any], after: dict[str, Any]) -> dict[str, int]:
    """Rows added per table (the audit-chain head left out: it differs by content)."""
    return {k: after[k] - before[k] for k in before if k != "head" and after[k] != before[k]}


def _rows(world: World, cls: Any, serial: str) -> list[Any]:
    with Session(create_engine(world.url)) as s:
        module = s.exec(select(Module).where(Module.serial == serial)).one()
        rows = list(s.exec(select(cls).where(cls.module_id == module.id).order_by(cls.id)))
        for r in rows:
            s.expunge(r)
        return rows


def _same_record(a: Any, b: Any, *names: str) -> None:
    for name in names:
        left, right = getattr(a, name), getattr(b, name)
        if isinstance(left, float):
            assert left == pytest.approx(right, rel=1e-12), name
        else:
            assert left == right, name


def test_each_form_records_what_the_cli_records(site: Site) -> None:
    w = site.world
    w.ready(WEB)
    w.ready(CLI)
    assert site.sign_in("op.kim", PASSWORDS["op.kim"]).status_code == 303
    history = site.client.get(f"/modules/{WEB}").text
    for slug in FORMS:
        assert f'href="/modules/{WEB}/{slug}"' in history  # an operator sees the links
        page = site.client.get(f"/modules/{WEB}/{slug}")
        assert page.status_code == 200 and 'name="csrf"' in page.text
        assert "<script>" not in page.text  # only the local file, no inline script
        # every input has its label
        ids = re.findall(r'<input id="([^"]+)"', page.text)
        assert ids and all(f'<label for="{i}"' in page.text for i in ids)
    fields = site.client.get(f"/modules/{WEB}/water?format=json").json()
    assert {"feed_1", "flow_12", "temperature", "stage"} <= set(fields["fields"])
    assert "psi" in fields["units"]["pressure"]

    def both(slug: str, data: dict[str, str], cli: list[str]) -> tuple[Any, Any]:
        """The same record on the web (WEB) and on the CLI (CLI); the rows each added."""
        before = w.snapshot()
        web = _post(site, WEB, slug, data, json=True)
        assert web.status_code == 200, web.text
        middle = w.snapshot()
        theirs = w.ok(w.as_user("op.kim", *cli[:2], CLI, *cli[2:], "--json")).json()
        after = w.snapshot()
        assert _delta(before, middle) == _delta(middle, after), slug  # same rows, same audit
        assert _delta(before, middle)["audit_event"] >= 1
        return web.json()["recorded"], theirs

    lot = "QB117-26-014"
    ours, theirs = both("use-start", {"product": "QB-117", "lot": lot},
                        ["use", "start", "--product", "QB-117", "--lot", lot])  # fmt: skip
    assert ours["values"]["product"]["text"] == theirs["record"]["product"] == "QB-117"
    assert ours["status"] == w.status(WEB) == w.status(CLI) == "in_use"
    ours, _ = both("use-end", {}, ["use", "end"])
    assert ours["status"] == w.status(CLI) == "awaiting_cleaning"

    # A one-point water-flux test: the same stored test as `test water` with the same options.
    point = {"feed_1": "3.2 psi", "retentate_1": "2.8 psi", "flow_1": "90 mL/min"}
    ours, theirs = both(
        "water",
        {"stage": "post-use", "temperature": "20 degC", **point, "water_grade": "", "note": ""},
        ["test", "water", "--stage", "post-use", "--feed", "3.2 psi", "--retentate", "2.8 psi",
         "--flow", "90 mL/min", "--temperature", "20 degC"],
    )  # fmt: skip
    web_test, cli_test = _rows(w, WaterFluxTest, WEB)[-1], _rows(w, WaterFluxTest, CLI)[-1]
    _same_record(web_test, cli_test, "stage", "points", "nwp_m_s_pa", "recovery", "verdict",
                 "tmp_pa", "entered", "temperature_k", "method")  # fmt: skip
    nwp = theirs["record"]["nwp"]
    assert ours["values"]["nwp"]["value"] == pytest.approx(nwp["value"], rel=1e-12)
    assert ours["values"]["nwp"]["unit"] == nwp["unit"]
    assert ours["values"]["recovery"]["value"] == pytest.approx(
        theirs["record"]["recovery"]["value"]
    )
    assert ours["status_note"] == theirs["status_note"]

    clean = {"agent": "sodium hydroxide", "concentration": "0.5 mol/L", "temperature": "25 degC",
             "contact_time": "60 min", "reagent_lot": "NX-2611-03", "rinse_ph": "7.2",
             "rinse_conductivity": "1.4 uS/cm", "procedure": "", "note": ""}  # fmt: skip
    ours, theirs = both("clean", clean, ["care", "clean", "--agent", "sodium hydroxide",
                        "--concentration", "0.5 mol/L", "--temperature", "25 degC",
                        "--contact-time", "60 min", "--reagent-lot", "NX-2611-03",
                        "--rinse-ph", "7.2", "--rinse-conductivity", "1.4 uS/cm"])  # fmt: skip
    _same_record(_rows(w, Cleaning, WEB)[-1], _rows(w, Cleaning, CLI)[-1], "agent",
                 "concentration", "concentration_unit", "temperature_k", "contact_time_s",
                 "rinse_ph", "rinse_conductivity_s_m", "entered", "deviations")  # fmt: skip
    assert ours["caution"] == theirs["caution"] and "caustic" in ours["caution"]

    # The result page of a three-point post-clean test: NWP, recovery, verdict, status.
    table = {"stage": "post-clean", "temperature": "20 degC",
             "feed_1": "3.2 psi", "retentate_1": "2.8 psi", "flow_1": "165 mL/min",
             "feed_3": "4.2 psi", "retentate_3": "3.6 psi", "flow_3": "215 mL/min",
             "feed_4": "5.1 psi", "retentate_4": "4.5 psi", "volume_4": "261 mL",
             "time_4": "1 min"}  # fmt: skip
    page = _post(site, WEB, "water", table)
    assert page.status_code == 200, page.text
    test = _rows(w, WaterFluxTest, WEB)[-1]
    assert len(test.points) == 3 and test.r_squared is not None
    baseline = _rows(w, WaterFluxTest, WEB)[0]
    assert test.recovery == pytest.approx(test.nwp_m_s_pa / baseline.nwp_m_s_pa, rel=1e-12)
    shown = re.search(r'id="result-nwp"><dt>NWP[^<]*</dt><dd>([0-9.]+) LMH/bar', page.text)
    assert shown and float(shown.group(1)) == pytest.approx(
        test.nwp_m_s_pa * 3.6e11, rel=1e-3
    )  # 1 m/(s·Pa) = 3.6e11 LMH/bar
    assert f"{100 * test.recovery:.1f} %" in page.text and test.verdict in page.text
    assert "available" in page.text  # the module's status after the test

    # Integrity (a decay) and storage, against the CLI's.
    w.ok(w.water(CLI, "post-clean", "165 mL/min"))  # the twin's post-clean test
    decay = {"start": "15 psi", "end": "14.95 psi", "hold_time": "5 min", "method": ""}
    ours, theirs = both("integrity", decay, ["test", "integrity", "--start", "15 psi",
                        "--end", "14.95 psi", "--hold-time", "5 min"])  # fmt: skip
    _same_record(_rows(w, IntegrityTest, WEB)[-1], _rows(w, IntegrityTest, CLI)[-1], "kind",
                 "decay_rate_pa_s", "limit_value", "passed", "entered")  # fmt: skip
    assert ours["verdict"] == "pass" and theirs["record"]["passed"] is True
    ours, theirs = both("storage", {"solution": "20 % ethanol"},
                        ["care", "store", "--solution", "20 % ethanol"])  # fmt: skip
    assert ours["caution"] == theirs.get("caution")
    page = site.client.get(f"/modules/{WEB}/storage")
    assert "follow your site's safety procedure" in html.unescape(page.text).lower()


def test_an_error_shows_beside_its_field_and_nothing_is_written(site: Site) -> None:
    w = site.world
    w.ready(WEB)
    site.sign_in("op.kim", PASSWORDS["op.kim"])
    before = w.snapshot()
    typed = {"stage": "pre-use", "temperature": "21 degC", "feed_1": "12 psi",
             "retentate_1": "9 psi", "flow_1": "228 mL/min", "feed_2": "15 pso",
             "retentate_2": "11 psi", "flow_2": "290 mL/min"}  # fmt: skip
    page = _post(site, WEB, "water", typed)
    assert page.status_code == 400
    beside = re.search(r'id="feed_2-error" role="alert">([^<]+)<', page.text)
    assert beside and "row 2" in beside.group(1) and "pso" in beside.group(1)
    assert re.search(r'id="feed_2" name="feed_2" value="15 pso"[^>]*aria-invalid="true"',
                     page.text.replace("\n", " "))  # fmt: skip
    assert 'value="228 mL/min"' in page.text and 'value="pre-use" selected' in page.text
    assert "Traceback" not in page.text

    # The service's error on a point (TMP not positive) is named by its row, too.
    typed.update(feed_2="0 psi", retentate_2="0 psi", permeate_2="1 psi")
    twin = _post(site, WEB, "water", typed, json=True)
    assert twin.status_code == 400 and twin.json()["field"] == "feed_2"
    assert "row 2" in twin.json()["error"] and "TMP" in twin.json()["error"]
    bad = _post(site, WEB, "clean", {"agent": "sodium hydroxide", "concentration": "half",
                                     "temperature": "25 degC", "contact_time": "60 min",
                                     "reagent_lot": "NX-1"})  # fmt: skip
    assert bad.status_code == 400 and 'id="concentration-error"' in bad.text
    assert 'value="NX-1"' in bad.text
    # No use to end: the sequence rule's refusal is shown above the whole form (403).
    refused = _post(site, WEB, "use-end", {})
    assert refused.status_code == 403 and "cannot record the end of a use" in refused.text
    assert w.snapshot() == before


def test_refused_posts_write_nothing(site: Site) -> None:
    w = site.world
    w.ready(WEB)
    site.sign_in("op.kim", PASSWORDS["op.kim"])
    form = {"solution": "20 % ethanol"}
    before = w.snapshot()
    bare = site.client.post(f"/modules/{WEB}/storage", data=form)
    assert bare.status_code == 403 and "csrf" in bare.text
    token = _token(site, WEB, "storage")
    site.clock.now += 16 * 60  # past the 15-minute idle time
    late = site.client.post(
        f"/modules/{WEB}/storage", data={"csrf": token, **form}, follow_redirects=False
    )
    assert late.status_code == 303
    assert late.headers["location"] == f"/sign-in?next=/modules/{WEB}/storage&idle=1"
    assert w.snapshot() == before

    # An administrator may not record bench results: the service refuses, the page says so.
    assert site.sign_in("sysadm", PASSWORDS["sysadm"]).status_code == 303
    assert f"/modules/{WEB}/water" not in site.client.get(f"/modules/{WEB}").text
    admin = _post(site, WEB, "storage", form)
    assert admin.status_code == 403 and "may not record" in admin.text
    assert "Nothing was written" in admin.text and w.snapshot() == before


def test_a_cleaning_cycle_is_recorded_step_by_step_as_on_the_cli(
    site: Site, tmp_path: Path
) -> None:
    from tests.cli.test_cleaning_cycles import approved_procedure, verified_naoh

    w = site.world
    approved_procedure(w, tmp_path)  # QC-CYCLE-05 v1, five steps (invented demo ranges)
    verified_naoh(w)
    for serial in (WEB, CLI):
        w.ready(serial)
        w.ok(w.as_user("op.kim", "use", "start", serial, "--product", "QB-117", "--lot", "L-1"))
        w.ok(w.as_user("op.kim", "use", "end", serial))
        w.ok(w.water(serial, "post-use", "90 mL/min"))
    site.sign_in("op.kim", PASSWORDS["op.kim"])
    assert (
        "QC-CYCLE-05" in site.client.get(f"/modules/{WEB}/cycle?format=json").json()["procedures"]
    )
    page = site.client.get(f"/modules/{WEB}/cycle?procedure=QC-CYCLE-05")
    assert page.status_code == 200 and page.text.count("<fieldset") == 5
    assert 'name="2.temperature"' in page.text and 'name="5.endpoint"' in page.text
    assert "sodium hydroxide is caustic" in page.text  # the step's caution
    unknown = site.client.get(f"/modules/{WEB}/cycle?procedure=NO-SUCH")
    assert unknown.status_code == 400 and 'id="procedure-error"' in unknown.text

    given = {
        "1.flow": "300 mL/min", "1.endpoint": "6 L",
        "2.solution": "SOL-NAOH-01", "2.temperature": "45 degC", "2.contact_time": "60 min",
        "2.tmp": "7 psi", "2.concentration": "",
        "3.concentration": "0.15 mol/L", "3.contact_time": "20 min",
        "4.concentration": "0.02 %", "4.contact_time": "30 min",
        "5.endpoint": "1.1 uS/cm",
    }  # fmt: skip
    before = w.snapshot()
    bad = _post(site, WEB, "cycle", {"procedure": "QC-CYCLE-05", **given, "2.tmp": "7 pso"})
    assert bad.status_code == 400 and 'id="step-2-tmp-error"' in bad.text
    assert 'value="45 degC"' in bad.text and w.snapshot() == before

    web = _post(site, WEB, "cycle", {"procedure": "QC-CYCLE-05", **given}, json=True)
    assert web.status_code == 200, web.text
    middle = w.snapshot()
    options = [a for k, t in given.items() if t for a in ("--value", f"{k}={t}")]
    cli = w.as_user("op.kim", "care", "cycle", CLI, "--procedure", "QC-CYCLE-05", *options)
    w.ok(cli)
    assert _delta(before, middle) == _delta(middle, w.snapshot())  # same rows and events
    _same_record(_rows(w, Cleaning, WEB)[-1], _rows(w, Cleaning, CLI)[-1], "agent",
                 "concentration", "contact_time_s", "deviations", "rinse_conductivity_s_m",
                 "reagent_lot")  # fmt: skip
    recorded = web.json()["recorded"]
    assert recorded["status"] == w.status(CLI) == "cleaned"
    assert "sodium hypochlorite is an oxidizer" in recorded["caution"]
    assert recorded["values"]["step_2"]["text"].startswith("solution SOL-NAOH-01")


def test_every_unit_the_forms_offer_is_one_the_entries_accept() -> None:
    from ledger import units
    from ledger.entries.care import STRENGTH
    from ledger.entries.fields import quantity_of_either
    from ledger.logbook.bench_results import unit_suggestions

    offered = unit_suggestions()
    assert {"psi", "bar", "kPa", "mbar"} <= set(offered["pressure"])
    assert {"mL/min", "L/min", "L/h"} <= set(offered["flow"])
    for kind, names in offered.items():
        for unit in names:
            if kind == "concentration":  # a cleaning's strength: molarity, mass or percent
                value, _ = quantity_of_either(f"2 {unit}", "concentration", STRENGTH)
            else:
                value = units.parse(f"2 {unit}", kind, field=kind)
            assert value != 0 and value == value, (kind, unit)
    # The pressure units as pint converts them (1 psi = 6894.757 Pa, NIST SP 811).
    assert units.parse("1 psi", "pressure", field="p") == pytest.approx(6894.757293168)


@pytest.mark.parametrize("rows", ["²", "٣", "9" * 5000, "-3", "0", "1e3", "\u200b5"])
def test_odd_row_counts_and_field_names_are_answered_not_crashed(site: Site, rows: str) -> None:
    """A row count or a table field's number that is not a plain small number (a superscript,
    an Arabic-Indic digit, 5,000 digits, an invisible character) shows the default table; a bug
    found in review answered "²" with the failure page."""
    w = site.world
    w.add_module("QMB-0401")
    site.sign_in("op.kim", PASSWORDS["op.kim"])
    page = site.client.get("/modules/QMB-0401/water", params={"rows": rows})
    assert page.status_code == 200 and 'name="feed_1"' in page.text
    before = w.snapshot()
    sent = _post(site, "QMB-0401", "water", {"stage": "baseline", f"feed_{rows}": "3 psi",
                                             "temperature": "20 degC"})  # fmt: skip
    assert sent.status_code == 400 and "Something went wrong" not in sent.text
    assert w.snapshot() == before
