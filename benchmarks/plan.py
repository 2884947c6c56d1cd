"""Benchmark: five requests × ten copies over the demo drawer, purchases from E24.

Prints the candidate count, the time the search took to offer them, and the
solver time of the planning programme with CBC (target: ≤ 10 s on a 2-core
machine) and with HiGHS when highspy is installed.  As a baseline measured in
the same run, the LP relaxation of the same programme (CBC, integrality
dropped) is solved too; the MIP times are printed as ratios to it.

    python benchmarks/plan.py [--candidates N] [--time-limit S] [--search-time S]
                              [--pricing-time S]

With ``--pricing-time`` above 0 (default 60) column generation then adds the
designs the relaxation's prices ask for and the programme is solved again over
every column; the LP bound, the plan's objective, the gap and what was proven
are printed (target: ≤ 10 s for pricing and programme together).

    python benchmarks/plan.py --stock-list

plans the fifteen-build list of :data:`STOCK_LIST` (six ce preamps, four cb
stages, five followers, all copies of a build identical) over the invented mixed
drawer of benchmarks/design.py, its transistors raised to fifteen a type
(transistors are never bought): once from stock alone, once with E24 purchases.
Each run is the whole planner (candidate searches, pricing, enumeration, the
programme); it prints the LP bound, the plan's cost, the gap, what was proven,
and the time as a ratio to one single-stage search of the preamp measured in the
same run (target: ≤ 10 s each; from stock a plan of cost 0 proven optimal, with
purchases nothing ordered).
"""

# ruff: noqa: T201  (a script: it prints its figures)
from __future__ import annotations

import argparse
import pickle
import sys
import tempfile
import time
from dataclasses import replace
from importlib import resources
from pathlib import Path

import pulp

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))                 # this checkout's packages, not an installed one
sys.path.insert(0, str(ROOT / "benchmarks"))

from design import mixed_drawer  # noqa: E402

import optimiser.search as search_module  # noqa: E402
from drawerfit.render.plan import bound_line  # noqa: E402
from inventory.store import open_store  # noqa: E402
from optimiser.buildlist import BuildList, BuildSpec  # noqa: E402
from optimiser.planning import (  # noqa: E402
    DEFAULT_CANDIDATES,
    PlanItem,
    available_solvers,
    build_model,
    gather_candidates,
    make_plan,
    plan_builds,
    stock_rows,
)
from optimiser.planning.candidates import SEARCH_TIME_LIMIT_S  # noqa: E402
from optimiser.planning.closing import close_gap  # noqa: E402
from optimiser.planning.colgen import finish_bound, generate_columns  # noqa: E402
from optimiser.planning.copies import carried  # noqa: E402
from optimiser.purchase import PurchaseOptions, augment  # noqa: E402
from optimiser.request import parse_request  # noqa: E402

#: Five invented requests of which a small (invented) club might build ten each.
REQUESTS = {
    "mic-pre": {"topology": "ce", "supply_v": 12.0, "source_ohm": "600", "load_ohm": "10k",
                "gain_db": 20.0, "f_low_max_hz": 50, "ic_drift_max_pct": 10,
                "temp_c": [10, 40]},
    "line-amp": {"topology": "ce", "supply_v": 9.0, "source_ohm": "1k", "load_ohm": "47k",
                 "gain_db": 14.0, "f_low_max_hz": 30, "ic_drift_max_pct": 15},
    "buffer": {"topology": "cc", "supply_v": 12.0, "source_ohm": "10k", "load_ohm": "2k2",
               "f_low_max_hz": 20, "zin_min_ohm": "20k"},
    "rf-gain": {"topology": "cb", "supply_v": 12.0, "source_ohm": "50", "load_ohm": "1k",
                "gain_db": 20.0, "gain_tol_db": 2.0, "f_low_max_hz": 1000, "mid_hz": 100e3},
    "guitar-pre": {"topology": "ce", "supply_v": 9.0, "source_ohm": "10k", "load_ohm": "100k",
                   "gain_db": 12.0, "gain_tol_db": 2.0, "f_low_max_hz": 40,
                   "zin_min_ohm": "20k"},
}
COPIES = 10

#: The fifteen-build list: (name, request, copies), every build's copies identical.
STOCK_LIST = (
    ("ce-preamp", {"topology": "ce", "supply_v": 12.0, "gain_db": 20.0, "load_ohm": "10k",
                   "source_ohm": "1k", "f_low_max_hz": 30}, 6),
    ("cb-stage", {"topology": "cb", "supply_v": 12.0, "source_ohm": "50"}, 4),
    ("follower", {"topology": "cc", "supply_v": 12.0}, 5),
)
#: Transistors of each type in the drawer for the list: enough for all fifteen
#: copies on one type (the mixed drawer holds 3–6 a type; transistors are never bought).
STOCK_LIST_TRANSISTORS = 15


def demo_snapshot():
    """The demo drawer, with every transistor quantity doubled.

    The demo drawer holds 40 transistors; fifty copies need fifty, and
    transistors are never bought, so the plan would be infeasible on the
    transistor count alone.  Doubling them keeps the benchmark about choosing
    and buying resistors and capacitors.
    """
    tmp = tempfile.mkdtemp(prefix="drawerfit-bench-")
    store = open_store(str(Path(tmp) / "bench.db"))
    store.import_csv(str(resources.files("drawerfit") / "data" / "demo_stock.csv"))
    snap = store.snapshot()
    store.close()
    return replace(snap, transistors=tuple(replace(t, qty=2 * t.qty) for t in snap.transistors))


def synthetic_items(snap, augmented, per_request: int, seed: int = 1) -> list[PlanItem]:
    """Candidates without the search: per request a base design from stock rows and
    ``per_request`` variations with one to three parts swapped for any stock or
    purchasable value (a stand-in for the search when timing the solver alone)."""
    import random

    from optimiser.design import Design, Piece, RolePick

    rng = random.Random(seed)
    r_roles, c_roles = ("R1", "R2", "RC", "RE", "RE_BYP"), ("C_IN", "C_OUT", "C_BYP")
    items = []
    for name in REQUESTS:
        plenty_r = [r for r in snap.resistors if r.qty >= COPIES]
        plenty_c = [c for c in snap.capacitors if c.qty >= COPIES]
        base = {role: rng.choice(plenty_r) for role in r_roles}
        base.update({role: rng.choice(plenty_c) for role in c_roles})
        t0 = rng.choice([t for t in snap.transistors if t.qty >= COPIES]).label
        designs = []
        for j in range(per_request):
            parts = dict(base)
            for _ in range(rng.randint(1, 3)):
                role = rng.choice(r_roles + c_roles)
                parts[role] = rng.choice(augmented.resistors if role in r_roles
                                         else augmented.capacitors)
            t = t0 if rng.random() < 0.7 else rng.choice(snap.transistors).label
            picks = {role: RolePick(role, x.value, "", (Piece(x.value, 1, x.id, x.location,
                                                              x.kind),))
                     for role, x in parts.items()}
            designs.append(Design("ce", t, picks, {}, True, score=rng.random() + 0.02 * j))
        items.append(PlanItem(name, COPIES, len(items) % 2 == 0, tuple(designs)))
    return items


def lp_relaxation_seconds(items, rows, catalogue) -> float:
    model = build_model(items, rows, catalogue)
    t0 = time.perf_counter()
    model.problem.solve(pulp.PULP_CBC_CMD(msg=False, mip=False))
    return time.perf_counter() - t0


def stock_list(pricing_time: float, search_time: float | None) -> int:
    """The fifteen-build list over the mixed drawer, from stock and with E24 purchases."""
    snap = mixed_drawer()
    snap = replace(snap, transistors=tuple(replace(t, qty=max(t.qty, STOCK_LIST_TRANSISTORS))
                                           for t in snap.transistors))
    rows = len(snap.resistors) + len(snap.capacitors) + len(snap.transistors)
    builds = tuple(BuildSpec(name, parse_request(m), n, True) for name, m, n in STOCK_LIST)
    print(f"mixed drawer: {rows} rows; builds: "
          + ", ".join(f"{n} × {name}" for name, _, n in STOCK_LIST))
    t0 = time.perf_counter()
    search_module.search(replace(builds[0].request, builds=1), snap, top=DEFAULT_CANDIDATES,
                         misses=0)
    base = time.perf_counter() - t0
    print(f"baseline (one search of {builds[0].name} for one copy, top "
          f"{DEFAULT_CANDIDATES}): {base:.2f} s")
    for label, purchase in (("stock only", None), ("E24 purchases", PurchaseOptions(series="E24"))):
        t0 = time.perf_counter()
        plan = make_plan(BuildList(builds, purchase), snap, search_time_s=search_time,
                         pricing_time_s=pricing_time)
        total = time.perf_counter() - t0
        b = plan.bound
        print(f"{label}: {total:.1f} s (× {total / base:.1f} the baseline; searches "
              f"{plan.stats.get('search_seconds', 0.0):.1f} s, pricing and enumeration "
              f"{b.seconds if b else 0.0:.1f} s)")
        if not plan.feasible:
            print("  no plan: " + "; ".join(f"{x.request}: {x.reason}" for x in plan.infeasible))
        else:
            print(f"  cost {plan.cost:.2f}, {len(plan.purchases)} order lines; solver "
                  f"{plan.solver.status}")
        if b is not None:
            def fmt(x):
                return "—" if x is None else f"{x:.6g}"
            print(f"  LP bound {fmt(b.lp)}; plan objective {fmt(b.cost)}; gap {fmt(b.gap)}; "
                  f"optimal: {b.proven_optimal} (closed by {b.closed_by or 'nothing'}); "
                  f"cheapest order: {b.proven_cheapest}; {b.columns_generated} designs "
                  f"priced in, {b.enumerated} enumerated")
            print(f"  {bound_line(b)}")
    return 0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--candidates", type=int, default=DEFAULT_CANDIDATES, help="search top per source")
    ap.add_argument("--time-limit", type=float, default=None)
    ap.add_argument("--search-time", type=float, default=60.0,
                    help="seconds each candidate search may take (0: no limit); a "
                         "stopped search still offers only designs that meet the request")
    ap.add_argument("--synthetic", type=int, default=0, metavar="N",
                    help="skip the search: N synthetic candidates per request (times the "
                         "solver alone; not the benchmark's real figure)")
    ap.add_argument("--cache", metavar="FILE.pickle", default=None,
                    help="keep the candidates here: read them if the file exists, else "
                         "write them after the search (to time the solver again quickly)")
    ap.add_argument("--pricing-time", type=float, default=60.0,
                    help="seconds of column generation after the fixed list (0: none)")
    ap.add_argument("--stock-list", action="store_true",
                    help="plan the fifteen-build list over the mixed drawer instead")
    args = ap.parse_args(argv)
    if args.stock_list:
        return stock_list(args.pricing_time, args.search_time or SEARCH_TIME_LIMIT_S)

    snap = demo_snapshot()
    purchase = PurchaseOptions(series="E24")
    augmented, catalogue = augment(snap, purchase)
    blist = BuildList(tuple(BuildSpec(name, replace(parse_request(m), builds=COPIES), COPIES)
                            for name, m in REQUESTS.items()), purchase)
    print(f"demo drawer (transistor stock doubled): {len(snap.resistors)} resistor rows, {len(snap.capacitors)} capacitor rows, "
          f"{len(snap.transistors)} transistor types; {len(catalogue.items)} purchasable values")

    items = []
    t_search = 0.0
    cache = Path(args.cache) if args.cache else None
    if args.synthetic:
        items = synthetic_items(snap, augmented, args.synthetic)
        print(f"SYNTHETIC candidates ({args.synthetic} per request), no search")
    elif cache is not None and cache.is_file():
        with open(cache, "rb") as f:
            items, t_search = pickle.load(f)
        print(f"candidates read from {cache} (search took {t_search:.1f} s when made)")
    for b in blist.builds if not items else ():
        t0 = time.perf_counter()
        designs, note, st = gather_candidates(b.request, snap, augmented, top=args.candidates,
                                              search_time_s=args.search_time or None,
                                              copies=carried(b.count, b.identical))
        dt = time.perf_counter() - t0
        t_search += dt
        stopped = st.stopped_at_time_limit
        print(f"  {b.name:<11} {len(designs):4d} candidates  ({st.searches} searches, "
              f"{dt:6.1f} s{f', {stopped} stopped at the time limit' if stopped else ''})"
              f"{'  ' + note if note else ''}", flush=True)
        items.append(PlanItem(b.name, b.count, b.identical, tuple(designs), note,
                              strict_tolerance=b.request.wants_yield))
    if cache is not None and not cache.is_file():
        with open(cache, "wb") as f:
            pickle.dump((items, t_search), f)
    n_cand = sum(len(it.candidates) for it in items)
    print(f"candidates: {n_cand} in all; search {t_search:.1f} s")

    rows = stock_rows(augmented, catalogue)
    base = lp_relaxation_seconds(items, rows, catalogue) if all(it.candidates for it in items) \
        else float("nan")
    print(f"baseline (LP relaxation, CBC): {base:.3f} s")
    results = {}
    for solver in ("cbc", "highs"):
        if solver not in available_solvers():
            print(f"{solver}: not installed")
            continue
        plan = plan_builds(items, augmented, catalogue, solver=solver,
                           time_limit=args.time_limit)
        results[solver] = plan
        s = plan.solver
        extra = (f"cost {plan.cost:.2f}, {len(plan.purchases)} order lines, "
                 f"{plan.stats.get('variables', '?')} variables, "
                 f"{plan.stats.get('constraints', '?')} constraints") if plan.feasible else \
            "infeasible: " + "; ".join(f"{x.request}: {x.reason}" for x in plan.infeasible)
        print(f"{s.name:>6}: {s.status:<10} {s.seconds:7.3f} s  "
              f"(× {s.seconds / base:.1f} the LP baseline)  {extra}")
    cbc = results.get("cbc")
    if cbc is not None:
        ok = cbc.solver.status == "Optimal" and cbc.solver.seconds <= 10.0
        print(f"CBC proven optimal within 10 s: {'yes' if ok else 'no'} "
              f"({cbc.solver.status}, {cbc.solver.seconds:.2f} s)")
    if "cbc" in results and "highs" in results and results["cbc"].feasible \
            and results["highs"].feasible:
        print(f"cost CBC {results['cbc'].cost:.2f} vs HiGHS {results['highs'].cost:.2f}")
    if args.pricing_time > 0 and all(it.candidates for it in items):
        t0 = time.perf_counter()
        gen = generate_columns(items, [b.request for b in blist.builds], augmented, catalogue,
                               budget_s=args.pricing_time)
        def solve(its):
            return plan_builds(its, augmented, catalogue, solver="cbc", time_limit=args.time_limit)
        plan = solve(gen.items)
        plan.bound = finish_bound(gen, plan)
        _, plan = close_gap(gen, plan, [b.request for b in blist.builds], augmented, catalogue,
                            solve, budget_s=max(args.pricing_time - gen.bound.seconds, 0.0))
        b = plan.bound
        total = time.perf_counter() - t0

        def fmt(x):
            return "—" if x is None else f"{x:.6f}"

        print(f"column generation: {b.pricing_rounds} rounds, {b.columns_generated} columns "
              f"added, pricing {b.seconds:.1f} s of {b.budget_s:g} s, complete: "
              f"{'yes' if b.pricing_complete else 'no'}; programme {plan.solver.status} "
              f"{plan.solver.seconds:.2f} s; together {total:.1f} s "
              f"(× {total / base:.1f} the LP baseline)")
        print(f"  cost {plan.cost:.2f}; objective {fmt(b.cost)}; LP bound {fmt(b.lp)}; "
              f"gap {fmt(b.gap)}; proven cheapest: {b.proven_cheapest}, optimal: "
              f"{b.proven_optimal} (closed by {b.closed_by or 'nothing'}, {b.enumerated} "
              f"designs enumerated), infeasible: {b.proven_infeasible}")
        for why in b.open:
            print(f"  open: {why}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
