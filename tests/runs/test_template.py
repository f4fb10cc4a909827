"""Master-record templates: the shipped ones load, and every mistake names file and key."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest

from ledger.errors import InputError
from ledger.runs import template

SHIPPED = sorted(template.shipped_dir().glob("*.toml"))

MINIMAL = """
[template]
id = "T-1"
version = "1"
title = "test"
signatures = ["performed", "approved"]

[inputs]
initial_volume = { kind = "volume", title = "feed" }
target_shear = { kind = "shear_rate", title = "shear", default = "4000 1/s" }

[parameters.feed_flow]
title = "Feed flow"
expr = "feed_flow_for_shear(target_shear, fibers, lumen_diameter)"
unit = "mL/min"
actual = "feed_flow.mean"
range = { relative = "10 %" }

[[steps]]
operation = "op"
phase = "concentrate"
title = "Concentrate"
signatures = ["performed"]
text = "Run at {{ feed_flow }}."

[qc.ph]
title = "pH"
unit = ""
low = "7.0"
high = "8.0"
"""


def test_both_shipped_templates_load_with_their_hash() -> None:
    assert len(SHIPPED) == 2
    for path in SHIPPED:
        t = template.load(path)
        assert t.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
        assert t.signatures[-1] == "approved"
        assert {s.phase for s in t.steps} >= {p.phase for p in t.parameters if p.phase}
    assert {t.id for t in template.shipped()} == {"QB-MR-LNP-101", "QB-MR-UFDF-201"}


def test_minimal_template_parses() -> None:
    t = template.parse(MINIMAL.encode(), "t.toml")
    assert [p.name for p in t.parameters] == ["feed_flow"]
    assert t.qc[0].low == 7.0 and t.qc[0].high == 8.0


@pytest.mark.parametrize(
    ("old", "new", "key", "why"),
    [
        ("feed_flow_for_shear(target_shear, fibers, lumen_diameter)",
         "feed_flow_for_shear(target_sheer, fibers, lumen_diameter)",
         "parameters.feed_flow.expr", "unknown name 'target_sheer'"),
        ('unit = "mL/min"', 'unit = "bar"', "parameters.feed_flow.expr", "gives"),
        ("feed_flow_for_shear(target_shear, fibers, lumen_diameter)", "initial_volume +",
         "parameters.feed_flow.expr", "not a valid expression"),
        ("feed_flow_for_shear(target_shear, fibers, lumen_diameter)",
         "initial_volume + target_shear", "parameters.feed_flow.expr", "unit mismatch"),
        ('actual = "feed_flow.mean"', 'actual = "feed_flow.median"',
         "parameters.feed_flow.actual", "unknown metric"),
        ('actual = "feed_flow.mean"', 'actual = "tmp.mean"', "parameters.feed_flow.actual",
         "is a pressure"),
        ('range = { relative = "10 %" }', "", "parameters.feed_flow.range", "needs a range"),
        ('title = "Feed flow"', 'title = "Feed flow"\nexpresion = "1"',
         "parameters.feed_flow.expresion", "unknown key"),
        ('signatures = ["performed"]', 'signatures = ["witnessed"]', "steps[1].signatures",
         "unknown signature meaning"),
        ('signatures = ["performed", "approved"]', 'signatures = ["approved", "performed"]',
         "template.signatures", "out of order"),
        ('text = "Run at {{ feed_flow }}."', 'text = "Run at {{ feed_flwo }}."', "steps[1].text",
         "unknown name 'feed_flwo'"),
        ('kind = "volume"', 'kind = "volumes"', "inputs.initial_volume.kind", "unknown kind"),
        ('default = "4000 1/s"', 'default = "4000 mL"', "inputs.target_shear.default", "volume"),
        ('low = "7.0"', 'low = "9.0"', "qc.ph", "low is above high"),
        ('unit = "mL/min"', 'unit = "wibbles"', "parameters.feed_flow.unit", "unknown unit"),
    ],
)  # fmt: skip
def test_a_mistake_names_file_and_key(old: str, new: str, key: str, why: str) -> None:
    assert old in MINIMAL
    with pytest.raises(InputError) as err:
        template.parse(MINIMAL.replace(old, new, 1).encode(), "bad.toml")
    text = str(err.value)
    assert text.startswith(f"bad.toml: {key}"), text
    assert why in text, text


def test_bad_toml_names_the_file(tmp_path: Path) -> None:
    p = tmp_path / "broken.toml"
    p.write_text("[template\nid = 1\n")
    with pytest.raises(InputError, match=r"broken\.toml: not a valid TOML"):
        template.load(p)


def test_unknown_template_reference_lists_the_shipped_ones() -> None:
    with pytest.raises(InputError, match=r"QB-MR-LNP-101"):
        template.find("NO-SUCH-TEMPLATE")


SIGNERS = 'signatures = ["performed", "approved"]'


def test_signers_default_to_common_practice_and_can_be_set() -> None:
    t = template.parse(MINIMAL.encode(), "t.toml")
    assert t.signers == {"performed": ("operator", "engineer"), "approved": ("qa",)}
    text = MINIMAL.replace(SIGNERS, SIGNERS + '\nsigners = { performed = ["operator"], '
                           'approved = ["qa", "engineer"] }')  # fmt: skip
    t = template.parse(text.encode(), "t.toml")
    assert t.signers == {"performed": ("operator",), "approved": ("qa", "engineer")}


@pytest.mark.parametrize(
    ("signers", "key", "why"),
    [
        ('{ performed = ["admin"], approved = ["qa"] }', "template.signers.performed",
         "role 'admin' may not sign records"),
        ('{ performed = ["operator"] }', "template.signers.approved", "no roles given"),
        ('{ performed = ["operator"], approved = ["qa"], reviewed = ["qa"] }',
         "template.signers.reviewed", "is not one of this template's signatures"),
        ('{ performed = [], approved = ["qa"] }', "template.signers.performed",
         "expected a list of roles"),
    ],
)  # fmt: skip
def test_bad_signers_name_the_key(signers: str, key: str, why: str) -> None:
    text = MINIMAL.replace(SIGNERS, f"{SIGNERS}\nsigners = {signers}")
    with pytest.raises(InputError) as err:
        template.parse(text.encode(), "bad.toml")
    assert str(err.value).startswith(f"bad.toml: {key}"), str(err.value)
    assert why in str(err.value)
