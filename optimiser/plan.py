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
where ``ŝ`` is the design score normalised over the candidates of its build to
[0, 1) (0 the best; lower scores are better) and ``w = δ / (2·N)``: ``δ`` is the
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
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from fractions import Fraction

import pulp

from inventory.parts import (
    DEFAULT_CAPACITOR_TOLERANCE,
    DEFAULT_CAPACITOR_VOLTAGE_V,
    DEFAULT_RESISTOR_POWER_W,
    DEFAULT_RESISTOR_TOLERANCE,
    POLARISED_DIELECTRICS,
    StockSnapshot,
)
from optimiser.design import Design, Piece, RolePick
from optimiser.purchase import TO_ORDER, Catalogue

__all__ = [
    "SOLVERS",
    "PlanItem",
    "Row",
    "PlanModel",
    "SolverReport",
    "Solution",
    "Allocation",
    "BuildPlan",
    "Purchase",
    "Shortfall",
    "Plan",
    "available_solvers",
    "stock_rows",
    "can_stand_in",
    "design_demand",
    "build_model",
    "solve_model",
    "read_solution",
    "assemble",
    "diagnose",
    "plan_builds",
    "prefer_stock",
    "gather_candidates",
    "make_plan",
    "commit_entries",
]

#: Solvers ``--solver`` accepts.
SOLVERS = ("cbc", "highs")
TRANSISTOR_KINDS = ("npn", "pnp")


# ---------------------------------------------------------------------------
# Inputs
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class PlanItem:
    """One build of the list: ``count`` copies of a request, and its candidates."""

    name: str
    count: int
    identical: bool = True
    candidates: tuple[Design, ...] = ()
    note: str = ""            # why there are no candidates, when there are none
    #: Pieces must keep their tolerance (a wider one never stands in).  Needed when
    #: the request's yield depends on the tolerances; otherwise the nominal figures
    #: the design was chosen by do not change with the tolerance.
    strict_tolerance: bool = True


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
        from inventory.values import format_value
        return format_value(value, kind)
    except Exception:  # values module not there (yet): plain SI
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
    return abs(a - b) <= 1e-9 * max(abs(a), abs(b))


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
    if (strict_tolerance and st > ot * (1 + 1e-9)) or sr < floor * (1 - 1e-9):
        return False
    if sub.kind == "capacitor" and sub.polarised and not orig.polarised:
        return False
    return True


class _Unusable(Exception):
    """A candidate names a part the planner cannot find."""


def _named_rows(design: Design, rows: dict[int, Row],
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
                    raise _Unusable(f"{pick.role} {pick.label} is neither in stock nor purchasable")
                rid = hit.id
            if rid not in rows:
                raise _Unusable(f"{pick.role}: stock row {rid} is not in the drawer")
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
    _Unusable
        When a piece names a row that is neither in stock nor purchasable.
    """
    need: dict[int, int] = defaultdict(int)
    has_q = False
    for rid, p in _named_rows(design, rows, catalogue):
        if p.kind in TRANSISTOR_KINDS:
            has_q = True
        need[rid] += int(p.count)
    if not has_q:
        qrows = [r for r in rows.values()
                 if r.kind in TRANSISTOR_KINDS and r.label == design.transistor]
        if not qrows:
            raise _Unusable(f"transistor {design.transistor} is not in the drawer")
        need[min(q.id for q in qrows)] += 1
    return dict(need)


# ---------------------------------------------------------------------------
# Build
# ---------------------------------------------------------------------------

def _tag(row: Row) -> str:
    letter = {"resistor": "R", "capacitor": "C"}.get(row.kind, "Q")
    text = row.label.replace("µ", "u").replace("Ω", "")
    text = re.sub(r"[^A-Za-z0-9]+", "_", text).strip("_") or "x"
    return f"{letter}_{text}_" + ("buy" if row.virtual else f"id{row.id}")


def _cost_quantum(catalogue: Catalogue | None) -> float:
    """Greatest common divisor of the pack prices and the line cost (> 0)."""
    if catalogue is None or not catalogue.items:
        return 1.0
    steps = [Fraction(str(p.pack_price)).limit_denominator(10**6)
             for p in catalogue.items.values()]
    if catalogue.options is not None:
        steps.append(Fraction(str(catalogue.options.line_cost)).limit_denominator(10**6))
    steps = [s for s in steps if s > 0]
    if not steps:
        return 1.0
    den = math.lcm(*(s.denominator for s in steps))
    g = math.gcd(*(int(s * den) for s in steps))
    return float(Fraction(g, den))


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


def _normalised_scores(designs: Sequence[Design]) -> list[float]:
    """Scores mapped onto [0, 1): 0 the best (lowest) of the build; None counts as worst."""
    raw = [d.score for d in designs]
    finite = [float(s) for s in raw if s is not None and math.isfinite(float(s))]
    if not finite:
        return [0.0] * len(raw)
    lo, hi = min(finite), max(finite)
    span = hi - lo
    out = []
    for s in raw:
        if s is None or not math.isfinite(float(s)):
            out.append(0.999)
        elif span <= 0:
            out.append(0.0)
        else:
            out.append(0.999 * (float(s) - lo) / span)
    return out


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
        norm = _normalised_scores(it.candidates)
        for j, d in enumerate(it.candidates):
            try:
                demand[(b, j)] = design_demand(d, rows, catalogue)
                named = _named_rows(d, rows, catalogue)
            except _Unusable as exc:
                skipped[(b, j)] = str(exc)
                continue
            scores[(b, j)] = norm[j]
            for rid, p in named:
                old = rating_need.get(rid, 0.0)
                rating_need[rid] = None if old is None or p.need is None else max(old, p.need)

    total_copies = sum(max(it.count, 0) for it in items) or 1
    quantum = _cost_quantum(catalogue)
    weight = quantum / (2.0 * total_copies)

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
    gap_abs = model.score_weight * 0.01
    if name == "cbc":
        return pulp.PULP_CBC_CMD(msg=False, timeLimit=time_limit, gapRel=0.0, gapAbs=gap_abs)
    if name == "highs":
        return pulp.HiGHS(msg=False, timeLimit=time_limit, gapRel=0.0, gapAbs=gap_abs)
    from inventory.errors import InputError
    raise InputError(f"unknown solver {name!r} (choose from {', '.join(SOLVERS)})",
                     field="--solver")


def _status_text(problem: pulp.LpProblem, status: int) -> str:
    if problem.sol_status == pulp.LpSolutionOptimal:
        return "Optimal"
    if problem.sol_status == pulp.LpSolutionIntegerFeasible:
        return "Feasible"          # a solution, not proven least (e.g. time limit)
    return pulp.LpStatus.get(status, "Undefined")


def solve_model(model: PlanModel, solver: str = "cbc",
                time_limit: float | None = None) -> SolverReport:
    """Solve ``model`` with ``solver`` (``cbc`` or ``highs``); return name, status, seconds.

    Status is ``Optimal`` (proven), ``Feasible`` (a plan, not proven least:
    e.g. stopped by ``time_limit``), ``Infeasible``, ``Unbounded``,
    ``Not Solved`` or ``Undefined``; never hidden.
    """
    from inventory.errors import InputError
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


# ---------------------------------------------------------------------------
# Assemble
# ---------------------------------------------------------------------------

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

    def to_json(self) -> dict:
        return {"request": self.request, "reason": self.reason, "shortage": self.shortage}


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

    def to_json(self) -> dict:
        d = {"feasible": self.feasible,
             "builds": [b.to_json() for b in self.builds],
             "purchases": [p.to_json() for p in self.purchases],
             "cost": round(self.cost, 6),
             "solver": self.solver.to_json(),
             "candidates": self.candidates}
        if not self.feasible:
            d["infeasible"] = [s.to_json() for s in self.infeasible]
        return d


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
                       "variables": len(model.problem.variables()),
                       "constraints": len(model.problem.constraints)})


# ---------------------------------------------------------------------------
# Explaining an infeasible plan
# ---------------------------------------------------------------------------

def diagnose(items: Sequence[PlanItem], rows: dict[int, Row], catalogue: Catalogue | None,
             solver: str = "cbc", time_limit: float | None = None) -> list[Shortfall]:
    """Name the requests that cannot be met and the shortages that bind.

    A build without any candidate is reported as such.  For the others an
    elastic programme (:func:`build_model` with ``elastic=True``) finds the
    fewest pieces that would have to be added; every stock row that falls short
    there is a binding shortage, reported against each request whose chosen
    designs draw on it (``have`` the pieces in those rows, ``need`` what the
    plan would take).
    """
    catalogue = catalogue or Catalogue()
    out: list[Shortfall] = []
    usable = []
    for it in items:
        if not it.candidates:
            out.append(Shortfall(it.name, it.note or "no design meets the request from this drawer"))
        else:
            usable.append(it)
    if not usable:
        return out
    model = build_model(usable, rows, catalogue, elastic=True)
    names = [it.name for it in usable]
    for b, it in enumerate(usable):
        if not any(c[0] == b for c in model.demand):
            reasons = sorted({m for c, m in model.skipped.items() if c[0] == b})
            out.append(Shortfall(it.name, "no candidate can be built: " + "; ".join(reasons)))
    if any(s.request in names for s in out):
        return out
    report = solve_model(model, solver, time_limit)
    if not report.has_solution:
        return out + [Shortfall(n, f"the plan could not be explained (solver {report.status})")
                      for n in names]
    sol = read_solution(model, report)
    short_rows = set(sol.slack)
    if not short_rows:
        if out:        # the builds with candidates fit; those without are the reason
            return out
        return [Shortfall(n, "the solver found no plan although the stock suffices "
                          f"(status {report.status})") for n in names]
    # per pool: pieces in the short rows and pieces the plan takes from them
    # (every stock row of a short pool that the plan draws on counts)
    short_pools = {rows[s].pool for s in short_rows}
    drawn = {s for (_r, s), k in sol.flow.items()
             if k > 0 and not rows[s].virtual and rows[s].pool in short_pools}
    pool_have: dict[tuple[str, str], int] = defaultdict(int)
    pool_need: dict[tuple[str, str], int] = defaultdict(int)
    for s in drawn | short_rows:
        pool_have[rows[s].pool] += rows[s].qty
    for (_r, s), k in sol.flow.items():
        if s in drawn:
            pool_need[rows[s].pool] += k
    # which builds draw on which short pools
    users: dict[tuple[str, str], set[int]] = defaultdict(set)
    for (b, j) in sol.copies:
        for r in model.demand[(b, j)]:
            for (rr, s), k in sol.flow.items():
                if rr == r and s in drawn and k > 0:
                    users[rows[s].pool].add(b)
    for b, name in enumerate(names):
        pools = sorted(p for p, bs in users.items() if b in bs)
        if not pools:
            continue
        shortage = [{"kind": k, "label": lab, "have": pool_have[(k, lab)],
                     "need": pool_need[(k, lab)]} for k, lab in pools]
        others = sorted({names[o] for p in pools for o in users[p] if o != b})
        what = ", ".join(f"{lab} (have {pool_have[(k, lab)]}, need {pool_need[(k, lab)]})"
                         for k, lab in pools)
        reason = f"not enough {what}"
        if others:
            reason += f"; shared with {', '.join(others)}"
        if any(k in ("resistor", "capacitor") for k, _ in pools) and not catalogue.items:
            reason += "; a [purchase] table would allow ordering resistors and capacitors"
        out.append(Shortfall(name, reason, shortage))
    return out


def plan_builds(items: Sequence[PlanItem], snapshot: StockSnapshot,
                catalogue: Catalogue | None = None, *, solver: str = "cbc",
                time_limit: float | None = None) -> Plan:
    """Build, solve and read the programme; explain it when it has no solution.

    Parameters
    ----------
    items : sequence of PlanItem
        The builds and their candidate designs.
    snapshot : StockSnapshot
        The drawer (may already hold the catalogue's virtual rows).
    catalogue : Catalogue, optional
        What may be bought (:func:`optimiser.purchase.augment`).
    solver : {"cbc", "highs"}
    time_limit : float, optional
        Seconds; a plan found by then is reported with status ``Feasible``.
    """
    catalogue = catalogue or Catalogue()
    rows = stock_rows(snapshot, catalogue)
    items = list(items)
    if any(not it.candidates for it in items):
        report = SolverReport({"cbc": "CBC", "highs": "HiGHS"}.get(solver, solver),
                              "Infeasible", 0.0)
        return Plan(False, report, infeasible=diagnose(items, rows, catalogue, solver,
                                                       time_limit),
                    candidates=sum(len(it.candidates) for it in items))
    model = build_model(items, rows, catalogue)
    report = solve_model(model, solver, time_limit)
    if report.has_solution:
        return assemble(model, read_solution(model, report), report)
    if report.status == "Infeasible":
        why = diagnose(items, rows, catalogue, solver, time_limit)
    else:
        why = [Shortfall(it.name, f"the solver stopped without a plan (status {report.status})")
               for it in items]
    return Plan(False, report, infeasible=why, candidates=len(model.demand),
                stats={"variables": len(model.problem.variables()),
                       "constraints": len(model.problem.constraints)})


# ---------------------------------------------------------------------------
# From a build list: candidates from the search, then the programme
# ---------------------------------------------------------------------------

def _design_key(d: Design) -> tuple:
    return (d.topology, d.transistor,
            tuple(sorted((role, round(p.value, 12), p.joined or "",
                          tuple((q.id, q.count, round(q.value, 12)) for q in p.pieces))
                         for role, p in d.parts.items())))


def gather_candidates(request, snapshot: StockSnapshot, augmented: StockSnapshot, *,
                      top: int = 30, search_fn: Callable | None = None,
                      search_time_s: float | None = None
                      ) -> tuple[list[Design], str, dict]:
    """Candidate designs for one request: enough, and varied enough, to give the programme choices.

    Three sources, merged and freed of duplicates:

    1. the best ``top`` designs over the drawer as it is;
    2. the best ``top`` over the drawer plus the purchasable values (when
       ``augmented`` differs from ``snapshot``);
    3. for a request open to any transistor, the best ``max(3, top // 5)`` with
       each transistor type the drawer holds that (1) and (2) left short of
       that many, so that a scarce type never leaves the programme without
       alternatives.

    The search runs for one copy (``builds = 1``): quantities for all copies
    are the programme's business.

    Returns
    -------
    (designs, note, stats)
        ``note`` says why there are none (the nearest misses' violations).
    """
    if search_fn is None:
        from optimiser.search import search as search_fn
    from inventory.errors import InputError

    one = replace(request, builds=1)
    found: list[Design] = []
    misses: list[Design] = []
    runs = 0
    incomplete: list[str] = []
    t0 = time.perf_counter()

    def run(req, snap, n, nmiss=0):
        nonlocal runs
        runs += 1
        kw = {"time_limit_s": search_time_s} if search_time_s else {}
        res = search_fn(req, snap, top=n, misses=nmiss, **kw)
        if not res.stats.get("complete", True) if hasattr(res, "stats") else False:
            incomplete.append(req.transistor)
        found.extend(d for d in res.designs if d.meets_spec)
        misses.extend(getattr(res, "nearest_misses", []) or [])
        return res

    run(one, snapshot, top, 3)
    if augmented is not snapshot:
        run(one, augmented, top)
    if request.transistor == "any":
        per = max(3, top // 5)
        have: dict[str, int] = defaultdict(int)
        for d in found:
            have[d.transistor] += 1
        for t in sorted({t.label for t in snapshot.transistors if t.qty > 0}):
            if have[t] >= per:
                continue
            try:
                run(replace(one, transistor=t), augmented, per)
            except InputError:
                continue               # e.g. a type that cannot serve this topology
    seen: set[tuple] = set()
    unique: list[Design] = []
    for d in sorted(found, key=lambda d: (d.score if d.score is not None else math.inf)):
        k = _design_key(d)
        if k not in seen:
            seen.add(k)
            unique.append(d)
    note = ""
    if not unique:
        note = "no design meets the request from this drawer"
        if misses:
            best = misses[0]
            if best.violations:
                note += "; nearest miss: " + ", ".join(best.violations[:3])
    return unique, note, {"searches": runs, "seconds": time.perf_counter() - t0,
                          "searches_stopped_at_time_limit": len(incomplete)}


def make_plan(buildlist, snapshot: StockSnapshot, *, solver: str = "cbc", candidates: int = 20,
              time_limit: float | None = None, search_fn: Callable | None = None,
              progress: Callable[[str], None] | None = None,
              search_time_s: float | None = None) -> Plan:
    """Plan a build list against ``snapshot``: candidates, programme, solution.

    Parameters
    ----------
    buildlist : optimiser.buildlist.BuildList
    snapshot : StockSnapshot
        The drawer as the store holds it (no virtual rows).
    solver : {"cbc", "highs"}
    candidates : int
        ``top`` for each search (see :func:`gather_candidates`).
    time_limit : float, optional
        Seconds for the solver.
    search_fn : callable, optional
        Stands in for :func:`optimiser.search.search` (tests).
    search_time_s : float, optional
        Time limit of each candidate search.  A search stopped by it still
        gives valid designs; the plan is then optimal over the candidates found
        (``stats["search"]`` counts the searches that stopped early).
    progress : callable, optional
        Called with a short text before each request's search.
    """
    from optimiser.purchase import augment

    augmented, catalogue = augment(snapshot, buildlist.purchase)
    items = []
    search_stats = []
    for b in buildlist.builds:
        if progress is not None:
            progress(f"searching designs for {b.name}")
        designs, note, st = gather_candidates(b.request, snapshot, augmented, top=candidates,
                                              search_fn=search_fn, search_time_s=search_time_s)
        st["candidates"] = len(designs)
        search_stats.append({"request": b.name, **st})
        items.append(PlanItem(b.name, b.count, b.identical, tuple(designs), note,
                              strict_tolerance=b.request.wants_yield))
    if progress is not None:
        progress("solving the plan")
    plan = plan_builds(items, augmented, catalogue, solver=solver, time_limit=time_limit)
    plan.stats["search"] = search_stats
    plan.stats["search_seconds"] = sum(s["seconds"] for s in search_stats)
    return plan


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
