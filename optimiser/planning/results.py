"""What a plan says: allocations, purchases, the reasons a plan cannot be met, the
solver's report, and their JSON; and the plan as the store records it."""

from __future__ import annotations

from dataclasses import dataclass, field

from optimiser.design import Design

__all__ = ["SolverReport", "Allocation", "BuildPlan", "Purchase", "Shortfall", "Plan",
           "commit_entries"]


@dataclass(frozen=True)
class SolverReport:
    """What the solver said: its name, the status (``Optimal`` or otherwise) and the time."""

    name: str
    status: str
    seconds: float

    @property
    def has_solution(self) -> bool:
        return self.status in ("Optimal", "Feasible")

    def to_json(self) -> dict:
        return {"name": self.name, "status": self.status, "seconds": round(self.seconds, 3)}


@dataclass
class Allocation:
    """``copies`` copies of ``design``; ``pieces`` the stock rows they take in all
    (id → pieces), ``bought`` the purchasable rows (virtual id → pieces)."""

    copies: int
    design: Design
    pieces: dict[int, int] = field(default_factory=dict)
    bought: dict[int, int] = field(default_factory=dict)
    candidate: int = -1          # index of the design among its build's candidates

    def to_json(self) -> dict:
        return {"copies": self.copies, "design": self.design.to_json()}


@dataclass
class BuildPlan:
    name: str
    count: int
    identical: bool
    allocations: list[Allocation] = field(default_factory=list)

    def to_json(self) -> dict:
        return {"request": self.name, "count": self.count, "identical": self.identical,
                "allocations": [a.to_json() for a in self.allocations]}


@dataclass
class Purchase:
    """Whole packs of one value to order; ``used`` pieces of them go into builds."""

    kind: str
    value: float
    label: str
    packs: int
    qty: int
    cost: float
    used: int = 0
    tolerance: float | None = None
    rating: float | None = None
    dielectric: str | None = None

    def to_json(self) -> dict:
        d = {"kind": self.kind, "value": self.value, "label": self.label,
             "packs": self.packs, "qty": self.qty, "cost": round(self.cost, 6),
             "used": self.used, "tolerance": self.tolerance}
        if self.kind == "resistor":
            d["power"] = self.rating
        else:
            d["voltage"] = self.rating
            d["dielectric"] = self.dielectric
        return d


@dataclass
class Shortfall:
    """Why a request cannot be met: a reason and the binding shortages."""

    request: str
    reason: str
    shortage: list[dict] = field(default_factory=list)
    #: True only when the reason is proven over every design the drawer allows
    #: (a complete search found none, or column generation's counting argument);
    #: False when it speaks of the designs offered.
    proven: bool = False

    def to_json(self) -> dict:
        return {"request": self.request, "reason": self.reason, "shortage": self.shortage,
                "proven": self.proven}


@dataclass
class Plan:
    feasible: bool
    solver: SolverReport
    builds: list[BuildPlan] = field(default_factory=list)
    purchases: list[Purchase] = field(default_factory=list)
    cost: float = 0.0
    infeasible: list[Shortfall] = field(default_factory=list)
    candidates: int = 0
    stats: dict = field(default_factory=dict)
    #: What column generation proved (:class:`optimiser.planning.colgen.Bound`), or None
    bound: object | None = None

    def to_json(self) -> dict:
        d = {"feasible": self.feasible,
             "builds": [b.to_json() for b in self.builds],
             "purchases": [p.to_json() for p in self.purchases],
             "cost": round(self.cost, 6),
             "solver": self.solver.to_json(),
             "candidates": self.candidates}
        if not self.feasible:
            d["infeasible"] = [s.to_json() for s in self.infeasible]
        if self.bound is not None:
            d["bound"] = self.bound.to_json()
        return d


def commit_entries(plan: Plan) -> list[dict]:
    """The plan as the store's ``commit_builds`` takes it: one entry per allocation.

    ``pieces`` are the stock rows taken (item id → pieces, all copies); each
    purchase is recorded as an order (awaiting arrival) with the first
    allocation that uses it.
    """
    if not plan.feasible:
        raise ValueError("an infeasible plan cannot be committed")
    by_value = {(p.kind, round(p.value, 15)): p for p in plan.purchases}
    placed: set[tuple] = set()
    entries = []
    for bp in plan.builds:
        for a in bp.allocations:
            orders = []
            for pick in a.design.parts.values():
                for piece in pick.pieces:
                    key = (piece.kind, round(piece.value, 15))
                    if piece.id is None and key in by_value and key not in placed:
                        placed.add(key)
                        p = by_value[key]
                        orders.append({"kind": p.kind, "value": p.value, "label": p.label,
                                       "qty": p.qty, "tolerance": p.tolerance,
                                       "power": p.rating if p.kind == "resistor" else None,
                                       "voltage": p.rating if p.kind == "capacitor" else None,
                                       "dielectric": p.dielectric})
            entries.append({"request": bp.name, "copies": a.copies,
                            "design": a.design.to_json(), "pieces": dict(a.pieces),
                            "orders": orders})
    if entries:
        # purchases no allocation names (cannot happen in an optimal plan) go with the first
        for key, p in by_value.items():
            if key not in placed:
                entries[0]["orders"].append({"kind": p.kind, "value": p.value, "label": p.label,
                                             "qty": p.qty, "tolerance": p.tolerance,
                                             "power": p.rating if p.kind == "resistor" else None,
                                             "voltage": p.rating if p.kind == "capacitor" else None,
                                             "dielectric": p.dielectric})
    return entries
