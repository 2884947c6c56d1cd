"""Values as a technician writes them, for the sheet (via :mod:`inventory.values`)."""

from __future__ import annotations

import math

from inventory.values import format_si, format_value

__all__ = ["value", "si", "location_of"]


def value(x: float, kind: str) -> str:
    """A part value in RKM style ("4k7", "100n"); ``kind`` is resistor or capacitor."""
    return format_value(float(x), kind)


def si(x: float | None, unit: str, digits: int = 3) -> str:
    """A figure with an SI prefix and unit ("12.3 mA"); "—" for a missing value."""
    if x is None:
        return "—"
    x = float(x)
    if not math.isfinite(x):
        return "—"
    return format_si(x, unit, digits)


def location_of(pick) -> str:
    """The bin location(s) a role's pieces come from, in order, without repeats."""
    seen: list[str] = []
    for pc in pick.pieces:
        loc = (pc.location or "").strip()
        if loc and loc not in seen:
            seen.append(loc)
    return " + ".join(seen)
