"""Stock rows as the planner sees them, which rows may stand in for which, and
the pieces one copy of a design takes from them."""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass

from inventory.parts import (
    DEFAULT_CAPACITOR_TOLERANCE,
    DEFAULT_CAPACITOR_VOLTAGE_V,
    DEFAULT_RESISTOR_POWER_W,
    DEFAULT_RESISTOR_TOLERANCE,
    POLARISED_DIELECTRICS,
    StockSnapshot,
)
from inventory.values import format_value
from optimiser.design import Design, Piece
from optimiser.purchase import TO_ORDER, Catalogue

__all__ = ["TRANSISTOR_KINDS", "Row", "Unusable", "stock_rows", "can_stand_in",
           "named_rows", "design_demand"]

TRANSISTOR_KINDS = ("npn", "pnp")
#: Relative difference below which two values or ratings count as equal: float
#: noise from parsing, far below any series step or rating step.
REL_TOL = 1e-9


@dataclass(frozen=True)
class Row:
    """A stock row (id > 0) or a purchasable value (id < 0) as the planner sees it."""

    id: int
    kind: str                 # resistor | capacitor | npn | pnp
    value: float | None       # ohm or farad; None for transistors
    label: str                # formatted value, or the transistor label
    qty: int
    location: str = ""
    tolerance: float | None = None
    rating: float | None = None       # W (resistor) or V (capacitor)
    dielectric: str | None = None

    @property
    def virtual(self) -> bool:
        return self.id < 0

    @property
    def polarised(self) -> bool:
        return (self.dielectric or "").lower() in POLARISED_DIELECTRICS

    @property
    def pool(self) -> tuple[str, str]:
        """(kind, label): rows a person would call "the same part"."""
        return self.kind, self.label


def _label(value: float, kind: str) -> str:
    try:
        return format_value(value, kind)
    except Exception:  # a value the formatter refuses: plain SI
        return f"{value:g}"


def stock_rows(snapshot: StockSnapshot, catalogue: Catalogue | None = None) -> dict[int, Row]:
    """Every row of ``snapshot`` as a :class:`Row`, keyed by id.

    Rows whose id is negative must be in ``catalogue`` (they are purchasable
    values); rows without an id are skipped (they cannot be booked).
    """
    rows: dict[int, Row] = {}
    for r in snapshot.resistors:
        if r.id is None:
            continue
        rows[r.id] = Row(r.id, "resistor", float(r.value), _label(r.value, "resistor"),
                         int(r.qty), r.location, r.tolerance, r.power_w, None)
    for c in snapshot.capacitors:
        if c.id is None:
            continue
        rows[c.id] = Row(c.id, "capacitor", float(c.value), _label(c.value, "capacitor"),
                         int(c.qty), c.location, c.tolerance, c.voltage_v, c.dielectric)
    for t in snapshot.transistors:
        if t.id is None:
            continue
        rows[t.id] = Row(t.id, t.kind, None, t.label, int(t.qty), t.location)
    if catalogue is not None:
        for p in catalogue.items.values():
            rows[p.id] = Row(p.id, p.kind, p.value, p.label, 0, TO_ORDER,
                             p.tolerance, p.rating, p.dielectric)
    return rows


def _same_value(a: float | None, b: float | None) -> bool:
    if a is None or b is None:
        return a is b
    return abs(a - b) <= REL_TOL * max(abs(a), abs(b))


def can_stand_in(sub: Row, orig: Row, *, strict_tolerance: bool = True,
                 need: float | None = None) -> bool:
    """True when a piece of ``sub`` may take the place of a piece of ``orig``.

    Same kind and value (transistors: same label); tolerance no wider (unless
    ``strict_tolerance`` is False); power (resistor) or voltage (capacitor)
    rating at least ``need`` — the rating every piece that names ``orig``
    needs where it sits — or, when that is not known, no lower than
    ``orig``'s; a non-polarised capacitor is never replaced by a polarised one.
    """
    if sub.kind != orig.kind:
        return False
    if sub.kind in TRANSISTOR_KINDS:
        return sub.label == orig.label
    if not _same_value(sub.value, orig.value):
        return False
    if sub.id == orig.id:
        return True
    dtol = DEFAULT_RESISTOR_TOLERANCE if sub.kind == "resistor" else DEFAULT_CAPACITOR_TOLERANCE
    drat = DEFAULT_RESISTOR_POWER_W if sub.kind == "resistor" else DEFAULT_CAPACITOR_VOLTAGE_V
    st = sub.tolerance if sub.tolerance is not None else dtol
    ot = orig.tolerance if orig.tolerance is not None else dtol
    sr = sub.rating if sub.rating is not None else drat
    orr = orig.rating if orig.rating is not None else drat
    floor = orr if need is None else need
    if (strict_tolerance and st > ot * (1 + REL_TOL)) or sr < floor * (1 - REL_TOL):
        return False
    if sub.kind == "capacitor" and sub.polarised and not orig.polarised:
        return False
    return True


class Unusable(Exception):
    """A candidate names a part the planner cannot find."""


def named_rows(design: Design, rows: dict[int, Row],
                catalogue: Catalogue | None) -> list[tuple[int, Piece]]:
    """(row id, piece) of every piece of ``design``: a piece without an id is a
    value to be bought and maps to the purchasable row of that value."""
    out = []
    for pick in design.parts.values():
        for p in pick.pieces:
            rid = p.id
            if rid is None:
                hit = catalogue.find(p.kind, p.value) if catalogue is not None else None
                if hit is None:
                    raise Unusable(f"{pick.role} {pick.label} is neither in stock nor purchasable")
                rid = hit.id
            if rid not in rows:
                raise Unusable(f"{pick.role}: stock row {rid} is not in the drawer")
            out.append((rid, p))
    return out


def design_demand(design: Design, rows: dict[int, Row],
                  catalogue: Catalogue | None = None) -> dict[int, int]:
    """Pieces per copy of ``design``, by the row (class) each piece names.

    A piece without an id is a value to be bought: it maps to the purchasable
    row of that value.  The transistor counts one piece per copy unless a role
    lists it as a piece already.

    Raises
    ------
    Unusable
        When a piece names a row that is neither in stock nor purchasable.
    """
    need: dict[int, int] = defaultdict(int)
    has_q = False
    for rid, p in named_rows(design, rows, catalogue):
        if p.kind in TRANSISTOR_KINDS:
            has_q = True
        need[rid] += int(p.count)
    if not has_q:
        qrows = [r for r in rows.values()
                 if r.kind in TRANSISTOR_KINDS and r.label == design.transistor]
        if not qrows:
            raise Unusable(f"transistor {design.transistor} is not in the drawer")
        need[min(q.id for q in qrows)] += 1
    return dict(need)
