"""From a solution to a plan: stock pieces used before bought ones, each copy given
its rows, matching copies grouped into allocations, and the shopping list."""

from __future__ import annotations

from collections import defaultdict
from dataclasses import replace

from optimiser.design import Design, Piece, RolePick
from optimiser.planning.model import PlanModel, Solution
from optimiser.planning.results import Allocation, BuildPlan, Plan, Purchase, SolverReport
from optimiser.planning.rows import TRANSISTOR_KINDS, Row
from optimiser.purchase import Catalogue

__all__ = ["prefer_stock", "assemble"]


def _piece_for(row: Row, count: int) -> Piece:
    return Piece(value=row.value if row.value is not None else 0.0, count=count,
                 id=None if row.virtual else row.id,
                 location=row.location, kind=row.kind, tolerance=row.tolerance,
                 rating=row.rating, dielectric=row.dielectric)


def _split_column(design: Design, copies: int, queues: dict[int, list[list[int]]],
                  demand_order: list[tuple[str | None, int, int]], rows: dict[int, Row],
                  candidate: int = -1) -> list[Allocation]:
    """Give each copy its rows from the class queues; group copies that match."""
    groups: dict[tuple, list] = {}
    for _ in range(copies):
        key_parts = []
        for role, r, m in demand_order:
            taken: dict[int, int] = defaultdict(int)
            need = m
            q = queues[r]
            while need > 0:
                if not q:
                    raise RuntimeError("allocation lost pieces: flows do not cover the demand")
                s, left = q[0]
                k = min(left, need)
                taken[s] += k
                need -= k
                q[0][1] -= k
                if q[0][1] == 0:
                    q.pop(0)
            key_parts.append((role, r, tuple(sorted(taken.items()))))
        key = tuple(key_parts)
        if key in groups:
            groups[key][0] += 1
        else:
            groups[key] = [1]
    out = []
    for key, (n,) in groups.items():
        new_parts = dict(design.parts)
        by_role: dict[str, list[tuple[int, int]]] = defaultdict(list)
        pieces: dict[int, int] = defaultdict(int)
        bought: dict[int, int] = defaultdict(int)
        for role, _r, taken in key:
            for s, k in taken:
                if role is not None:
                    by_role[role].append((s, k))
                (bought if rows[s].virtual else pieces)[s] += k * n
        for role, lst in by_role.items():
            merged: dict[int, int] = defaultdict(int)
            for s, k in lst:
                merged[s] += k
            pick: RolePick = design.parts[role]
            new_parts[role] = replace(pick, pieces=tuple(_piece_for(rows[s], k)
                                                          for s, k in merged.items()))
        out.append(Allocation(n, replace(design, parts=new_parts), dict(pieces), dict(bought),
                              candidate))
    return out


def _demand_order(design: Design, rows: dict[int, Row], catalogue: Catalogue
                  ) -> list[tuple[str | None, int, int]]:
    """(role, class row, pieces per copy) in role order; role None is the transistor."""
    order = []
    has_q = False
    for role, pick in design.parts.items():
        per: dict[int, int] = defaultdict(int)
        for p in pick.pieces:
            if p.kind in TRANSISTOR_KINDS:
                has_q = True
            rid = p.id if p.id is not None else catalogue.find(p.kind, p.value).id
            per[rid] += int(p.count)
        order.extend((role, r, m) for r, m in per.items())
    if not has_q:
        qid = min(r.id for r in rows.values()
                  if r.kind in TRANSISTOR_KINDS and r.label == design.transistor)
        order.append((None, qid, 1))
    return order


def prefer_stock(model: PlanModel, solution: Solution) -> Solution:
    """Move pieces from bought packs to stock rows that still have room, then
    to the very rows the designs named.

    Any optimal plan stays optimal (the packs and the designs do not change);
    this only keeps the drawer's own pieces in use first, so that what is left
    over is new stock, not old, and splits copies over fewer rows.
    """
    rows = model.rows
    room = {s: r.qty for s, r in rows.items() if not r.virtual}
    for (_r, s), k in solution.flow.items():
        if s in room:
            room[s] -= k
    flow = dict(solution.flow)
    for (r, s), k in sorted(solution.flow.items()):
        if not rows[s].virtual:
            continue
        for s2 in sorted(room):
            if k == 0:
                break
            if room[s2] > 0 and (r, s2) in model.flow:
                moved = min(k, room[s2])
                room[s2] -= moved
                k -= moved
                flow[(r, s2)] = flow.get((r, s2), 0) + moved
                flow[(r, s)] -= moved
    # then the row each design named, where it has room (fewer split allocations)
    for (r, s), k in sorted(flow.items()):
        if k <= 0 or s == r or rows[s].virtual or r not in room or (r, r) not in model.flow:
            continue
        moved = min(k, room[r])
        if moved > 0:
            room[r] -= moved
            room[s] += moved
            flow[(r, r)] = flow.get((r, r), 0) + moved
            flow[(r, s)] -= moved
    flow = {key: n for key, n in flow.items() if n > 0}
    return replace(solution, flow=flow)


def assemble(model: PlanModel, solution: Solution, report: SolverReport) -> Plan:
    """Turn a solution into builds (one allocation per group of matching copies),
    purchases and the total cost."""
    rows, cat = model.rows, model.catalogue
    solution = prefer_stock(model, solution)
    # queues of pieces per class, in the order stock → other stock → bought
    queues: dict[int, list[list[int]]] = defaultdict(list)
    for (r, s), k in sorted(solution.flow.items(),
                            key=lambda kv: (kv[0][0], kv[0][1] != kv[0][0],
                                            rows[kv[0][1]].virtual, kv[0][1])):
        queues[r].append([s, k])
    builds = []
    for b, it in enumerate(model.items):
        bp = BuildPlan(it.name, it.count, it.identical)
        for (bb, j), n in sorted(solution.copies.items()):
            if bb != b:
                continue
            d = it.candidates[j]
            bp.allocations.extend(
                _split_column(d, n, queues, _demand_order(d, rows, cat), rows, j))
        builds.append(bp)
    used: dict[int, int] = defaultdict(int)
    for (_r, s), k in solution.flow.items():
        if rows[s].virtual:
            used[s] += k
    purchases = []
    line = cat.options.line_cost if cat.options is not None else 0.0
    for v, n in sorted(solution.packs.items(), key=lambda kv: (cat.items[kv[0]].kind,
                                                               cat.items[kv[0]].value)):
        p = cat.items[v]
        purchases.append(Purchase(p.kind, p.value, p.label, n, n * p.pack,
                                  n * p.pack_price + line, used[v], p.tolerance,
                                  p.rating, p.dielectric))
    cost = sum(p.cost for p in purchases)
    return Plan(True, report, builds, purchases, cost, [],
                candidates=len(model.demand),
                stats={"score_weight": model.score_weight, "cost_quantum": model.cost_quantum,
                       **model.size})
