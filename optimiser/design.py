"""One evaluated stage as the rest of the program sees it (docs/json.md).

A :class:`Design` is what ``design``, ``analyse`` and ``plan`` print, and what
the build sheet is drawn from.  ``to_json`` gives exactly one entry of
``designs`` in docs/json.md.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

__all__ = ["Piece", "RolePick", "Design"]


@dataclass(frozen=True)
class Piece:
    """``count`` pieces per copy of one stock row (or a value to be bought: id None)."""

    value: float
    count: int = 1
    id: int | None = None
    location: str = ""
    kind: str = "resistor"            # resistor | capacitor
    tolerance: float | None = None
    rating: float | None = None       # W for resistors, V for capacitors
    dielectric: str | None = None
    #: The least rating this piece needs where it sits (W or V, derating included):
    #: its share of the role's DC dissipation or voltage.  None when not known (a
    #: stage read from a circuit file); the planner then keeps the row's own rating.
    need: float | None = None

    def to_json(self) -> dict:
        return {"id": self.id, "count": self.count, "value": self.value,
                "location": self.location}


@dataclass(frozen=True)
class RolePick:
    """The value a role takes and the pieces that make it."""

    role: str
    value: float
    label: str
    pieces: tuple[Piece, ...] = ()
    joined: str | None = None         # None, "series" or "parallel"
    plus: str | None = None           # polarised capacitor: node name of the + terminal

    def to_json(self) -> dict:
        d = {"value": self.value, "label": self.label,
             "pieces": [p.to_json() for p in self.pieces]}
        if self.joined:
            d["joined"] = self.joined
        if self.plus:
            d["plus"] = self.plus
        return d


def _clean(x):
    """JSON-safe number: NaN/inf become None, numpy scalars become floats."""
    if x is None:
        return None
    if isinstance(x, (bool,)):
        return x
    try:
        f = float(x)
    except (TypeError, ValueError):
        return x
    return None if not math.isfinite(f) else f


@dataclass
class Design:
    topology: str
    transistor: str
    parts: dict[str, RolePick]
    metrics: dict[str, float | None]
    meets_spec: bool
    violations: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    score: float | None = None
    rank: int | None = None
    form: str | None = None           # ce: "unbypassed", "partly bypassed", "fully bypassed"
    extra: dict = field(default_factory=dict)   # further keys for JSON (e.g. "drift", "yield")

    def values(self) -> dict[str, float]:
        return {r: p.value for r, p in self.parts.items()}

    def to_json(self) -> dict:
        d = {
            "rank": self.rank,
            "topology": self.topology,
            "transistor": self.transistor,
            "parts": {r: p.to_json() for r, p in self.parts.items()},
            "metrics": {k: _clean(v) for k, v in self.metrics.items()},
            "meets_spec": bool(self.meets_spec),
            "score": _clean(self.score),
        }
        if self.form:
            d["form"] = self.form
        if not self.meets_spec or self.violations:
            d["violations"] = list(self.violations)
        if self.warnings:
            d["warnings"] = list(self.warnings)
        d.update(self.extra)
        return d
