"""Loading a template reports every mistake in the file at once, each with its line and key;
the lines come from a scan of the TOML text, checked here against lines found by hand."""

from __future__ import annotations

import pytest

from ledger.errors import InputError
from ledger.runs import template

LNP = (template.shipped_dir() / "qb_lnp_buffer_exchange.toml").read_text(encoding="utf-8")


def line_of(text: str, needle: str) -> int:
    """The 1-based line of the first line holding ``needle`` (a plain text search)."""
    return next(i for i, line in enumerate(text.splitlines(), 1) if needle in line)


def test_three_mistakes_are_reported_together_with_their_lines() -> None:
    text = (
        LNP.replace('expr = "initial_volume / area"', 'expr = "initial_volum / area"')
        .replace(
            'expr = "diavolumes * df_volume"', 'expr = "diavolumes * df_volume + target_shear"'
        )
        .replace('title = "Final concentrate volume"', 'titel = "Final concentrate volume"')
    )
    with pytest.raises(InputError) as err:
        template.parse(text.encode(), "three.toml")
    error = err.value
    assert isinstance(error, template.TemplateError)
    expected = [
        (line_of(text, "initial_volum / area"), "parameters.volume_loading.expr",
         "unknown name 'initial_volum'"),
        (line_of(text, "df_volume + target_shear"), "parameters.buffer_volume.expr",
         "unit mismatch"),
        (line_of(text, "titel = "), "parameters.final_volume.titel", "unknown key"),
        # The misspelt key leaves the required title missing: named at the table's header.
        (line_of(text, "[parameters.final_volume]"), "parameters.final_volume.title",
         "is missing"),
    ]  # fmt: skip
    expected.sort()
    assert [(p.line, p.field) for p in error.problems] == [(n, k) for n, k, _ in expected]
    lines = str(error).splitlines()
    assert lines[0] == "three.toml: 4 mistakes in the template:"
    for shown, (number, key, why) in zip(lines[1:], expected, strict=True):
        assert shown.startswith(f"  three.toml:{number}: {key}: "), shown
        assert why in shown, shown
        assert shown.count("three.toml") == 1 and f"{key}: {key}" not in shown, shown
    assert error.field == expected[0][1]
    assert error.exit_code == 2


def test_mistakes_in_every_part_of_the_file_are_all_reported() -> None:
    text = (
        LNP.replace('version = "7"\n', 'version = "7"\nauthor = "x"\n')
        .replace('default = "4000 1/s"', 'default = "4000 mL"')
        .replace('actual = "tmp.mean"', 'actual = "tmp.median"')
        .replace('signatures = ["performed"]', 'signatures = ["witnessed"]')
        .replace("{{ ethanol_removal }}", "{{ ethanol_remover }}")
        .replace('high = "0.20"', 'high = "0.20 bar"')
        .replace('mass = "product_mass"', 'mass = "product_mas"')
    )
    with pytest.raises(InputError) as err:
        template.parse(text.encode(), "many.toml")
    error = err.value
    assert isinstance(error, template.TemplateError)
    got = {(p.field, p.line) for p in error.problems}
    assert got == {
        ("template.author", line_of(text, "author = ")),
        ("inputs.target_shear.default", line_of(text, "target_shear = ")),
        ("parameters.tmp_mean.actual", line_of(text, "tmp.median")),
        ("steps[1].signatures", line_of(text, '["witnessed"]')),
        ("steps[3].text", line_of(text, "Hold the retentate at") - 1),
        ("qc.pdi.high", line_of(text, '"0.20 bar"')),
        ("optimum.mass", line_of(text, '"product_mas"')),
    }, str(error)
    assert len(error.problems) == 7


def test_a_parameter_with_a_bad_unit_is_not_blamed_again_where_it_is_used() -> None:
    text = LNP.replace('unit = "mg"', 'unit = "mgg"', 1)  # product_mass, used by six others
    with pytest.raises(InputError) as err:
        template.parse(text.encode(), "unit.toml")
    assert isinstance(err.value, template.TemplateError)
    assert [p.field for p in err.value.problems] == ["parameters.product_mass.unit"]


KEYS = '''
# [commented.header] and key = 1 in a comment
[template]
id = "T"   # trailing [comment]
"quoted key" = 1
a.b = 2
text = """
[parameters.not_a_table]
expr = "not a key"
"""
lines = [
  "x = 1",
  [1, 2],
]

[parameters.one]
range = { low = "1 bar", high = "plan" }
literal = \'\'\'
title = "inside"
\'\'\'
title = "real"

[[steps]]
phase = "a"

[[steps]]
phase = "b"
text = "x"
'''


@pytest.mark.parametrize(
    ("key", "needle"),
    [
        ("template", "[template]"),
        ("template.id", 'id = "T"'),
        ("template.quoted key", '"quoted key"'),
        ("template.a.b", "a.b = 2"),
        ("template.a", "a.b = 2"),
        ("template.text", 'text = """'),
        ("template.lines", "lines = ["),
        ("parameters", "[parameters.one]"),
        ("parameters.one", "[parameters.one]"),
        ("parameters.one.range.low", "range = {"),
        ("parameters.one.title", 'title = "real"'),
        ("parameters.one.missing", "[parameters.one]"),
        ("steps[1]", "[[steps]]"),
        ("steps[2].phase", 'phase = "b"'),
        ("steps[2].text", 'text = "x"'),
    ],
)
def test_key_lines_skip_strings_comments_and_arrays(key: str, needle: str) -> None:
    lines = template.KeyLines(KEYS)
    want = line_of(KEYS, needle) if key != "steps[2].phase" else line_of(KEYS, 'phase = "b"')
    if key == "steps[1]":
        want = line_of(KEYS, "[[steps]]")
    assert lines.find(key) == want


def test_key_lines_know_nothing_of_keys_that_are_not_written() -> None:
    lines = template.KeyLines(KEYS)
    assert lines.find("parameters.not_a_table") == line_of(KEYS, "[parameters.one]")
    assert lines.find("commented") is None
    assert lines.find("(top level)") is None
    assert lines.find("x") is None


@pytest.mark.parametrize(
    "unit",
    ["10**10**10", "psi#x", "mg\x00", "L/m^2" + "*m" * 400, "mg\u202e"],
)
def test_a_hostile_unit_is_refused_at_its_line_before_pint_sees_it(unit: str) -> None:
    # pint evaluates numbers in unit text exactly: "10**10**10" would never finish, so the
    # units grammar (ledger.units.check_unit_text) must refuse it first
    text = LNP.replace('unit = "mg"', f"unit = {unit!r}".replace("'", '"'), 1)
    with pytest.raises(InputError) as err:
        template.parse(text.encode(), "unit.toml")
    problems = getattr(err.value, "problems", [err.value])
    assert any(p.line == line_of(LNP, 'unit = "mg"') for p in problems), str(err.value)
    assert "unit" in str(err.value)
