"""A rejected input is one clear line (exit 2 or 3), never a traceback, and writes nothing:
row counts and the audit-chain head are the same before and after."""

from __future__ import annotations

from collections.abc import Callable

import pytest

from tests.world import Result, World

Case = Callable[[World], Result]

WATER = ["--feed", "3.2 psi", "--retentate", "2.8 psi", "--temperature", "20 degC"]


def _water(world: World, *args: str) -> Result:
    return world.as_user("op.kim", "test", "water", "QMB-0142", "--stage", "pre-use", *args)


CASES: dict[str, tuple[Case, int, str]] = {
    "unknown serial": (
        lambda w: w.as_user("op.kim", "test", "water", "QMB-9999", "--stage", "pre-use", *WATER,
                            "--flow", "150 mL/min"),
        2, "no module with serial 'QMB-9999'"),
    "duplicate serial": (
        lambda w: w.as_user("op.kim", "module", "add", "QMB-0142", "--type", "HF-750"),
        2, "already registered"),
    "unknown module type": (
        lambda w: w.as_user("op.kim", "module", "add", "QMB-0150", "--type", "HF-999"),
        2, "no module type 'HF-999'"),
    "pressure in the wrong unit": (
        lambda w: _water(w, "--feed", "3.2 L/min", "--retentate", "2.8 psi", "--temperature",
                         "20 degC", "--flow", "150 mL/min"),
        2, "--feed: '3.2 L/min' is a flow; expected a pressure"),
    "pressure without a unit": (
        lambda w: _water(w, "--feed", "3.2", "--retentate", "2.8 psi", "--temperature",
                         "20 degC", "--flow", "150 mL/min"),
        2, "has no unit"),
    "negative flow": (
        lambda w: _water(w, *WATER, "--flow", "-150 mL/min"),
        2, "--flow '-150 mL/min'"),
    "temperature out of range": (
        lambda w: _water(w, "--feed", "3.2 psi", "--retentate", "2.8 psi", "--temperature",
                         "120 degC", "--flow", "150 mL/min"),
        2, "temperature"),
    "TMP not positive": (
        lambda w: _water(w, "--feed", "0 psi", "--retentate", "0 psi", "--temperature",
                         "20 degC", "--flow", "150 mL/min"),
        2, "TMP"),
    "unknown stage": (
        lambda w: w.as_user("op.kim", "test", "water", "QMB-0142", "--stage", "mid-run", *WATER,
                            "--flow", "150 mL/min"),
        2, "stage 'mid-run' is unknown"),
    "activity time without offset": (
        lambda w: _water(w, *WATER, "--flow", "150 mL/min", "--activity-time",
                         "2026-11-30T14:05"),
        2, "has no UTC offset"),
    "activity time in the future": (
        lambda w: _water(w, *WATER, "--flow", "150 mL/min", "--activity-time",
                         "2999-01-01T00:00Z"),
        2, "in the future"),
    "activity time before the last record": (
        lambda w: _water(w, *WATER, "--flow", "150 mL/min", "--activity-time",
                         "2020-01-01T00:00Z"),
        2, "enter records in the order they happened"),
    "integrity at the wrong test pressure": (
        lambda w: w.as_user("op.kim", "test", "integrity", "QMB-0142", "--start", "25 psi",
                            "--end", "24.9 psi", "--hold-time", "5 min"),
        2, "differs from the module type's stated"),
    "cleaning concentration nonsense": (
        lambda w: w.as_user("op.kim", "care", "clean", "QMB-0142", "--agent", "NaOH",
                            "--concentration", "5 psi", "--temperature", "25 degC",
                            "--contact-time", "60 min", "--reagent-lot", "NX-1"),
        2, "is not a concentration"),
    "rinse pH out of range": (
        lambda w: w.as_user("op.kim", "care", "clean", "QMB-0142", "--agent", "NaOH",
                            "--concentration", "0.5 M", "--temperature", "25 degC",
                            "--contact-time", "60 min", "--reagent-lot", "NX-1",
                            "--rinse-ph", "15"),
        2, "rinse pH 15.0 is out of range"),
    "empty reagent lot": (
        lambda w: w.as_user("op.kim", "care", "clean", "QMB-0142", "--agent", "NaOH",
                            "--concentration", "0.5 M", "--temperature", "25 degC",
                            "--contact-time", "60 min", "--reagent-lot", "  "),
        2, "--reagent-lot '  ': the reagent lot is empty; expected the lot number"),
    "wrong password": (
        lambda w: w.cli("module", "add", "QMB-0150", "--type", "HF-750", "--user", "op.kim",
                        "--password-stdin", input="not-my-password\n"),
        3, "wrong password"),
    "unknown user": (
        lambda w: w.cli("module", "add", "QMB-0150", "--type", "HF-750", "--user", "nobody",
                        "--password-stdin", input="whatever-pass\n"),
        3, "no user 'nobody'"),
    "administrator records a test": (
        lambda w: w.as_user("sysadm", "test", "water", "QMB-0142", "--stage", "pre-use", *WATER,
                            "--flow", "150 mL/min"),
        3, "sysadm (admin) may not record"),
    "out-of-order action": (
        lambda w: w.as_user("op.kim", "use", "end", "QMB-0142"),
        3, "first start a use"),
    "operator defines a module type": (
        lambda w: w.as_user("op.kim", "module-type", "add", "HF-100", "--membrane", "mPES",
                            "--pore-rating", "100 kDa", "--lumen-diameter", "1 mm", "--fibers",
                            "50", "--length", "20 cm", "--area", "300 cm^2", "--decay-limit",
                            "0.1 psi/min", "--test-pressure", "10 psi", "--reuse-limit", "10",
                            "--storage-limit", "30 d"),
        3, "may not define module types"),
}  # fmt: skip

ESC = "\x1b[2J\x1b[31m"  # clear the screen, then print in red


def _type(w: World, code: str, *more: str) -> Result:
    from tests.world import TYPE_OPTIONS

    return w.as_user("eng.ray", "module-type", "add", code, *TYPE_OPTIONS, *more)


def _use(w: World, product: str, lot: str) -> Result:
    return w.as_user("op.kim", "use", "start", "QMB-0142", "--product", product, "--lot", lot)


# Hostile identifiers and free text: each is refused by the rule of ledger/rules/names.py.
CASES.update({
    "NUL in a serial": (
        lambda w: w.as_user("op.kim", "module", "add", "QMB-\x000150", "--type", "HF-750"),
        2, "holds a control character (U+0000"),
    "newline in a serial": (
        lambda w: w.as_user("op.kim", "module", "add", "QMB-01\n50", "--type", "HF-750"),
        2, "holds a line break (U+000A"),
    "terminal escape sequence in a serial": (
        lambda w: w.as_user("op.kim", "module", "add", f"QMB-0150{ESC}", "--type", "HF-750"),
        2, "'QMB-0150\\x1b[2J\\x1b[31m' holds a control character (U+001B"),
    "right-to-left override in a serial": (
        lambda w: w.as_user("op.kim", "module", "add", "QMB-\u202e0510", "--type", "HF-750"),
        2, "holds a text-direction override (U+202E RIGHT-TO-LEFT OVERRIDE)"),
    "zero-width space: a look-alike of an existing serial": (
        lambda w: w.as_user("op.kim", "module", "add", "QMB-01\u200b42", "--type", "HF-750"),
        2, "U+200B ZERO WIDTH SPACE"),
    "no-break space in a serial": (
        lambda w: w.as_user("op.kim", "module", "add", "QMB\u00a00150", "--type", "HF-750"),
        2, "holds a space (U+00A0"),
    "Cyrillic letter among Latin ones in a serial": (
        lambda w: w.as_user("op.kim", "module", "add", "QM\u0412-0142", "--type", "HF-750"),
        2, "mixes Latin and Cyrillic letters"),
    "a serial differing only in case is the existing module": (
        lambda w: w.as_user("op.kim", "module", "add", "qmb-0142", "--type", "HF-750"),
        2, "module 'QMB-0142' is already registered"),
    "100 KB serial": (
        lambda w: w.as_user("op.kim", "module", "add", "Q" * 100_000, "--type", "HF-750"),
        2, "is 100000 characters long; expected the module's serial number"),
    "control character in a manufacturer lot": (
        lambda w: w.as_user("op.kim", "module", "add", "QMB-0150", "--type", "HF-750",
                            "--manufacturer-lot", "ML-1\x07"),
        2, "the manufacturer lot 'ML-1\\x07' holds a control character (U+0007"),
    "escape sequence in a module note": (
        lambda w: w.as_user("op.kim", "module", "add", "QMB-0150", "--type", "HF-750",
                            "--note", f"fine{ESC}"),
        2, "holds a control character (U+001B"),
    "a type code differing only in case": (
        lambda w: _type(w, "hf-750"), 2, "module type 'HF-750' exists"),
    "zero-width joiner in a type code": (
        lambda w: _type(w, "HF-750\u200d"), 2, "U+200D ZERO WIDTH JOINER"),
    "line break in a membrane name": (
        lambda w: _type(w, "HF-751", "--membrane", "mPES\nPASS"), 2, "holds a line break"),
    "reference temperature of -300 degC": (
        lambda w: _type(w, "HF-752", "--reference-temperature", "-300 degC"),
        2, "--reference-temperature '-300 degC': the NWP reference temperature -300.00 °C is "
           "outside the range of the water-viscosity correlation"),
    "reference temperature of 5000 degC": (
        lambda w: _type(w, "HF-753", "--reference-temperature", "5000 degC"),
        2, "expected 0 to 100 °C (liquid water at 1 atm)"),
    "escape sequence in a lot": (
        lambda w: _use(w, "QB-117", f"QB117-26-014{ESC}"), 2, "the lot 'QB117-26-014\\x1b"),
    "right-to-left override in a product": (
        lambda w: _use(w, "QB-\u202e711", "QB117-26-014"), 2, "the product 'QB-\\u202e711'"),
    "NUL in a reagent lot": (
        lambda w: w.as_user("op.kim", "care", "clean", "QMB-0142", "--agent", "NaOH",
                            "--concentration", "0.5 M", "--temperature", "25 degC",
                            "--contact-time", "60 min", "--reagent-lot", "NX-\x001"),
        2, "the reagent lot 'NX-\\x001' holds a control character"),
    "carriage return in a hold reason": (
        lambda w: w.as_user("qa.lin", "module", "hold", "QMB-0142", "--reason",
                            "leak\rall fine"),
        2, "the reason 'leak\\rall fine' holds a line break (U+000D"),
    "2,001-character hold reason": (
        lambda w: w.as_user("qa.lin", "module", "hold", "QMB-0142", "--reason", "x" * 2001),
        2, "is 2001 characters long"),
    "newline in a person's name": (
        lambda w: w.as_user("sysadm", "user", "add", "op.new", "--name", "Ann\nAdmin",
                            "--role", "operator", extra=["new-pass-123"]),
        2, "the name 'Ann\\nAdmin' holds a line break"),
    "escape sequence in a user ID": (
        lambda w: w.as_user("sysadm", "user", "add", f"op.x{ESC}", "--name", "X",
                            "--role", "operator", extra=["new-pass-123"]),
        2, "holds a control character (U+001B"),
})  # fmt: skip


@pytest.mark.sqlite_only
@pytest.mark.parametrize("name", list(CASES))
def test_rejected_input_changes_nothing(world: World, name: str) -> None:
    world.ready()
    case, code, message = CASES[name]
    before = world.snapshot()
    out = case(world)
    after = world.snapshot()
    if name == "wrong password":
        # The failed attempt itself is audited (lockout needs the count): one change event.
        assert after["audit_event"] == before["audit_event"] + 1
        after = {k: v for k, v in after.items() if k not in ("audit_event", "head")}
        before = {k: v for k, v in before.items() if k not in ("audit_event", "head")}
    assert out.code == code, (out.stdout, out.stderr)
    assert out.exception is None
    assert "Traceback" not in out.stderr
    assert out.stderr.startswith("error: ") and out.stderr.count("\n") == 1
    assert out.stderr[:-1].isprintable(), "a raw control character reached the terminal"
    assert message in out.stderr
    assert after == before


@pytest.mark.sqlite_only
def test_retired_module_takes_no_test(world: World) -> None:
    world.ready()
    world.ok(world.as_user("qa.lin", "module", "retire", "QMB-0142", "--reason", "end of life"))
    before = world.snapshot()
    out = world.baseline()
    assert out.code == 3 and "it is retired" in out.stderr
    assert world.snapshot() == before


@pytest.mark.sqlite_only
def test_bad_points_file_line_is_named(world: World, tmp_path: object) -> None:
    from pathlib import Path

    world.add_module()
    f = Path(str(tmp_path)) / "points.csv"
    f.write_text("feed [psi],retentate [psi],permeate_flow [mL/min]\n3.2,2.8,150\n3.0,3.4,x\n")
    before = world.snapshot()
    out = world.as_user(
        "op.kim",
        "test",
        "water",
        "QMB-0142",
        "--stage",
        "baseline",
        "--points-file",
        str(f),
        "--temperature",
        "20 degC",
    )
    assert out.code == 2 and f"{f}:3:" in out.stderr
    f.write_text("feed [psi],retentate [psi],permeate_flow [mL/min]\n3.2,2.8,150\n0.0,0.0,80\n")
    out = world.as_user(
        "op.kim",
        "test",
        "water",
        "QMB-0142",
        "--stage",
        "baseline",
        "--points-file",
        str(f),
        "--temperature",
        "20 degC",
    )
    assert out.code == 2 and f"{f}:3:" in out.stderr and "TMP" in out.stderr
    assert world.snapshot() == before


def test_a_failure_after_the_first_row_rolls_everything_back(
    world: World, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The record and its audit event are flushed before the status step; a crash there must
    leave neither behind."""
    import ledger.logbook.waterflux as waterflux

    world.add_module()
    before = world.snapshot()

    def crash(*_: object) -> None:
        raise RuntimeError("simulated crash after the record was written")

    monkeypatch.setattr(waterflux, "_advance", crash)
    out = world.baseline()
    assert isinstance(out.exception, RuntimeError)  # a bug is a traceback, not a user error
    assert world.snapshot() == before


def test_a_procedure_code_differing_only_in_case_is_the_existing_one(world: World) -> None:
    from tests.world import PROCEDURE

    world.ok(world.as_user("eng.ray", *PROCEDURE))
    before = world.snapshot()
    again = [a if a != "CP-NAOH-05" else "cp-naoh-05" for a in PROCEDURE]
    out = world.as_user("eng.ray", *again)
    assert out.code == 2 and "cleaning procedure 'CP-NAOH-05' exists" in out.stderr
    assert world.snapshot() == before


def test_module_list_shows_only_clean_serials(world: World) -> None:
    """The hostile serials above are refused, so `module list` never prints one raw."""
    world.add_module("QMB-0142")
    for serial in (f"QMB-0150{ESC}", "QMB-\u202e0510", "qmb-0142", "QMB-0142\u200b"):
        assert world.as_user("op.kim", "module", "add", serial, "--type", "HF-750").code == 2
    listed = world.cli("module", "list")
    assert listed.code == 0 and "\x1b" not in listed.stdout and "\u202e" not in listed.stdout
    assert [m["serial"] for m in world.cli("module", "list", "--json").json()["modules"]] == [
        "QMB-0142"
    ]
