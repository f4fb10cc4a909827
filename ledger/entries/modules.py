"""Module entries: a module type with its site limits (``module-type add``) and a module
(``module add``)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from datetime import date
from typing import TYPE_CHECKING

from ledger.entries.defaults import TYPE_DEFAULTS
from ledger.entries.fields import Field, Spec, together

if TYPE_CHECKING:
    from ledger.logbook.modules import TypeSpec


def _limit(name: str, kind: str, required: bool = False) -> Field:
    return Field(name, kind, required=required, bare_ratio=False)


MODULE_TYPE = Spec(
    "module-type add",
    (
        Field("code", required=True),
        Field("membrane", required=True),
        Field("pore_rating", required=True),
        _limit("lumen_diameter", "length", True),
        Field("fibers", "integer", required=True),
        _limit("length", "length", True),
        _limit("area", "area"),  # left out: the inner lumen area of the fibers
        _limit("decay_limit", "pressure_rate", True),
        _limit("test_pressure", "pressure", True),
        Field("reuse_limit", "integer", required=True),
        _limit("storage_limit", "time", True),
        _limit("bubble_point_min", "pressure"),
        Field("supplier"),
        _limit("max_loading", "areal_volume"),
        _limit("max_mass_loading", "areal_mass"),
        _limit("clean_hold", "time"),
        _limit("reference_temperature", "temperature"),
        _limit("recovery_min", "fraction"),
        _limit("recovery_alert", "fraction"),
        _limit("damage_ratio", "fraction"),
        _limit("preuse_band", "fraction"),
        _limit("diffusion_max_flow", "gas_flow"),
        _limit("diffusion_test_pressure", "pressure"),
        _limit("intrusion_max_flow", "flow"),
        _limit("intrusion_test_pressure", "pressure"),
    ),
)


def module_type(raw: Mapping[str, object]) -> TypeSpec:
    """Check a module-type entry (SI). Without an area the service computes the inner lumen
    area (fibers × π × lumen diameter × length); a stated one is checked against it."""
    from ledger.logbook.modules import TypeSpec

    v = MODULE_TYPE.parse(raw, TYPE_DEFAULTS)
    # A flow limit means nothing without the pressure it holds at, and the reverse.
    together(v, "a diffusion limit", "diffusion_max_flow", "diffusion_test_pressure")
    together(v, "a water-intrusion limit", "intrusion_max_flow", "intrusion_test_pressure")
    return TypeSpec(
        code=v["code"].strip(),
        membrane=v["membrane"],
        pore_rating=v["pore_rating"],
        lumen_diameter_m=v["lumen_diameter"],
        fiber_count=v["fibers"],
        effective_length_m=v["length"],
        area_m2=v["area"],
        decay_limit_pa_s=v["decay_limit"],
        integrity_test_pressure_pa=v["test_pressure"],
        reuse_limit_cycles=v["reuse_limit"],
        storage_limit_s=v["storage_limit"],
        bubble_point_min_pa=v["bubble_point_min"],
        supplier=v["supplier"],
        reference_temperature_k=v["reference_temperature"],
        recovery_min=v["recovery_min"],
        recovery_alert=v["recovery_alert"],
        damage_ratio=v["damage_ratio"],
        preuse_band=v["preuse_band"],
        max_volume_loading_m=v["max_loading"],
        max_mass_loading_kg_m2=v["max_mass_loading"],
        clean_hold_s=v["clean_hold"],
        diffusion_max_flow_m3_s=v["diffusion_max_flow"],
        diffusion_test_pressure_pa=v["diffusion_test_pressure"],
        intrusion_max_flow_m3_s=v["intrusion_max_flow"],
        intrusion_test_pressure_pa=v["intrusion_test_pressure"],
        entered=v.entered(),
    )


MODULE = Spec(
    "module add",
    (
        Field("serial", required=True),
        Field("type_code", required=True),
        Field("manufacturer_lot"),
        Field("received", "date"),
        Field("note"),
    ),
)


@dataclass(frozen=True)
class ModuleEntry:
    serial: str
    type_code: str
    manufacturer_lot: str | None
    received_on: date | None
    note: str | None


def module(raw: Mapping[str, object]) -> ModuleEntry:
    """Check a module's registration."""
    v = MODULE.parse(raw)
    return ModuleEntry(v["serial"], v["type_code"], v["manufacturer_lot"], v["received"], v["note"])
