"""When no design meets a request: the nearest misses and what would unlock it.

(docs/answers.md describes all of this for the user.)

* **Relax one target.**  For every target the request sets, gain included, the
  exact search is run again with that target alone relaxed and every other
  target kept: without the target (band edges, Z_in, drift, THD, least I_C), or
  with the gain window widened step by step.  Each design it finds is a real
  stock design meeting every other target, so relaxing the target to that
  design's figure provably unlocks the request; the design is evaluated again
  against the relaxed request to confirm it.  Among the designs found the one
  nearest the original target is named; a nearer one is not ruled out, except
  where a completed search proved that none exists within a window (the gain
  steps say so).
* **Nearest misses.**  The stock designs the proof evaluated and rejected (its
  :class:`~optimiser.search.miss_pool.MissPool`), and the designs found and
  rejected by those searches and by one search with every target loosened (gain
  window + 6 dB, no other target; validity rules stay), which runs until it holds
  one, judged against the *original* request with their pieces' ratings; where
  none of them holds one, a search with no target at all (:func:`_any_designs`).
  Only real designs whose pieces the stock supplies for ``builds`` copies are
  kept; they are ordered by the number of targets they miss, then by their
  distance (:func:`miss_distance`).
* **What the capacitors in stock allow.**  With an f_low target, the floor every
  stage of the drawer obeys (:func:`optimiser.f_low_bounds.drawer_f_low_floor`: the
  largest capacitor in stock against the largest loop resistance a stage can
  give it); when it lies above the target, the answer says so and names the
  least C_IN and C_OUT the target needs (necessary values, not sufficient ones).
  Closed form, no search: it comes first and costs no time.
* **Buy one value.**  The search is run on the drawer plus every E12 resistor
  and E6 capacitor within (a little beyond) the span of values the drawer holds
  (at most 10 Ω–1 MΩ, 10 pF–1000 µF) as rows "to order"; a design meeting the
  request with exactly one bought value names it.  This is a suggestion, not a
  complete list.

Pure functions over plain objects; no I/O.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, replace

from inventory.parts import Capacitor, Resistor, StockSnapshot
from inventory.values import format_si, format_value, series_values
from optimiser.design import Design
from optimiser.evaluate import evaluate
from optimiser.f_low_bounds import capacitance_needed, drawer_f_low_floor
from optimiser.request import Request
from optimiser.search.miss_pool import (
    TARGETS,
    UNITS,
    miss_distance,
    miss_order,
    shortfalls,
    values_key,
)
from optimiser.search.stock import piece_ratings
from optimiser.search.tree import search_designs
from optimiser.stage import StageBatch
from optimiser.stages import module as stage_module

__all__ = ["explain", "change_json", "Relaxer", "stage_relaxer", "relax_targets", "unlock_text",
           "advice", "miss_distance", "relaxed", "stock_shortfall", "miss_order", "TARGETS",
           "MISS_BUDGET_S", "BUY_BUDGET_S", "RELAX_BUDGET_S", "EXPLAIN_BUDGET_S", "GAIN_STEPS_DB", "f_low_floor_note",
           "relaxation_order"]

#: Time budgets (s) of the suggestion searches; a budget only shortens the list of
#: suggestions (and a search stopped by it proves no "none within").
MISS_BUDGET_S = 20.0
BUY_BUDGET_S = 10.0
RELAX_BUDGET_S = 10.0
#: Time (s) all the suggestions of one answer share: past it the searches not yet run
#: are skipped and named in the answer.  Trades how much advice an infeasible answer
#: carries against how long the user waits for it; the proof of infeasibility itself
#: is not bounded by it.
EXPLAIN_BUDGET_S = 2.0
#: Share of EXPLAIN_BUDGET_S the nearest-miss search may take first (the misses are
#: what an infeasible answer shows; the relaxations and the bought value share the rest).
MISS_SHARE = 0.4
#: How far (dB) the gain window is widened, one step after the other, until a
#: stock design meeting every other target falls inside it.
GAIN_STEPS_DB = (3.0, 6.0, 12.0, 24.0, 48.0, 96.0)
#: How many designs each relaxation search returns to choose the nearest from.
RELAX_TOP = 20

def relaxed(request: Request) -> Request:
    """The request with its targets loosened (validity rules are not relaxable)."""
    return replace(request, gain_tol_db=request.gain_tol_db + 6.0, f_low_max_hz=None,
                   f_high_min_hz=None, zin_min_ohm=None, ic_drift_max_pct=None,
                   thd_max_pct=None, ic_min_a=None, min_yield_pct=None)


def stock_shortfall(design: Design, snapshot: StockSnapshot, builds: int) -> list[str]:
    """Why the stock cannot supply ``builds`` copies of ``design`` (empty: it can).

    Every piece must name a stock row; a row used by several roles is counted
    once per use.
    """
    qty = {x.id: x.qty for x in (*snapshot.resistors, *snapshot.capacitors) if x.id is not None}
    need: dict[int, int] = {}
    out = []
    for role, p in design.parts.items():
        if not p.pieces:
            out.append(f"{role} names no stock piece")
        for piece in p.pieces:
            if piece.id is None or piece.id not in qty:
                out.append(f"{role} names no stock row")
                continue
            need[piece.id] = need.get(piece.id, 0) + piece.count * builds
    for i, n in need.items():
        if n > qty[i]:
            out.append(f"stock row {i} holds {qty[i]}, {n} needed")
    t = snapshot.transistor(design.transistor)
    if t is None or t.qty < builds:
        out.append(f"transistor {design.transistor}: fewer than {builds} in stock")
    return out


def _judge(request: Request, designs: list[Design], snapshot: StockSnapshot) -> list[Design]:
    """Re-evaluate real stock designs against ``request``, each with the ratings of its
    own pieces; misses get violations and a distance.  Designs the stock cannot supply
    are dropped.  One engine call per transistor and topology (a role a design lacks
    is 0, as the engine reads it)."""
    kept = []
    seen = set()
    for d in designs:
        key = values_key(d)
        if key in seen or stock_shortfall(d, snapshot, request.builds):
            continue
        seen.add(key)
        kept.append(d)
    groups: dict[tuple, list[int]] = {}
    for k, d in enumerate(kept):
        groups.setdefault((d.transistor, d.topology), []).append(k)
    out = []
    for (label, topo), idx in groups.items():
        ds = [kept[k] for k in idx]
        roles = sorted({r for d in ds for r in d.values()})
        vals = {r: [d.values().get(r, 0.0) for d in ds] for r in roles}
        ev = evaluate(request, StageBatch.from_values(topo, **vals),
                      snapshot.transistor(label), piece_ratings([d.parts for d in ds], roles))
        for j, d in enumerate(ds):
            m = ev.metrics_of(j)
            for k in ("gain_inf_db", "hd2_pct", "supply_a"):
                if k in d.metrics:
                    m[k] = d.metrics[k]
            viol = ev.violations(j)
            if not viol:
                continue
            dist = miss_distance(request, m, bool(ev.valid[j]))
            out.append((idx[j], replace(d, metrics=m, meets_spec=False, violations=viol,
                                        rank=None, extra={**d.extra, "miss_distance": dist,
                                                          "shortfalls": shortfalls(request, m)})))
    out.sort(key=lambda x: x[0])            # the order of ``designs`` among equals
    res = [d for _, d in out]
    res.sort(key=miss_order)
    return res


def _fmt(x: float, unit: str) -> str:
    if unit == "%":
        return f"{x:.3g} %"
    if unit == "dB":
        return f"{x:.1f} dB"
    return format_si(x, unit)


def _outward(x: float, sense: str) -> float:
    """``x`` to three significant figures, rounded so that ``x`` still meets it."""
    if x <= 0 or not math.isfinite(x):
        return x
    e = 10 ** (math.floor(math.log10(x)) - 2)
    return (math.ceil(x / e) if sense == "max" else math.floor(x / e)) * e


def _meets(request: Request, d: Design, snapshot: StockSnapshot) -> bool:
    """The engine's verdict on design ``d`` against ``request`` (the proof of an unlock)."""
    ev = evaluate(request, StageBatch.from_values(d.topology, **d.values()),
                  snapshot.transistor(d.transistor), None)
    return bool(ev.meets[0])


@dataclass
class Relaxer:
    """What the relaxation searches run on: the single stage's exact search
    (:func:`stage_relaxer`) or a chain search (:mod:`.chain_unlocks`).

    ``search(request, snapshot, budget_s)`` returns (designs meeting ``request`` from
    ``snapshot``, proven that none lies outside them, stopped by its budget, rejected
    designs for the nearest misses); ``meets(request, design)`` is the engine's verdict
    (the proof of an unlock); ``figure(design, metric)`` a design's figure for a
    target's metric."""

    snapshot: StockSnapshot
    search: Callable[[Request, StockSnapshot, float], tuple[list, bool, bool, list]]
    meets: Callable[[Request, object], bool]
    figure: Callable[[object, str], float | None]
    targets: tuple = TARGETS
    #: what a found design is, and the search that finds them (the proof's words)
    what: str = "a stock design"
    how: str = "the exact search"
    budget_s: float = RELAX_BUDGET_S
    buy_budget_s: float = BUY_BUDGET_S


def stage_relaxer(snapshot: StockSnapshot) -> Relaxer:
    """The single stage's relaxations: the exact search (complete unless stopped by its
    budget), the single-stage engine's verdict."""

    def run(request: Request, snap: StockSnapshot, budget: float):
        s: dict = {"pruned": {}}
        found, pool = search_designs(request, snap, RELAX_TOP, s, budget_s=budget,
                                     keep_rejects=True)
        stopped = bool(s.get("stopped_at_budget", False))
        return found, not stopped, stopped, pool.designs()

    return Relaxer(snapshot, run, lambda request, d: _meets(request, d, snapshot),
                   lambda d, metric: d.metrics.get(metric))


class _Clock:
    """What is left of the time all the suggestions of one answer share, and which
    searches it left out."""

    def __init__(self, seconds: float) -> None:
        self.seconds = seconds
        self.deadline = time.perf_counter() + seconds
        self.skipped: list[str] = []

    def left(self) -> float:
        """Seconds left (0 once the clock has run out)."""
        return max(self.deadline - time.perf_counter(), 0.0)

    def budget(self, own: float, name: str) -> float | None:
        """The budget of the next search (its own, or what is left), or None (skipped)."""
        left = self.deadline - time.perf_counter()
        if left <= 0.05:
            self.skipped.append(name)
            return None
        return min(own, left)


def _run(request: Request, relaxer: Relaxer, stats: dict, name: str, clock: _Clock,
         rejected: list):
    """(designs, proven none outside them, stopped) of the relaxer's search of
    ``request`` within its budget and the answer's shared clock; the designs it
    rejected are added to ``rejected``."""
    budget = clock.budget(relaxer.budget_s, name)
    if budget is None:
        return [], False, True
    found, complete, stopped, rej = relaxer.search(request, relaxer.snapshot, budget)
    rejected += rej
    stats.setdefault("relax_searches", {})[name] = len(found)
    return found, complete, stopped


def _relax_gain(request: Request, relaxer: Relaxer, stats: dict, limits, clock: _Clock,
                rejected: list):
    """(designs found, change) for the gain target, or (designs, None); the designs
    its searches rejected are added to ``rejected``."""
    base = replace(request, min_yield_pct=None)
    tol = request.gain_tol_db
    # a physical limit already proves the window empty up to its bound
    reach = next((x["reachable"] for x in limits if x["target"] == "gain_db"), None)
    empty_within = tol if reach is None else max(tol, request.gain_db - reach)
    steps = [d for d in GAIN_STEPS_DB if tol + d > empty_within]
    if reach is not None and (not steps or steps[0] > empty_within - tol + 3.0):
        steps = [empty_within - tol + 3.0] + steps
    for d in steps:
        found, complete, stopped = _run(replace(base, gain_tol_db=tol + d), relaxer, stats,
                                        f"gain_tol_db {tol + d:g}", clock, rejected)
        if not found:
            if complete:
                empty_within = max(empty_within, tol + d)
            elif stopped:
                break
            continue
        best = min(found, key=lambda x: abs(relaxer.figure(x, "gain_db") - request.gain_db))
        g = float(relaxer.figure(best, "gain_db"))
        new_db = round(g, 1)
        new_tol = math.ceil((abs(g - request.gain_db)) * 100 + 1e-9) / 100
        proof = f"{relaxer.what} meets every other target at this gain (found by " \
                f"{relaxer.how} with the gain window widened)"
        if not (relaxer.meets(replace(base, gain=10 ** (new_db / 20)), best)
                and relaxer.meets(replace(base, gain_tol_db=new_tol), best)):
            return found, None
        change = {"target": "gain_db", "from": request.gain_db, "to": new_db, "unit": "dB",
                  "gain_tol_db_to": new_tol, "proof": proof,
                  "none_within_db": empty_within if empty_within > tol else None,
                  "design": best}
        return found, change
    return [], None


def _relax_limit(request: Request, key: str, relaxer: Relaxer, stats: dict,
                 clock: _Clock, rejected: list):
    """(designs found, change) for one limit target relaxed (removed), or (designs, None);
    the designs its search rejected are added to ``rejected``."""
    metric, sense = {k: (mm, s) for k, mm, s in relaxer.targets}[key]
    found, _, _ = _run(replace(request, **{key: None}, min_yield_pct=None), relaxer, stats,
                       f"without {key}", clock, rejected)
    vals = [(float(v), d) for d in found
            if (v := relaxer.figure(d, metric)) is not None and math.isfinite(v)]
    if not vals:
        return found, None
    v, best = (max if sense == "min" else min)(vals, key=lambda x: x[0])
    new = _outward(v, sense)
    if not relaxer.meets(replace(request, **{key: new}, min_yield_pct=None), best):
        return found, None
    change = {"target": key, "from": getattr(request, key), "to": new, "unit": UNITS[key],
              "proof": f"{relaxer.what} meets every other target at this limit (found by "
                       f"{relaxer.how} without the {key} target)", "design": best}
    return found, change


def relax_targets(request: Request, relaxer: Relaxer, stats: dict, limits, clock: _Clock,
                  f_low_floor: bool = False) -> tuple[list, list[dict]]:
    """(designs found or rejected, unlock changes): each target of ``request`` relaxed
    alone (:func:`relaxation_order`), each change proven by ``relaxer.meets`` on the
    design it names.  Past a physical limit (``limits``) only the limited targets."""
    candidates: list = []
    changes: list[dict] = []
    # past a physical limit nothing unlocks the request but relaxing the limited
    # targets: the other relaxations would search in vain
    only = {x["target"] for x in limits} or None
    for key in relaxation_order(request, stats, f_low_floor, relaxer.targets):
        if only is not None and key not in only:
            continue
        rejected_by: list = []
        if key == "gain_db":
            found, change = _relax_gain(request, relaxer, stats, list(limits), clock,
                                        rejected_by)
        else:
            found, change = _relax_limit(request, key, relaxer, stats, clock, rejected_by)
        candidates += found + rejected_by
        if change:
            changes.append(change)
    return candidates, changes


def relaxation_order(request: Request, stats: dict, f_low_floor: bool = False,
                     targets: tuple = TARGETS) -> list[str]:
    """The targets of ``request`` to relax one at a time, those the proof showed
    binding first (they share one clock: the first get their search).

    f_low is binding where the drawer's floor lies above the target (``f_low_floor``)
    or where the proof's f_low bounds (B20, B21) dropped anything (``stats["pruned"]``
    keys ``f_low_*``), the least current where its bound did (``ic_min``); the others
    keep their order: the gain, then ``targets`` (:data:`TARGETS`)."""
    keys = (["gain_db"] if request.gain is not None else []) + \
        [k for k, _, _ in targets if getattr(request, k) is not None]
    pruned = stats.get("pruned", {})
    binding = set()
    if f_low_floor or any(v > 0 for k, v in pruned.items() if k.startswith("f_low")):
        binding.add("f_low_max_hz")
    if pruned.get("ic_min", 0) > 0:
        binding.add("ic_min_a")
    return sorted(keys, key=lambda k: k not in binding)


def change_json(c: dict) -> dict:
    """An unlock change as JSON: its figures, and the design that proves it (``design``,
    the one the engine's verdict was taken on, in the form of the answer's designs)."""
    return {k: (v.to_json() if k == "design" else v) for k, v in c.items()}


def unlock_text(request: Request, c: dict) -> str:
    """One line of advice for an unlock change."""
    if c["target"] == "gain_db":
        text = (f"relax gain_db from {c['from']:.1f} to {c['to']:.1f} dB (or gain_tol_db from "
                f"{request.gain_tol_db:g} to {c['gain_tol_db_to']:.2f} dB): {c['proof']}")
        if c.get("none_within_db"):
            text += f"; none lies within ± {c['none_within_db']:.3g} dB of {c['from']:.1f} dB"
        return text
    return (f"relax {c['target']} from {_fmt(c['from'], c['unit'])} to "
            f"{_fmt(c['to'], c['unit'])}: {c['proof']}")


def explain(request: Request, snapshot: StockSnapshot, pool, misses: int, stats: dict,
            limits=()):
    """(nearest misses, unlock advice, unlock changes) for a request nothing in stock meets.

    ``limits`` are the request's physical limits (:func:`optimiser.search.limits.physical_limits`).
    """

    ts = [t for t in snapshot.transistors]
    if request.transistor != "any" and snapshot.transistor(request.transistor):
        ts = [snapshot.transistor(request.transistor)]
    if not ts:
        return [], ["no transistor in stock: add one (stock import) to design anything"], []
    usable = [t for t in ts if t.qty >= request.builds]
    if not usable:
        return [], [f"no transistor type has {request.builds} pieces for "
                    f"{request.builds} builds"], []
    rated = [t for t in usable if t.vceo is None or request.supply_v <= t.vceo]
    if not rated:
        best = max(t.vceo for t in usable)
        return [], [f"no stocked transistor is rated for {request.supply_v:g} V (highest vceo "
                    f"{best:g} V): lower supply_v to {best:g} V or buy a higher-voltage type"], []
    candidates: list[Design] = []
    first: list[str] = []
    note = f_low_floor_note(request, snapshot)
    if note is not None:
        stats["f_low_floor"] = note[1]
        first.append(note[0])
    clock = _Clock(EXPLAIN_BUDGET_S)
    # what the proof itself evaluated and rejected: stock designs, judged below with
    # the rest (the searches after it may add nearer ones)
    candidates += pool.designs() if pool is not None else []
    # the nearest misses first (what the answer shows), with a share of the clock but
    # never without one: the designs it finds and those it rejects
    if not any(x["target"] == "gain_db" for x in limits):
        s2: dict = {"pruned": {}}
        found, rejected = search_designs(
            relaxed(request), snapshot, max(4 * misses, 20), s2,
            budget_s=min(MISS_BUDGET_S, MISS_SHARE * EXPLAIN_BUDGET_S), until_one=True)
        stats["misses_search"] = {k: v for k, v in s2.items() if k != "pruned"}
        candidates += found + rejected.designs()
    found, changes = relax_targets(request, stage_relaxer(snapshot), stats, list(limits),
                                   clock, note is not None)
    candidates += found
    judged = _judge(request, candidates, snapshot)
    if not judged:
        judged = _judge(request, _any_designs(request, snapshot, misses, stats, clock.left()),
                        snapshot)
    nearest = judged[:misses]
    for r, d in enumerate(nearest, 1):
        d.rank = r
    unlock = first + advice(request, stage_relaxer(snapshot), changes, limits, clock, stats)
    return nearest, unlock, changes


def advice(request: Request, relaxer: Relaxer, changes: list[dict], limits, clock: _Clock,
           stats: dict, none_found: str = "see the nearest misses") -> list[str]:
    """The unlock lines: each change, then one bought value (:func:`_buy_one`; not
    against a gain limit, which no part lifts), then what the clock left out, or
    that nothing was found (never presented as proof that nothing exists)."""
    unlock = [unlock_text(request, c) for c in changes]
    if not any(x["target"] == "gain_db" for x in limits):
        budget = clock.budget(relaxer.buy_budget_s, "one bought value")
        if budget is not None:
            try:
                unlock += _buy_one(request, relaxer, budget)
            except Exception as exc:  # a suggestion only; never fail the answer for it
                stats["buy_one_error"] = str(exc)
    if not unlock:
        unlock.append("no single relaxed target or single bought value found within the "
                      f"searches' time budgets; {none_found}")
    if clock.skipped:
        stats["suggestions_skipped"] = list(clock.skipped)
        unlock.append(f"not examined within the {clock.seconds:.3g} s given to suggestions: "
                      + ", ".join(clock.skipped))
    return unlock


def _any_designs(request: Request, snapshot: StockSnapshot, misses: int, stats: dict,
                 budget_s: float) -> list[Design]:
    """Stock designs of the topology with no target at all (no gain either; every
    validity rule kept): the designs found and those rejected, by a search that runs
    past ``budget_s`` until it holds one.  The last source of nearest misses, for when
    the searches nearer the request gave none; it finds none only where it searched
    the drawer to the end."""
    s: dict = {"pruned": {}}
    found, rejected = search_designs(replace(relaxed(request), gain=None), snapshot,
                                     max(misses, 1), s, budget_s=budget_s, until_one=True)
    stats["any_design_search"] = {k: v for k, v in s.items() if k != "pruned"}
    return found + rejected.designs()


def f_low_floor_note(request: Request, snapshot: StockSnapshot) -> tuple[str, dict] | None:
    """(line, figures) when no stage of this drawer can reach ``f_low_max_hz``
    because of the capacitors in stock (:func:`drawer_f_low_floor` above the target),
    else None.  The line names the least C_IN and C_OUT the target needs."""
    r = request
    if r.f_low_max_hz is None:
        return None
    caps = [c.value for c in snapshot.capacitors if c.qty >= r.builds and c.value > 0]
    res = [x.value for x in snapshot.resistors if x.qty > 0 and x.value > 0]
    if not caps or not res:
        return None
    c_max = max(caps)
    r_max = max(res) * (2.0 if r.allow_combos else 1.0)
    mod = stage_module(r.topology)
    roles = mod.ROLE_NAMES
    fl = drawer_f_low_floor(mod.INPUT, mod.OUTPUT, c_max, r_max, sum(x in roles for x in ("RE", "RE_BYP")),
                            r.mid_hz, r.source_ohm, r.load_ohm)
    if not fl["floor_hz"] > r.f_low_max_hz:
        return None
    need = {"C_IN": capacitance_needed(r.f_low_max_hz, fl["input_loop_ohm"], r.mid_hz),
            "C_OUT": capacitance_needed(r.f_low_max_hz, fl["output_loop_ohm"], r.mid_hz)}
    short = [f"{role} at least {format_si(_outward(v, 'max'), 'F')}" for role, v in need.items()
             if v > c_max * (1 + 1e-9)]
    loops = f"{format_si(_outward(fl['input_loop_ohm'], 'max'), 'Ω')} at the input"
    if math.isfinite(fl["output_loop_ohm"]):
        loops += f" and {format_si(_outward(fl['output_loop_ohm'], 'max'), 'Ω')} at the output"
    text = (f"f_low cannot fall below {format_si(_outward(fl['floor_hz'], 'min'), 'Hz')} with "
            f"the capacitors in stock (the largest, {format_si(c_max, 'F')}, against at most "
            f"{loops}); {_fmt(r.f_low_max_hz, 'Hz')} needs " + " and ".join(short)
            + " (necessary, not sufficient)")
    return text, {**fl, "c_max_f": c_max, "needed_f": need}


def _virtual(snapshot: StockSnapshot) -> StockSnapshot:
    res = list(snapshot.resistors)
    caps = list(snapshot.capacitors)
    k = 1
    rlo = min((r.value for r in res), default=10.0) / 2
    rhi = max((r.value for r in res), default=1e6) * 2
    clo = min((c.value for c in caps), default=10e-12) / 3
    chi = max((c.value for c in caps), default=1000e-6) * 3
    for v in series_values("E12", max(10.0, rlo), min(1e6, rhi)):
        res.append(Resistor(float(v), 10**9, id=-k, location="to order"))
        k += 1
    for v in series_values("E6", max(10e-12, clo), min(1000e-6, chi)):
        diel = "electrolytic" if v >= 1e-6 else "ceramic"
        caps.append(Capacitor(float(v), 10**9, id=-k, location="to order", dielectric=diel))
        k += 1
    return replace(snapshot, resistors=tuple(res), capacitors=tuple(caps))


def _buy_one(request: Request, relaxer: Relaxer, budget_s: float = BUY_BUDGET_S
             ) -> list[str]:
    found = relaxer.search(request, _virtual(relaxer.snapshot), budget_s)[0]
    out: list[str] = []
    for d in found:
        bought = {(p.kind, p.value) for rp in d.parts.values() for p in rp.pieces
                  if p.id is not None and p.id < 0}
        if len(bought) != 1:
            continue
        (kind, value), = bought
        roles = [r for r, rp in d.parts.items() if any(p.id is not None and p.id < 0
                                                       for p in rp.pieces)]
        text = (f"buy a {format_value(value, kind)} {kind} (for {', '.join(roles)}): "
                f"then a design meets the request (score {d.score:.3g})")
        if text not in out and not any(format_value(value, kind) in o for o in out):
            out.append(text)
        if len(out) >= 3:
            break
    return out
