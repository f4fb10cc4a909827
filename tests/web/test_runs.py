"""The run pages through the ASGI test client: a run started, its steps signed, its skid log
uploaded and its checks shown, against what the CLI says of the same run (`run show --json`,
`run list --json`, the audit trail of a `run import`); and refusals that write nothing: a bad
value beside its field, an upload of a type `run import` does not read, a role without the
right (refused by the service, as on the CLI).

The numbers come from the run services, which tests/cli and tests/reference check against
hand computations and closed-form skid logs; here the page must say what the CLI says."""

from __future__ import annotations

import json
import re
import tempfile
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest

from tests.cli.test_runs import MAPPING
from tests.records.flow import planned
from tests.web.conftest import Site
from tests.world import PASSWORDS

pytestmark = pytest.mark.sqlite_only

PNG = b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR\x00\x00\x00\x01\x00\x00\x00\x01\x08\x06\x00\x00\x00"


def post(site: Site, path: str, data: dict[str, str], **more: Any) -> Any:
    """A form of the run page, sent with the page's CSRF token."""
    run_page = "/".join(path.split("/")[:3])
    return site.client.post(
        path, data={"csrf": site.csrf(run_page), **data}, follow_redirects=False, **more
    )


def error_beside(html: str, input_id: str) -> str:
    """The error shown beside the input ``input_id`` (its aria-describedby paragraph)."""
    assert re.search(rf'id="{input_id}"[^>]*aria-invalid="true"', html), input_id
    found = re.search(rf'<p class="error" id="{input_id}-error" role="alert">([^<]*)</p>', html)
    assert found, f"no error beside {input_id}"
    return found.group(1)


def log_file(tmp_path: Path) -> Path:
    """The demo skid export of a run that started two hours ago (a 24 s TMP spike)."""
    from ledger.cli.demo_log import write_log

    return write_log(tmp_path / "skid.csv", datetime.now(UTC) - timedelta(hours=2))


def test_a_run_started_signed_uploaded_and_checked_as_on_the_cli(
    site: Site, tmp_path: Path
) -> None:
    w = site.world
    run = planned(w, "QMB-0142", "QB117-26-041")
    w.wide_log_tolerance()
    assert site.sign_in("op.kim", PASSWORDS["op.kim"]).status_code == 303

    listed = site.client.get("/runs")
    assert listed.status_code == 200 and "QB117-26-041" in listed.text and "planned" in listed.text
    twin = site.client.get("/runs?format=json").json()["runs"]
    cli = w.ok(w.cli("run", "list", "--json")).json()["runs"]
    keys = ("run", "status", "product", "lot", "module", "template")
    assert [{k: r[k] for k in keys} for r in twin] == [{k: r[k] for k in keys} for r in cli]

    page = site.client.get(f"/runs/{run}")
    assert page.status_code == 200 and "Start the run" in page.text
    # Planned parameters with their units, as `run show` gives them.
    shown = w.ok(w.cli("run", "show", str(run), "--json")).json()
    feed = next(r for r in shown["plan"] if r["name"] == "feed_flow")
    ours = site.client.get(f"/runs/{run}?format=json").json()["run"]
    our_feed = next(r for r in ours["plan"] if r["name"] == "feed_flow")["planned"]
    assert (our_feed["value"], our_feed["unit"]) == (feed["planned"]["value"], "mL/min")
    assert our_feed["text"] in page.text  # "353.4 mL/min"

    started = post(site, f"/runs/{run}/start", {})
    assert started.status_code == 303 and started.headers["location"] == f"/runs/{run}?done=started"
    assert w.ok(w.cli("run", "show", str(run), "--json")).json()[f"run_{run}"]["status"] == (
        "in_progress"
    )
    assert w.status("QMB-0142") == "in_use"

    # Step 1 performed with its values and the password (a signature).
    signed = post(
        site,
        f"/runs/{run}/steps/1?format=json",
        {
            "meaning": "performed",
            "value.permeate_ph": "7.4",
            "value.permeate_conductivity": "15.2 mS/cm",
            "password": PASSWORDS["op.kim"],
        },
    )
    assert signed.status_code == 200, signed.text
    assert signed.json()["signed"]["login"] == "op.kim"
    steps = w.ok(w.cli("run", "steps", str(run), "--json")).json()["steps"]
    assert [(x["name"], x["typed"]) for x in steps[0]["entries"]] == [
        ("permeate_ph", "7.4"),
        ("permeate_conductivity", "15.2 mS/cm"),
    ]
    assert steps[0]["signatures"][0]["login"] == "op.kim"
    # A step out of the record's order offers no form yet, and says why.
    waiting = site.client.get(f"/runs/{run}").text
    assert "Not yet: step 3 comes after step 2, which is not yet performed and verified" in (
        waiting
    )
    assert f'action="/runs/{run}/steps/3"' not in waiting
    assert f'action="/runs/{run}/steps/2"' in waiting

    # The log and its mapping uploaded as files of a multipart form.
    log = log_file(tmp_path)
    files = {
        "file": ("skid.csv", log.read_bytes(), "text/csv"),
        "mapping": ("qf2_skid_mapping.toml", MAPPING.read_bytes(), "application/toml"),
    }
    uploaded = post(site, f"/runs/{run}/log", {"phases": ""}, files=files)
    assert uploaded.status_code == 303, uploaded.text
    assert uploaded.headers["location"] == f"/runs/{run}?done=imported#log"
    page = site.client.get(f"/runs/{run}?done=imported")
    assert "The skid log is imported" in page.text
    for seen in ("skid.csv", "Acceptance checks", "Excursions", "feed flow", "diafilter"):
        assert seen in page.text, seen
    # The same file again writes nothing, as `run import` says "already imported".
    before = w.snapshot()
    again = post(site, f"/runs/{run}/log?format=json", {}, files=files)
    assert again.status_code == 200 and again.json()["written"] is False
    assert w.snapshot() == before

    # The page's JSON twin holds what `run show --json` holds.
    cli = w.ok(w.cli("run", "show", str(run), "--json")).json()
    ours = site.client.get(f"/runs/{run}?format=json").json()
    report = ours["run"]
    assert report["head"]["status"] == cli[f"run_{run}"]["status"] == "in_progress"
    assert report["head"]["started_at"] == cli[f"run_{run}"]["started_at"]
    assert [(p["name"], p["rule"]) for p in report["plan"]] == [
        (p["name"], p["rule"]) for p in cli["plan"]
    ]
    theirs = {c["name"]: c for c in cli["acceptance_checks"]}
    checks = {c["name"]: c for c in report["checks"]["checks"]}
    assert checks.keys() == theirs.keys()
    for name, c in checks.items():
        t = theirs[name]
        assert (c["verdict"], c["actual"], c["rule"]) == (t["verdict"], t["actual"], t["rule"])
    # The demo export's one TMP spike (24 s above 0.45 bar) fails the TMP check.
    assert checks["tmp"]["verdict"] == "FAIL" and "longest 24 s" in checks["tmp"]["note"]
    assert report["checks"]["log"]["sha256"] == cli["skid_log"]["sha256"]
    assert report["checks"]["log"]["rows"] == cli["skid_log"]["rows"]
    assert [(e["name"], e["samples"]) for e in report["checks"]["excursions"]] == [
        (e["name"], e["samples"]) for e in cli["excursions"]
    ]
    assert "FAIL" in page.text and "TMP, every sample" in page.text
    assert [s["complete"] for s in ours["steps"]][:1] == [True]

    # The web's import is audited as the CLI's: the same run on a second module, imported
    # with `run import`, gives an event of the same actor, action and reason and a record
    # of the same content (the file's own path aside: the web's is its private copy).
    other = planned(w, "QMB-0143", "QB117-26-042")
    w.ok(w.as_user("op.kim", "run", "start", str(other)))
    w.ok(w.as_user("op.kim", "run", "import", str(other), str(log), "--mapping", str(MAPPING)))
    events = w.ok(w.cli("audit", "show", "--entity", "skid_log_file", "--json")).json()["events"]
    web, by_cli = sorted(
        (e for e in events if e["action"] == "create"), key=lambda e: e["entity_id"]
    )
    assert (web["actor"], web["action"], web["reason"]) == (
        by_cli["actor"],
        by_cli["action"],
        by_cli["reason"].replace(f"run {other}", f"run {run}"),
    )

    def content(e: dict[str, Any]) -> dict[str, Any]:
        record = json.loads(e["new_value"])
        actuals = {k: v for k, v in record["actuals"].items() if k != "source"}
        keep = (
            "file_name",
            "sha256",
            "size_bytes",
            "rows",
            "mapping_sha256",
            "mapping_text",
            "windows",
            "created_by",
        )
        return {**{k: record[k] for k in keep}, "actuals": actuals}

    assert content(web) == content(by_cli)
    assert json.loads(web["new_value"])["file_name"] == "skid.csv"
    # The record names the upload by its own name, not the server's temporary folder.
    assert json.loads(web["new_value"])["actuals"]["source"] == "skid.csv"

    # QC, a deviation for the TMP spike, finish and submit: the run goes to review.
    qc = post(
        site,
        f"/runs/{run}/qc",
        {"result.particle_size": "95 nm", "result.ph": "7.4", "result.pdi": ""},
    )
    assert qc.status_code == 303, qc.text
    dev = post(
        site,
        f"/runs/{run}/deviations?format=json",
        {"description": "TMP spike: permeate line pinched for 24 s", "check": "tmp"},
    )
    assert dev.status_code == 200 and dev.json() == {"run": run, "deviation": 1}
    assert post(site, f"/runs/{run}/finish", {}).status_code == 303
    assert post(site, f"/runs/{run}/submit", {}).status_code == 303
    final = w.ok(w.cli("run", "show", str(run), "--json")).json()
    assert final[f"run_{run}"]["status"] == "in_review"
    assert final["deviations"][0]["check"] == "tmp"
    w.ok(w.cli("audit", "verify"))


def test_refusals_show_beside_the_field_and_write_nothing(
    site: Site, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    w = site.world
    made: list[Path] = []  # the private folders the pages copy uploads into
    real_mkdtemp = tempfile.mkdtemp

    def mkdtemp(*args: Any, **kwargs: Any) -> str:
        made.append(Path(real_mkdtemp(*args, **kwargs)))
        return str(made[-1])

    monkeypatch.setattr(tempfile, "mkdtemp", mkdtemp)
    run = planned(w, "QMB-0142", "QB117-26-043")
    w.ok(w.as_user("op.kim", "run", "start", str(run)))
    w.wide_log_tolerance()
    site.sign_in("op.kim", PASSWORDS["op.kim"])
    step_1 = {
        "meaning": "performed",
        "value.permeate_ph": "7.4",
        "value.permeate_conductivity": "15.2 mS/cm",
        "password": PASSWORDS["op.kim"],
    }

    before = w.snapshot()
    # A value of the wrong kind: beside its input, with what was typed kept.
    wrong = post(site, f"/runs/{run}/steps/1", {**step_1, "value.permeate_ph": "7.4 bar"})
    assert wrong.status_code == 400
    assert "permeate_ph" in error_beside(wrong.text, "step-1-value-permeate-ph")
    assert 'value="7.4 bar"' in wrong.text and 'value="15.2 mS/cm"' in wrong.text
    assert PASSWORDS["op.kim"] not in wrong.text
    # A value left out: every missing value is named at once, each beside its input.
    blank = post(site, f"/runs/{run}/steps/1", {**step_1, "value.permeate_conductivity": ""})
    assert blank.status_code == 400
    assert "is entered when step 1 is performed" in error_beside(
        blank.text, "step-1-value-permeate-conductivity"
    )
    # A late time that is no time.
    late = post(site, f"/runs/{run}/steps/1", {**step_1, "activity_time": "yesterday noon"})
    assert (
        late.status_code == 400
        and "activity" in error_beside(late.text, "step-1-activity-time").lower()
    )
    # A deviation without a description; QC of a kind the attribute is not.
    empty = post(site, f"/runs/{run}/deviations", {"description": "  ", "check": ""})
    assert empty.status_code == 400 and error_beside(empty.text, "deviation-description")
    qc = post(site, f"/runs/{run}/qc", {"result.pdi": "0.1 nm", "result.ph": "7.3"})
    assert qc.status_code == 400 and "pdi" in error_beside(qc.text, "qc-result-pdi")
    as_json = post(site, f"/runs/{run}/qc?format=json", {"result.pdi": "0.1 nm"})
    assert as_json.status_code == 400 and "pdi" in as_json.json()["error"]

    # Uploads of a type `run import` does not read, refused by name and by content.
    for name, data in (("skid.png", PNG), ("skid.csv", PNG), ("skid.xlsx", b"time,feed\n")):
        refused = post(
            site,
            f"/runs/{run}/log",
            {},
            files={
                "file": (name, data, "application/octet-stream"),
                "mapping": ("m.toml", MAPPING.read_bytes(), "text/plain"),
            },
        )
        assert refused.status_code == 400, (name, refused.text)
        message = error_beside(refused.text, "log-file")
        assert name in message and ".csv" in message and ".xlsx" in message, message
    no_mapping = post(
        site,
        f"/runs/{run}/log",
        {},
        files={"file": ("skid.csv", log_file(tmp_path).read_bytes(), "text/csv")},
    )
    assert no_mapping.status_code == 400
    assert "mapping" in error_beside(no_mapping.text, "log-mapping")
    # A log of the right type whose rows are wrong: the reader names the file and line, and
    # not the private copy's folder.
    lines = log_file(tmp_path).read_text().splitlines()
    cells = lines[41].split(",")
    cells[5] = "n/a"
    lines[41] = ",".join(cells)
    bad = post(
        site,
        f"/runs/{run}/log",
        {},
        files={
            "file": ("bad.csv", "\n".join(lines).encode(), "text/csv"),
            "mapping": ("m.toml", MAPPING.read_bytes(), "text/plain"),
        },
    )
    assert bad.status_code == 400
    message = error_beside(bad.text, "log-file")
    assert message.startswith("bad.csv:42:") and "fluxledger-upload" not in message
    assert w.snapshot() == before

    # Roles stay in the services: an operator may not approve a plan nor close a deviation,
    # and nobody verifies the step they performed.
    for number, typed in (
        (1, ["permeate_ph=7.4", "permeate_conductivity=15.2 mS/cm"]),
        (2, ["retentate_volume=302 mL", "tmp_observed=0.31 bar"]),
    ):
        values = [x for t in typed for x in ("--value", t)]
        w.ok(
            w.as_user(
                "op.kim", "run", "step", str(run), str(number), "--meaning", "performed", *values
            )
        )
    w.ok(
        w.as_user(
            "op.kim",
            "run",
            "deviation",
            str(run),
            "--description",
            "pump alarm",
            "--class",
            "minor",
            "--impact",
            "none",
        )
    )
    before = w.snapshot()
    own = post(
        site, f"/runs/{run}/steps/2", {"meaning": "verified", "password": PASSWORDS["op.kim"]}
    )
    assert own.status_code == 403
    assert "op.kim performed step 2; another person verifies it" in own.text
    close = post(site, f"/runs/{run}/deviations/1/close", {"closure": "pump serviced"})
    assert close.status_code == 403 and "may not close deviations" in close.text
    assert "pump serviced</textarea>" in close.text  # what was typed is kept
    approve = post(site, f"/runs/{run}/approve-plan", {})
    assert approve.status_code == 403
    assert w.snapshot() == before
    # A wrong password is beside the password field; the step is not signed.
    wrong_pw = post(
        site,
        f"/runs/{run}/steps/3",
        {"meaning": "performed", "value.buffer_used": "1.7 L", "password": "not-it"},
    )
    assert wrong_pw.status_code == 403
    assert "wrong password" in error_beside(wrong_pw.text, "step-3-password")
    assert w.snapshot()["step_entry"] == before["step_entry"]
    # A password not typed at all is asked for, and not counted as a wrong one.
    unsigned = post(site, f"/runs/{run}/steps/2", {"meaning": "verified", "password": ""})
    assert unsigned.status_code == 400
    assert "type your password" in error_beside(unsigned.text, "step-2-password")
    # Without this session's token nothing is read at all.
    forged = site.client.post(f"/runs/{run}/start", data={"csrf": "forged"})
    assert forged.status_code == 403 and "csrf" in forged.text
    # Nothing is left of the uploads' private copies.
    assert len(made) == 5 and not any(p.exists() for p in made)
    assert all(p.name.startswith("fluxledger-upload-") for p in made)

    # The people who may: the engineer verifies step 2, QA closes the deviation.
    site.sign_in("eng.ray", PASSWORDS["eng.ray"])
    verified = post(
        site, f"/runs/{run}/steps/2", {"meaning": "verified", "password": PASSWORDS["eng.ray"]}
    )
    assert verified.status_code == 303, verified.text
    site.sign_in("qa.lin", PASSWORDS["qa.lin"])
    closed = post(
        site,
        f"/runs/{run}/deviations/1/close?format=json",
        {"closure": "pump serviced; no effect on the product", "class": "minor"},
    )
    assert closed.status_code == 200, closed.text
    assert closed.json() == {
        "run": run,
        "deviation": 1,
        "classification": "minor",
        "closed_by": "qa.lin",
    }
    shown = w.ok(w.cli("run", "show", str(run), "--json")).json()
    assert shown["deviations"][0]["closure"] == "pump serviced; no effect on the product"
    steps = w.ok(w.cli("run", "steps", str(run), "--json")).json()["steps"]
    assert [(g["meaning"], g["login"]) for g in steps[1]["signatures"]] == [
        ("performed", "op.kim"),
        ("verified", "eng.ray"),
    ]
