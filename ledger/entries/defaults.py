"""Entries' defaults, as text a user would type: one place that the entries apply and the
command line's help shows. Plain data, so that registering the commands costs nothing."""

from __future__ import annotations

SHEAR_DEFAULTS = {"temperature": "20 degC"}
DIAFILTRATION_DEFAULTS = {"sieving": "1"}
CONCENTRATION_DEFAULTS = {"rejection": "1"}
LIFETIME_DEFAULTS = {"model": "linear"}
DECAY_DEFAULTS = {
    "atmosphere": "1 atm",
    "back_pressure": "0 psi",
    "vcf": "1.0",
    "temperature": "20 degC",
}
BUBBLE_POINT_DEFAULTS = {"contact_angle": "0.0", "temperature": "20 degC"}
# A module type's limits: common practice, no single source; a site states its own
# validated values.
TYPE_DEFAULTS = {
    "reference_temperature": "20 degC",
    "recovery_min": "80 %",
    "recovery_alert": "90 %",
    "damage_ratio": "120 %",
    "preuse_band": "10 %",
}
