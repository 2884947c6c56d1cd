"""The LP relaxation of the plan over pools of columns, with the dual prices that
guide column generation (:mod:`optimiser.planning.colgen`).

A *pool* is what a person would call "the same part": resistors or capacitors of
one kind and value, transistors of one label.  The relaxation lets any piece of a
pool come from any row of it (the programme of :mod:`~optimiser.planning.model`
is stricter: ratings, tolerance, polarity), drops the integrality of copies, packs
and orders, and charges each bought piece its share of a pack and of the line
cost.  Every plan the programme allows is therefore a solution of the relaxation
at no greater objective, so the relaxation's optimum over *every* design is a
lower bound of every plan's objective.

Variables: ``x_j ≥ 0`` copies on column ``j`` (one copy's pieces ``a_Pj`` per
pool), ``buy_P ≥ 0`` pieces bought of a purchasable pool, ``art_b ≥ 0`` copies of
build ``b`` left unserved (phase 1 only).

* ``copies_b``: Σ_{j of b} x_j + art_b = count_b        (dual μ_b, per copy)
* ``stock_P``:  Σ_j a_Pj x_j − buy_P ≤ held_P            (dual price σ_P ≥ 0)

Phase 2 minimises Σ_j c_j x_j + Σ_P unit_P · buy_P (``art`` fixed at 0); phase 1
minimises Σ_b art_b with every other cost 0 and buying free.  The reduced cost of
a column ``d`` of build ``b`` is ``c_d + Σ_P σ_P a_Pd − μ_b`` (phase 1: ``c_d = 0``).
"""

from __future__ import annotations

import math
from collections import defaultdict
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import linprog

from optimiser.planning.rows import Row
from optimiser.purchase import Catalogue

__all__ = ["MAX_PIECES_PER_COPY", "Column", "MasterSolution", "Pools", "solve_master"]

#: The most pieces of one pool a single copy of any design can take (every role of
#: a two-transistor stage joined from two pieces of one value, with margin).  It
#: bounds the pieces any plan buys of a value, which spreads the line cost over the
#: pieces in the relaxation: larger is safe but weakens the bound.
MAX_PIECES_PER_COPY = 24
#: Decimal digits of a value when telling pools apart (float noise, not series steps).
POOL_DIGITS = 9


def pool_key(row: Row) -> tuple:
    """The pool of a row: (kind, label) for transistors, (kind, value) otherwise."""
    if row.value is None:
        return (row.kind, row.label)
    return (row.kind, float(f"{row.value:.{POOL_DIGITS}g}"))


@dataclass(frozen=True)
class Column:
    """One design offered for one copy of build ``build``: pieces per pool, cost per copy."""

    build: int
    pieces: Mapping[tuple, int]
    cost: float


class Pools:
    """The pools of a drawer: pieces held, and the price of a bought piece."""

    def __init__(self, rows: Mapping[int, Row], catalogue: Catalogue | None, total_copies: int,
                 cost_unit: float = 1.0):
        """``cost_unit``: prices are held in this unit (the planner passes one copy's
        score weight, so that reduced costs are far above the LP solver's tolerances)."""
        self.held: dict[tuple, int] = defaultdict(int)
        self.unit: dict[tuple, float] = {}
        self.of_row: dict[int, tuple] = {}
        self.label: dict[tuple, str] = {}
        line = 0.0
        if catalogue is not None and catalogue.options is not None:
            line = float(catalogue.options.line_cost)
        for rid, row in rows.items():
            key = pool_key(row)
            self.of_row[rid] = key
            self.label.setdefault(key, row.label)
            if row.virtual:
                p = catalogue.items[rid]
                most = p.pack * math.ceil(total_copies * MAX_PIECES_PER_COPY / p.pack)
                unit = (p.unit_price + line / most) / cost_unit
                self.unit[key] = min(self.unit.get(key, math.inf), unit)
            else:
                self.held[key] += max(int(row.qty), 0)

    def pieces(self, demand: Mapping[int, int]) -> dict[tuple, int]:
        """Pieces per pool of a column whose pieces are given per row id."""
        out: dict[tuple, int] = defaultdict(int)
        for rid, k in demand.items():
            out[self.of_row[rid]] += int(k)
        return dict(out)


@dataclass(frozen=True)
class MasterSolution:
    """The relaxation's optimum: value, copies per column, the dual prices."""

    status: str                         # "Optimal" or the solver's word for why not
    value: float
    x: np.ndarray
    unserved: np.ndarray                # art_b (phase 1)
    bought: dict[tuple, float]
    price: dict[tuple, float]           # σ_P ≥ 0, per piece of the pool
    mu: np.ndarray                      # μ_b per copy

    def reduced_cost(self, column: Column, phase1: bool = False) -> float:
        c = 0.0 if phase1 else column.cost
        return c + sum(self.price.get(p, 0.0) * k for p, k in column.pieces.items()) \
            - float(self.mu[column.build])


def solve_master(columns: Sequence[Column], counts: Sequence[int], pools: Pools, *,
                 phase1: bool = False) -> MasterSolution:
    """Solve the relaxation over ``columns`` (HiGHS through scipy) and read its duals."""
    nb = len(counts)
    names = sorted({p for c in columns for p in c.pieces} | set(pools.unit), key=repr)
    idx = {p: i for i, p in enumerate(names)}
    buyable = [p for p in names if p in pools.unit]
    nx, nbuy = len(columns), len(buyable)
    n = nx + nbuy + nb
    cost = np.zeros(n)
    if phase1:
        cost[nx + nbuy:] = 1.0
    else:
        cost[:nx] = [c.cost for c in columns]
        cost[nx:nx + nbuy] = [pools.unit[p] for p in buyable]
    a_ub = np.zeros((len(names), n))
    b_ub = np.array([float(pools.held.get(p, 0)) for p in names])
    for j, c in enumerate(columns):
        for p, k in c.pieces.items():
            a_ub[idx[p], j] += k
    for i, p in enumerate(buyable):
        a_ub[idx[p], nx + i] = -1.0
    a_eq = np.zeros((nb, n))
    for j, c in enumerate(columns):
        a_eq[c.build, j] = 1.0
    for b in range(nb):
        a_eq[b, nx + nbuy + b] = 1.0
    bounds = [(0, None)] * (nx + nbuy) + [(0, None if phase1 else 0)] * nb
    res = linprog(cost, A_ub=a_ub if names else None, b_ub=b_ub if names else None,
                  A_eq=a_eq, b_eq=np.array(counts, dtype=float), bounds=bounds, method="highs")
    if res.status != 0:
        status = {2: "Infeasible", 3: "Unbounded"}.get(res.status, "Not Solved")
        return MasterSolution(status, math.inf, np.zeros(nx), np.zeros(nb), {}, {}, np.zeros(nb))
    price = {p: max(-float(m), 0.0) for p, m in zip(names, res.ineqlin.marginals, strict=True)} \
        if names else {}
    return MasterSolution("Optimal", float(res.fun), res.x[:nx], res.x[nx + nbuy:],
                          {p: float(v) for p, v in zip(buyable, res.x[nx:nx + nbuy], strict=True)},
                          price, np.asarray(res.eqlin.marginals, dtype=float))
