"""Master-record templates: the shipped ones load, and every mistake names file, line and key."""

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


def problem(err: pytest.ExceptionInfo[InputError], key: str) -> InputError:
    """The one mistake of the raised TemplateError that names ``key``."""
    assert isinstance(err.value, template.TemplateError), err.value
    found = [p for p in err.value.problems if p.field == key]
    assert len(found) == 1, str(err.value)
    return found[0]


def assert_names(p: InputError, source: str, line: int, key: str, why: str) -> None:
    text = str(p)
    assert text.startswith(f"{source}:{line}: {key}: "), text
    assert why in text, text
    assert text.count(source) == 1 and f"{key}: {key}" not in text, text  # no doubled prefix


# Lines of MINIMAL (it starts with an empty line): [template] 2, signatures 6,
# initial_volume 9, target_shear 10, [parameters.feed_flow] 12, title 13, expr 14, unit 15,
# actual 16, range 17, [[steps]] 19, signatures 23, text 24, [qc.ph] 26.
@pytest.mark.parametrize(
    ("old", "new", "key", "line", "why", "count"),
    [
        ("feed_flow_for_shear(target_shear, fibers, lumen_diameter)",
         "feed_flow_for_shear(target_sheer, fibers, lumen_diameter)",
         "parameters.feed_flow.expr", 14, "unknown name 'target_sheer'", 1),
        # A pressure unit on a flow: the expression and the skid-log metric both disagree.
        ('unit = "mL/min"', 'unit = "bar"', "parameters.feed_flow.expr", 14, "gives", 2),
        ('unit = "mL/min"', 'unit = "bar"', "parameters.feed_flow.actual", 16, "is a flow", 2),
        ("feed_flow_for_shear(target_shear, fibers, lumen_diameter)", "initial_volume +",
         "parameters.feed_flow.expr", 14, "not a valid expression", 1),
        ("feed_flow_for_shear(target_shear, fibers, lumen_diameter)",
         "initial_volume + target_shear", "parameters.feed_flow.expr", 14, "unit mismatch", 1),
        ('actual = "feed_flow.mean"', 'actual = "feed_flow.median"',
         "parameters.feed_flow.actual", 16, "unknown metric", 1),
        ('actual = "feed_flow.mean"', 'actual = "tmp.mean"', "parameters.feed_flow.actual", 16,
         "is a pressure", 1),
        # A missing key has no line of its own: its table's header is named.
        ('range = { relative = "10 %" }', "", "parameters.feed_flow.range", 12, "needs a range",
         1),
        ('title = "Feed flow"', 'title = "Feed flow"\nexpresion = "1"',
         "parameters.feed_flow.expresion", 14, "unknown key", 1),
        ('signatures = ["performed"]', 'signatures = ["witnessed"]', "steps[1].signatures", 23,
         "unknown signature meaning", 1),
        ('signatures = ["performed", "approved"]', 'signatures = ["approved", "performed"]',
         "template.signatures", 6, "out of order", 1),
        ('text = "Run at {{ feed_flow }}."', 'text = "Run at {{ feed_flwo }}."', "steps[1].text",
         24, "unknown name 'feed_flwo'", 1),
        ('kind = "volume"', 'kind = "volumes"', "inputs.initial_volume.kind", 9, "unknown kind",
         1),
        ('default = "4000 1/s"', 'default = "4000 mL"', "inputs.target_shear.default", 10,
         "volume", 1),
        ('low = "7.0"', 'low = "9.0"', "qc.ph", 26, "low is above high", 1),
        ('unit = "mL/min"', 'unit = "wibbles"', "parameters.feed_flow.unit", 15, "unknown unit",
         1),
    ],
)  # fmt: skip
def test_a_mistake_names_file_line_and_key(
    old: str, new: str, key: str, line: int, why: str, count: int
) -> None:
    assert old in MINIMAL
    with pytest.raises(InputError) as err:
        template.parse(MINIMAL.replace(old, new, 1).encode(), "bad.toml")
    assert isinstance(err.value, template.TemplateError)
    assert len(err.value.problems) == count, str(err.value)
    assert_names(problem(err, key), "bad.toml", line, key, why)
    if count == 1:
        assert str(err.value) == str(err.value.problems[0])


def test_bad_toml_names_the_file(tmp_path: Path) -> None:
    p = tmp_path / "broken.toml"
    p.write_text("[template\nid = 1\n")
    with pytest.raises(InputError, match=r"broken\.toml:1: not a valid TOML"):
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
    assert_names(problem(err, key), "bad.toml", 7, key, why)
