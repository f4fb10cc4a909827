"""`run templates`: each shipped template with its product and inputs (kind, unit, default),
from ``template.catalogue()``; the CLI prints it as tables that fit 80 columns, or as JSON."""

from __future__ import annotations

import tomllib

import pint
import pytest

from ledger import units
from ledger.runs import template
from tests.world import invoke


def _files() -> dict[str, dict]:
    out = {}
    for path in template.shipped_dir().glob("*.toml"):
        data = tomllib.loads(path.read_text(encoding="utf-8"))
        out[data["template"]["id"]] = data
    return out


def test_catalogue_is_what_the_files_say() -> None:
    files = _files()
    listed = template.catalogue()
    assert [e.id for e in listed] == sorted(files)
    for entry in listed:
        data = files[entry.id]
        assert entry.version == str(data["template"]["version"])
        assert entry.product == data["template"].get("product")
        assert {i.name for i in entry.inputs} == set(data["inputs"])
        for info in entry.inputs:
            spec = data["inputs"][info.name]
            assert info.kind == spec["kind"]
            assert info.required is ("default" not in spec)
            if info.kind in units.KINDS:
                assert info.unit == units.KINDS[info.kind].display
            assert (info.default is None) is info.required
            assert info.default_text == spec.get("default")


def test_required_inputs_come_first() -> None:
    for entry in template.catalogue():
        flags = [i.required for i in entry.inputs]
        assert flags == sorted(flags, reverse=True)


def test_a_default_is_in_si() -> None:
    lnp = next(e for e in template.catalogue() if e.id == "QB-MR-LNP-101")
    tmp = next(i for i in lnp.inputs if i.name == "tmp_setpoint")
    assert tmp.default_text == "0.25 bar"
    assert tmp.default == pytest.approx(25_000.0)  # 1 bar = 100 kPa (SI Brochure, 9th ed.)
    removal = next(i for i in lnp.inputs if i.name == "ethanol_removal")
    assert removal.default == pytest.approx(0.995)


def test_cli_json_lists_products_and_inputs() -> None:
    result = invoke(["run", "templates", "--json"])
    assert result.code == 0, result
    out = result.json()
    by_id = {t["id"]: t for t in out["templates"]}
    stock: pint.UnitRegistry = pint.UnitRegistry()  # built once: each takes most of a second
    for entry in template.catalogue():
        row = by_id[entry.id]
        assert row["product"] == entry.product and row["version"] == entry.version
        assert len(row["sha256"]) == 64
        names = [i["name"] for i in row["inputs"]]
        assert names == [i.name for i in entry.inputs]
        for shown, info in zip(row["inputs"], entry.inputs, strict=True):
            assert shown["required"] is info.required
            if info.default is None:
                assert shown["default"] is None
            elif info.kind == "number":
                assert shown["default"] == info.default
            else:  # a quantity in its display unit, as DEVELOPERS.md asks of JSON
                assert shown["default"]["unit"] == info.unit
                # Read back by a stock pint registry, as any JSON consumer would.
                q = stock.Quantity(shown["default"]["value"], info.unit)
                assert q.to_base_units().magnitude == pytest.approx(info.default, rel=1e-9)


def test_cli_tables_fit_80_columns() -> None:
    result = invoke(["run", "templates"], env={"COLUMNS": "80"})
    assert result.code == 0, result
    lines = result.stdout.splitlines()
    assert max(len(line.rstrip()) for line in lines) <= 80
    for entry in template.catalogue():
        assert f"Inputs of {entry.id}" in result.stdout
        assert entry.product is None or entry.product in result.stdout
    assert "required" in result.stdout
