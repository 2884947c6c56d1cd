"""Values that may be bought, as virtual stock rows the search and the planner can use.

A ``[purchase]`` table in a build list (docs/requests.md) says which
preferred series may be ordered, at what price and in which packs.  This module
turns it into *virtual* stock rows: negative ids, a quantity so large that it
never limits the search, location ``"to order"`` and the ratings the
``[purchase]`` keys give.  The planner then decides how many packs of each to
buy; the search never needs to know that a row is virtual.

Which values are offered (a choice of this program, documented in docs/plan.md):

* resistors: every value of ``series`` within the span of resistor values the
  drawer already holds, or 10 Ω – 1 MΩ when it holds none;
* capacitors: every value of ``cap_series`` (default E6) within the span the
  drawer holds, or 10 pF – 1000 µF when it holds none.

Bought capacitors below 1 µF are taken as ceramic, from 1 µF up as
electrolytic (polarised) — common practice for through-hole parts at 50 V.

Units are SI: ohm, farad, volt, watt; tolerances are fractions.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from inventory.parts import Capacitor, Resistor, StockSnapshot

__all__ = [
    "PurchaseOptions",
    "Purchasable",
    "Catalogue",
    "augment",
    "VIRTUAL_QTY",
    "TO_ORDER",
    "ELECTROLYTIC_FROM_F",
    "DEFAULT_RESISTOR_RANGE",
    "DEFAULT_CAPACITOR_RANGE",
]

#: Quantity of a virtual row: large enough never to limit a search.
VIRTUAL_QTY = 10**9
#: Location text of a virtual row.
TO_ORDER = "to order"
#: Bought capacitors from this value up are electrolytic (F); common practice.
ELECTROLYTIC_FROM_F = 1e-6
#: Ranges offered when the drawer holds no part of the kind (ohm, farad).
DEFAULT_RESISTOR_RANGE = (10.0, 1e6)
DEFAULT_CAPACITOR_RANGE = (10e-12, 1000e-6)


@dataclass(frozen=True)
class PurchaseOptions:
    """The ``[purchase]`` table of a build list.

    Prices are per piece (any currency); ``line_cost`` is the fixed cost of
    each distinct value ordered; parts come in whole packs of ``pack`` pieces.
    Tolerances are fractions, power in W, voltage in V.
    """

    series: str = "E24"
    cap_series: str = "E6"
    resistor_price: float = 0.02
    capacitor_price: float = 0.10
    line_cost: float = 0.50
    pack: int = 10
    resistor_tolerance: float = 0.01
    resistor_power: float = 0.25
    capacitor_tolerance: float = 0.10
    capacitor_voltage: float = 50.0

    def price(self, kind: str) -> float:
        """Price of one piece of ``kind`` (resistor or capacitor)."""
        return self.resistor_price if kind == "resistor" else self.capacitor_price


@dataclass(frozen=True)
class Purchasable:
    """One value that may be bought: the virtual row ``id`` (negative) stands for it."""

    id: int
    kind: str                 # resistor | capacitor
    value: float              # ohm or farad
    label: str
    unit_price: float
    pack: int
    tolerance: float
    rating: float             # W for resistors, V for capacitors
    dielectric: str | None = None

    @property
    def pack_price(self) -> float:
        return self.unit_price * self.pack


@dataclass(frozen=True)
class Catalogue:
    """Everything that may be bought, keyed by virtual row id."""

    options: PurchaseOptions | None = None
    items: dict[int, Purchasable] = field(default_factory=dict)

    def __contains__(self, item_id: object) -> bool:
        return item_id in self.items

    def find(self, kind: str, value: float) -> Purchasable | None:
        """The purchasable of ``kind`` whose value equals ``value`` (relative 1e-9)."""
        for p in self.items.values():
            if p.kind == kind and abs(p.value - value) <= 1e-9 * max(abs(value), 1e-30):
                return p
        return None


def _span(values: list[float], default: tuple[float, float]) -> tuple[float, float]:
    vals = [v for v in values if v > 0]
    if not vals:
        return default
    return min(vals), max(vals)


def augment(snapshot: StockSnapshot, options: PurchaseOptions | None
            ) -> tuple[StockSnapshot, Catalogue]:
    """Add one virtual row per purchasable value to ``snapshot``.

    Parameters
    ----------
    snapshot : StockSnapshot
        The drawer as it is.
    options : PurchaseOptions or None
        The ``[purchase]`` table; ``None`` means nothing may be bought and the
        snapshot is returned unchanged with an empty catalogue.

    Returns
    -------
    (StockSnapshot, Catalogue)
        The snapshot with virtual rows appended (ids -1, -2, …) and the
        catalogue mapping each virtual id to its value and price.
    """
    if options is None:
        return snapshot, Catalogue()
    from inventory.values import format_value, series_values

    items: dict[int, Purchasable] = {}
    next_id = -1
    lo, hi = _span([r.value for r in snapshot.resistors], DEFAULT_RESISTOR_RANGE)
    new_r: list[Resistor] = []
    for v in series_values(options.series, lo, hi):
        v = float(v)
        p = Purchasable(next_id, "resistor", v, format_value(v, "resistor"),
                        options.resistor_price, options.pack,
                        options.resistor_tolerance, options.resistor_power)
        items[next_id] = p
        new_r.append(Resistor(value=v, qty=VIRTUAL_QTY, tolerance=p.tolerance,
                              power_w=p.rating, location=TO_ORDER, id=next_id))
        next_id -= 1
    lo, hi = _span([c.value for c in snapshot.capacitors], DEFAULT_CAPACITOR_RANGE)
    new_c: list[Capacitor] = []
    for v in series_values(options.cap_series, lo, hi):
        v = float(v)
        diel = "electrolytic" if v >= ELECTROLYTIC_FROM_F * (1 - 1e-9) else "ceramic"
        p = Purchasable(next_id, "capacitor", v, format_value(v, "capacitor"),
                        options.capacitor_price, options.pack,
                        options.capacitor_tolerance, options.capacitor_voltage, diel)
        items[next_id] = p
        new_c.append(Capacitor(value=v, qty=VIRTUAL_QTY, tolerance=p.tolerance,
                               voltage_v=p.rating, dielectric=diel, location=TO_ORDER,
                               id=next_id))
        next_id -= 1
    augmented = replace(snapshot,
                        resistors=tuple(snapshot.resistors) + tuple(new_r),
                        capacitors=tuple(snapshot.capacitors) + tuple(new_c))
    return augmented, Catalogue(options, items)
