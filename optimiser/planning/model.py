"""Planning several builds against one drawer: the mixed-integer programme.

Each request of a build list brings a set of *candidate* designs (from the
search).  The programme decides how many copies each candidate carries, which
stock rows give the pieces, and what to buy, at the least purchase cost and then
the best summed design scores.  It is built, solved and read in three separate
steps (:func:`build_model`, :func:`solve_model`, :func:`read_solution`) and
assembled into a :class:`Plan` by :func:`assemble`; :func:`plan_builds` runs all
of them and explains an infeasible plan.

Sets
----
* ``B``: the builds (requests with a count), index ``b``.
* ``J_b``: the candidates of build ``b``; a *column* is ``(b, j)``.
* rows ``s``: stock rows (positive ids) and purchasable values (negative ids,
  see :mod:`optimiser.purchase`).
* classes ``r``: the rows the candidates name.  A piece that names row ``r`` may
  be taken from any row ``s`` of the same kind and value whose ratings are at
  least as good (:func:`can_stand_in`): tolerance no wider, power or voltage
  rating no lower, a non-polarised capacitor never replaced by a polarised one.
  Transistors stand in only for their own label.

Variables
---------
* ``n[b,j]`` integer copies on column ``(b, j)``; with ``identical = true`` a
  binary ``pick[b,j]`` and ``n[b,j] = count_b · pick[b,j]``.
* ``flow[r,s]`` integer pieces of class ``r`` taken from row ``s``.
* ``packs[v]`` integer packs bought of purchasable ``v``; ``ordered[v]`` binary.

Constraints (named after what they guard)
-----------------------------------------
* ``count_<b>``: Σ_j n[b,j] = count_b (identical: ``one_design_<b>``: Σ_j pick = 1).
* ``use_<class>``: Σ_{b,j} n[b,j]·pieces[b,j,r] = Σ_s flow[r,s].
* ``stock_<row>`` (e.g. ``stock_R_4k7_id12``): Σ_r flow[r,s] ≤ qty_s for a stock
  row; ``stock_R_4k7_buy``: Σ_r flow[r,v] ≤ pack · packs[v] for a purchasable.
* ``order_<value>``: packs[v] ≤ M_v · ordered[v], M_v the most packs any plan
  could need of it; ``order_<value>_for_<class>``: flow[r,v] ≤ U_r · ordered[v]
  (U_r the most pieces of class r any plan could take), and
  ``needs_order_<class>_<b>_<j>``: a column carries more copies than the stock
  stand-ins of a class can serve only if some value that can stand in is
  ordered.  These repeat what the first link implies, but tighten the LP
  relaxation a great deal.

Reduction: a stock row that could hold everything that may ever land on it
serves its own class alone (no stand-ins): moving that class's pieces onto it
keeps any plan feasible and no dearer, so no optimum is lost.

Objective
---------
``Σ_v pack_price_v·packs[v] + line_cost·ordered[v] + w · Σ_{b,j} ŝ[b,j]·n[b,j]``
where ``ŝ`` is the design's score mapped onto [0, 1) by the fixed monotone
``s / (1 + s)`` (:func:`~optimiser.planning.objective.score_map`; lower is better) and ``w = δ / (2·N)``: ``δ`` is the
smallest step by which two purchase costs can differ (the greatest common
divisor of the pack prices and the line cost, taken as exact decimals) and ``N``
the total copies.  The score term is then below ``δ/2``, so no saving in score
can ever pay for a dearer order: cost comes first, score second.
"""

from __future__ import annotations

import contextlib
import math
import os
import re
import sys
import time
from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass, field

import pulp

from inventory.errors import InputError
from optimiser.planning.candidates import PlanItem
from optimiser.planning.objective import cost_quantum, score_map, score_weight
from optimiser.planning.results import SolverReport
from optimiser.planning.rows import Row, Unusable, can_stand_in, design_demand, named_rows
from optimiser.purchase import Catalogue

__all__ = ["SOLVERS", "PlanModel", "Solution", "available_solvers", "build_model",
           "solve_model", "read_solution"]

#: Solvers ``--solver`` accepts.
SOLVERS = ("cbc", "highs")
#: Relative gap: 0, so a plan reported ``Optimal`` is proven cheapest (HiGHS
#: would otherwise stop at 1e-4), at the price of closing the gap fully.
REL_GAP = 0.0
#: Absolute gap as a share of one copy's score weight: well below any cost
#: step, so cost stays proven least; above 0, so the solver need not prove the
#: last sliver of score, which can take long and changes no purchase.
ABS_GAP_SHARE = 0.01
#: Solver time limit in seconds unless the caller gives one.  None: no limit, the
#: solver runs until its plan is proven cheapest (or the programme infeasible); a
#: limit trades that proof for time (the status is then ``Feasible``).
SOLVER_TIME_LIMIT_S: float | None = None


def _tag(row: Row) -> str:
    letter = {"resistor": "R", "capacitor": "C"}.get(row.kind, "Q")
    text = row.label.replace("µ", "u").replace("Ω", "")
    text = re.sub(r"[^A-Za-z0-9]+", "_", text).strip("_") or "x"
    return f"{letter}_{text}_" + ("buy" if row.virtual else f"id{row.id}")


@dataclass
class PlanModel:
    """The programme and the dicts that key its variables (see the module notes)."""

    problem: pulp.LpProblem
    items: list[PlanItem]
    rows: dict[int, Row]
    catalogue: Catalogue
    demand: dict[tuple[int, int], dict[int, int]]
    scores: dict[tuple[int, int], float]
    copies: dict[tuple[int, int], pulp.LpAffineExpression]
    pick: dict[tuple[int, int], pulp.LpVariable]
    flow: dict[tuple[int, int], pulp.LpVariable]
    packs: dict[int, pulp.LpVariable]
    ordered: dict[int, pulp.LpVariable]
    slack: dict[int, pulp.LpVariable]
    score_weight: float
    cost_quantum: float
    elastic: bool = False
    skipped: dict[tuple[int, int], str] = field(default_factory=dict)

    @property
    def columns(self) -> list[tuple[int, int]]:
        return list(self.demand)

    @property
    def size(self) -> dict[str, int]:
        """Variables and constraints of the programme (for the plan's stats)."""
        return {"variables": len(self.problem.variables()),
                "constraints": len(self.problem.constraints)}


def build_model(items: Sequence[PlanItem], rows: dict[int, Row],
                catalogue: Catalogue | None = None, *, elastic: bool = False) -> PlanModel:
    """Build the programme (nothing is solved here).

    Parameters
    ----------
    items : sequence of PlanItem
        The builds with their candidate designs.
    rows : dict of int to Row
        Stock rows and purchasable values (:func:`stock_rows`).
    catalogue : Catalogue, optional
        Prices of the purchasable rows (negative ids).
    elastic : bool
        Add a shortfall variable to every stock row and minimise the pieces
        missing instead of the cost: always feasible when every build has a
        candidate; used to explain an infeasible plan.
    """
    catalogue = catalogue or Catalogue()
    items = list(items)
    prob = pulp.LpProblem("plan_elastic" if elastic else "plan", pulp.LpMinimize)

    demand: dict[tuple[int, int], dict[int, int]] = {}
    scores: dict[tuple[int, int], float] = {}
    skipped: dict[tuple[int, int], str] = {}
    # the rating every piece naming a row needs where it sits (None: not known,
    # then stand-ins keep that row's own rating)
    rating_need: dict[int, float | None] = {}
    for b, it in enumerate(items):
        for j, d in enumerate(it.candidates):
            try:
                demand[(b, j)] = design_demand(d, rows, catalogue)
                named = named_rows(d, rows, catalogue)
            except Unusable as exc:
                skipped[(b, j)] = str(exc)
                continue
            scores[(b, j)] = score_map(d.score)
            for rid, p in named:
                old = rating_need.get(rid, 0.0)
                rating_need[rid] = None if old is None or p.need is None else max(old, p.need)

    total_copies = sum(max(it.count, 0) for it in items) or 1
    quantum = cost_quantum(catalogue)
    weight = score_weight(quantum, total_copies)

    # copies per column
    copies: dict[tuple[int, int], pulp.LpAffineExpression] = {}
    pick: dict[tuple[int, int], pulp.LpVariable] = {}
    for b, it in enumerate(items):
        cols = [c for c in demand if c[0] == b]
        if it.identical:
            for c in cols:
                pick[c] = pulp.LpVariable(f"pick_{b}_{c[1]}", cat=pulp.LpBinary)
                copies[c] = it.count * pick[c]
            prob += (pulp.lpSum(pick[c] for c in cols) == 1, f"one_design_{b}")
        else:
            for c in cols:
                v = pulp.LpVariable(f"copies_{b}_{c[1]}", 0, it.count, cat=pulp.LpInteger)
                copies[c] = pulp.LpAffineExpression(v)
            prob += (pulp.lpSum(copies[c] for c in cols) == it.count, f"count_{b}")

    # classes and the rows that may stand in for them
    classes = sorted({r for need in demand.values() for r in need})
    # upper bound on the pieces each class may ever need
    most: dict[int, int] = defaultdict(int)
    for b, it in enumerate(items):
        per_class: dict[int, int] = defaultdict(int)
        for c, need in demand.items():
            if c[0] != b:
                continue
            for r, k in need.items():
                per_class[r] = max(per_class[r], k * it.count)
        for r, k in per_class.items():
            most[r] += k
    # a class keeps its tolerance when any build that names it needs that
    strict = {r: any(items[c[0]].strict_tolerance for c, need in demand.items() if r in need)
              for r in classes}
    stand_ins: dict[int, list[int]] = {}
    for r in classes:
        orig = rows[r]
        stand_ins[r] = [s for s, row in rows.items()
                        if can_stand_in(row, orig, strict_tolerance=strict[r],
                                        need=rating_need.get(r))
                        and (row.virtual or row.qty > 0 or s == r)]
    # A stock row that holds all that could ever land on it serves its own class
    # alone: moving that class's pieces onto it keeps any plan feasible and no
    # dearer, so no optimum is lost and the programme gets smaller.
    load: dict[int, int] = defaultdict(int)
    for r in classes:
        for s in stand_ins[r]:
            load[s] += most[r]
    for r in classes:
        if not rows[r].virtual and load[r] <= rows[r].qty:
            stand_ins[r] = [r]
    flow: dict[tuple[int, int], pulp.LpVariable] = {}
    for r in classes:
        orig = rows[r]
        for s in stand_ins[r]:
            cap = most[r] if rows[s].virtual or elastic else min(most[r], rows[s].qty)
            flow[(r, s)] = pulp.LpVariable(f"flow_{_tag(orig)}_from_{_tag(rows[s])}", 0,
                                           max(cap, 0), cat=pulp.LpInteger)
    for r in classes:
        used = pulp.lpSum(copies[c] * need[r] for c, need in demand.items() if r in need)
        prob += (used == pulp.lpSum(flow[(r, s)] for s in stand_ins[r]), f"use_{_tag(rows[r])}")

    supply_rows = sorted({s for (_, s) in flow})
    packs: dict[int, pulp.LpVariable] = {}
    ordered: dict[int, pulp.LpVariable] = {}
    slack: dict[int, pulp.LpVariable] = {}
    cost_terms = []
    for s in supply_rows:
        row = rows[s]
        taken = pulp.lpSum(flow[(r, s2)] for (r, s2) in flow if s2 == s)
        if row.virtual:
            p = catalogue.items[s]
            bound = sum(most[r] for (r, s2) in flow if s2 == s)
            m = max(1, math.ceil(bound / p.pack))
            packs[s] = pulp.LpVariable(f"packs_{_tag(row)}", 0, m, cat=pulp.LpInteger)
            ordered[s] = pulp.LpVariable(f"ordered_{_tag(row)}", cat=pulp.LpBinary)
            prob += (taken <= p.pack * packs[s], f"stock_{_tag(row)}")
            prob += (packs[s] <= m * ordered[s], f"order_{_tag(row)[:-4]}")
            # the same link per class, much tighter in the LP relaxation
            for (r, s2) in flow:
                if s2 == s:
                    prob += (flow[(r, s)] <= most[r] * ordered[s],
                             f"order_{_tag(row)[:-4]}_for_{_tag(rows[r])}")
            line = catalogue.options.line_cost if catalogue.options is not None else 0.0
            cost_terms.append(p.pack_price * packs[s] + line * ordered[s])
        elif elastic:
            slack[s] = pulp.LpVariable(f"short_{_tag(row)}", 0, cat=pulp.LpInteger)
            prob += (taken <= row.qty + slack[s], f"stock_{_tag(row)}")
        else:
            prob += (taken <= row.qty, f"stock_{_tag(row)}")

    # A column whose copies need more pieces of a class than the stock rows that
    # may stand in for it hold cannot carry them unless a value is ordered
    # (far tighter in the LP relaxation than the aggregate links above).
    for c, need in demand.items():
        b, count = c[0], items[c[0]].count
        for r, k in need.items():
            virt = [s for s in stand_ins[r] if rows[s].virtual and s in ordered]
            if not virt:
                continue
            held = sum(rows[s].qty for s in stand_ins[r] if not rows[s].virtual)
            cap = held // k                      # copies the stock alone can give
            if cap >= count:
                continue
            any_order = pulp.lpSum(ordered[v] for v in virt)
            name = f"needs_order_{_tag(rows[r])}_{b}_{c[1]}"
            if c in pick:
                prob += (pick[c] <= any_order, name)
            else:
                prob += (copies[c] <= cap + (count - cap) * any_order, name)

    # For identical copies: when the chosen column needs an order, some value that
    # one of those columns could order is ordered.  Summed over the columns of a
    # build (their picks add up to 1), this keeps the LP from paying a sliver of
    # many orders instead of one whole one.
    needy: dict[int, list] = defaultdict(list)
    values_of: dict[int, set[int]] = defaultdict(set)
    for c, need in demand.items():
        if c not in pick:
            continue
        vs: set[int] = set()
        needs = False
        for r, k in need.items():
            virt = [s for s in stand_ins[r] if rows[s].virtual and s in ordered]
            held = sum(rows[s].qty for s in stand_ins[r] if not rows[s].virtual)
            if virt and held // k < items[c[0]].count:
                needs = True
                vs.update(virt)
        if needs:
            needy[c[0]].append(c)
            values_of[c[0]].update(vs)
    for b, cols in needy.items():
        if len(cols) > 1:
            prob += (pulp.lpSum(pick[c] for c in cols)
                     <= pulp.lpSum(ordered[v] for v in sorted(values_of[b])), f"some_order_{b}")

    score_term = pulp.lpSum(scores[c] * copies[c] for c in demand)
    if elastic:
        # fewest missing pieces (what is bought does not matter here)
        prob += pulp.lpSum(slack.values())
    else:
        prob += pulp.lpSum(cost_terms) + weight * score_term
    return PlanModel(prob, items, rows, catalogue, demand, scores, copies, pick, flow,
                     packs, ordered, slack, weight, quantum, elastic, skipped)


# ---------------------------------------------------------------------------
# Solve
# ---------------------------------------------------------------------------

def available_solvers() -> list[str]:
    """The entries of :data:`SOLVERS` that can run here."""
    out = []
    if pulp.PULP_CBC_CMD(msg=False).available():
        out.append("cbc")
    try:
        if pulp.HiGHS(msg=False).available():
            out.append("highs")
    except Exception:  # pragma: no cover - highspy missing or broken
        pass
    return out


@contextlib.contextmanager
def _quiet_stdout():
    """Keep a solver's banner off stdout (HiGHS prints one from C++), so --json stays clean."""
    try:
        fd = sys.stdout.fileno()
    except (AttributeError, OSError, ValueError):
        yield
        return
    sys.stdout.flush()
    saved = os.dup(fd)
    try:
        with open(os.devnull, "w") as devnull:
            os.dup2(devnull.fileno(), fd)
        yield
    finally:
        os.dup2(saved, fd)
        os.close(saved)


def _make_solver(name: str, model: PlanModel, time_limit: float | None):
    # An absolute gap below the score weight keeps the score part honest; the
    # relative gap is 0 so the cost is proven least (HiGHS defaults to 1e-4).
    gap_abs = model.score_weight * ABS_GAP_SHARE
    if name == "cbc":
        return pulp.PULP_CBC_CMD(msg=False, timeLimit=time_limit, gapRel=REL_GAP, gapAbs=gap_abs)
    if name == "highs":
        return pulp.HiGHS(msg=False, timeLimit=time_limit, gapRel=REL_GAP, gapAbs=gap_abs)
    raise InputError(f"unknown solver {name!r} (choose from {', '.join(SOLVERS)})",
                     field="--solver")


def _status_text(problem: pulp.LpProblem, status: int) -> str:
    if problem.sol_status == pulp.LpSolutionOptimal:
        return "Optimal"
    if problem.sol_status == pulp.LpSolutionIntegerFeasible:
        return "Feasible"          # a solution, not proven least (e.g. time limit)
    return pulp.LpStatus.get(status, "Undefined")


def solve_model(model: PlanModel, solver: str = "cbc",
                time_limit: float | None = SOLVER_TIME_LIMIT_S) -> SolverReport:
    """Solve ``model`` with ``solver`` (``cbc`` or ``highs``); return name, status, seconds.

    Status is ``Optimal`` (proven), ``Feasible`` (a plan, not proven least:
    e.g. stopped by ``time_limit``), ``Infeasible``, ``Unbounded``,
    ``Not Solved`` or ``Undefined``; never hidden.
    """
    if solver not in SOLVERS:
        raise InputError(f"unknown solver {solver!r} (choose from {', '.join(SOLVERS)})",
                         field="--solver")
    if solver not in available_solvers():
        raise InputError(f"solver {solver!r} is not installed here"
                         + (" (pip install highspy)" if solver == "highs" else ""),
                         field="--solver")
    engine = _make_solver(solver, model, time_limit)
    t0 = time.perf_counter()
    with _quiet_stdout():
        status = model.problem.solve(engine)
    seconds = time.perf_counter() - t0
    label = {"cbc": "CBC", "highs": "HiGHS"}[solver]
    return SolverReport(label, _status_text(model.problem, status), seconds)


# ---------------------------------------------------------------------------
# Read
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Solution:
    """The values of the programme's variables, rounded to whole numbers."""

    copies: dict[tuple[int, int], int]
    flow: dict[tuple[int, int], int]
    packs: dict[int, int]
    slack: dict[int, int]


def _int(x) -> int:
    v = pulp.value(x)
    return 0 if v is None else int(round(v))


def read_solution(model: PlanModel, report: SolverReport) -> Solution:
    """Read the variables; refuses when the solver found no solution.

    Raises
    ------
    RuntimeError
        When ``report.status`` is neither ``Optimal`` nor ``Feasible``.
    """
    if not report.has_solution:
        raise RuntimeError(f"no solution to read: solver status {report.status}")
    copies = {c: _int(e) for c, e in model.copies.items()}
    flow = {k: _int(v) for k, v in model.flow.items()}
    packs = {k: _int(v) for k, v in model.packs.items()}
    slack = {k: _int(v) for k, v in model.slack.items()}
    return Solution({c: n for c, n in copies.items() if n > 0},
                    {k: n for k, n in flow.items() if n > 0},
                    {k: n for k, n in packs.items() if n > 0},
                    {k: n for k, n in slack.items() if n > 0})
