"""The pin that drives a low-side switch: the role that fills a switch calculation's drive inputs from a driver
part (its high and low levels, its source-current rating and its own supply), shared by every switch kind."""

from __future__ import annotations

from calcsvc.core.spec import Role

SWITCH_DRIVER = Role(
    "driver",
    "driver",
    (
        ("voh_v", "drive_high_v"),
        ("vol_v", "drive_low_v"),
        ("source_current_max_a", "driver_current_max_a"),
        ("vdd_v", "drive_supply_v"),
    ),
)
