"""Plain, frozen value objects for parts and stock.

These are what the optimiser receives (a :class:`StockSnapshot`); it never sees
database rows.  Every quantity is in SI units: ohm, farad, volt, watt, ampere,
hertz.  Tolerances are fractions (0.05 for 5 %).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

__all__ = [
    "POLARISED_DIELECTRICS",
    "Resistor",
    "Capacitor",
    "Transistor",
    "StockSnapshot",
    "DEFAULT_RESISTOR_TOLERANCE",
    "DEFAULT_CAPACITOR_TOLERANCE",
    "DEFAULT_RESISTOR_POWER_W",
    "DEFAULT_CAPACITOR_VOLTAGE_V",
]

DEFAULT_RESISTOR_TOLERANCE = 0.05
DEFAULT_CAPACITOR_TOLERANCE = 0.20
DEFAULT_RESISTOR_POWER_W = 0.25
DEFAULT_CAPACITOR_VOLTAGE_V = 50.0

#: Dielectrics whose capacitors have a + terminal.
POLARISED_DIELECTRICS = frozenset({"electrolytic", "tantalum", "polymer"})


@dataclass(frozen=True)
class Resistor:
    """A stock row of resistors: ``qty`` pieces of one value and rating."""

    value: float
    qty: int
    tolerance: float = DEFAULT_RESISTOR_TOLERANCE
    power_w: float = DEFAULT_RESISTOR_POWER_W
    location: str = ""
    id: int | None = None
    min_qty: int = 0

    kind = "resistor"


@dataclass(frozen=True)
class Capacitor:
    """A stock row of capacitors: ``qty`` pieces of one value and rating."""

    value: float
    qty: int
    tolerance: float = DEFAULT_CAPACITOR_TOLERANCE
    voltage_v: float = DEFAULT_CAPACITOR_VOLTAGE_V
    dielectric: str = "ceramic"
    location: str = ""
    id: int | None = None
    min_qty: int = 0

    kind = "capacitor"

    @property
    def polarised(self) -> bool:
        return self.dielectric.lower() in POLARISED_DIELECTRICS


@dataclass(frozen=True)
class Transistor:
    """A transistor type in stock, described by its data-sheet figures at 25 °C.

    ``vbe`` is the base-emitter voltage at collector current ``ic_ref`` (V_CB = 0).
    ``ft`` and ``cob`` may be ``None``; then no upper band edge can be computed.
    Limits that are ``None`` are not checked.
    """

    label: str
    hfe_min: float
    hfe_max: float
    qty: int = 0
    polarity: str = "npn"
    hfe_typ: float | None = None
    vbe: float = 0.65
    ic_ref: float = 1e-3
    vaf: float = 100.0
    vce_sat: float = 0.2
    vceo: float | None = None
    ic_max: float | None = None
    pd: float | None = None
    ft: float | None = None
    cob: float | None = None
    location: str = ""
    id: int | None = None
    min_qty: int = 0

    @property
    def kind(self) -> str:
        return self.polarity

    @property
    def beta_nominal(self) -> float:
        """hfe_typ, else the geometric mean of hfe_min and hfe_max (docs/model.md)."""
        if self.hfe_typ is not None:
            return float(self.hfe_typ)
        return math.sqrt(self.hfe_min * self.hfe_max)


@dataclass(frozen=True)
class StockSnapshot:
    """Everything in the drawer at one moment, as plain values."""

    resistors: tuple[Resistor, ...] = field(default_factory=tuple)
    capacitors: tuple[Capacitor, ...] = field(default_factory=tuple)
    transistors: tuple[Transistor, ...] = field(default_factory=tuple)

    def transistor(self, label: str) -> Transistor | None:
        for t in self.transistors:
            if t.label == label:
                return t
        return None
