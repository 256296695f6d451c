"""What every answer says about safety: one standing line deferring to codes, datasheets and licensed practice,
and the standing cautions a kind of supply carries whether or not the design overloads it."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

SAFETY_LINE = (
    "calcsvc is a design aid, not a substitute for judgement: verify on the bench, and defer to local electrical "
    "codes, the datasheets of the parts you actually use and licensed practice wherever mains power, batteries or "
    "people's safety are involved."
)

# A supply part's ``source``; without one, a part that states a capacity is taken for a battery pack.
SUPPLY_CAUTIONS: dict[str, str] = {
    "mains_adapter": (
        "Mains adapter: use a certified unit and keep its mains side dry and enclosed. A greenhouse or any damp "
        "place needs an enclosure and wiring rated for it, as local electrical codes require."
    ),
    "battery": (
        "Battery pack: fuse it close to its terminals, never recharge primary (non-rechargeable) cells, do not mix "
        "old and new cells, and keep it ventilated and away from heat."
    ),
}


def supply_source(parameters: Mapping[str, Any]) -> str | None:
    """A supply's kind of source as stated, else a battery when it states a capacity; None when unknown."""
    stated = parameters.get("source")
    if stated is not None:
        return str(stated)
    return "battery" if parameters.get("capacity_ah") is not None else None


def supply_cautions(parameters: Mapping[str, Any]) -> list[str]:
    """The standing cautions of a supply with these parameters (or of a design's explicit supply values)."""
    source = supply_source(parameters)
    return [SUPPLY_CAUTIONS[source]] if source in SUPPLY_CAUTIONS else []
