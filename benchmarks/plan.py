"""Benchmark: five requests × ten copies over the demo drawer, purchases from E24.

Prints the candidate count, the time the search took to offer them, and the
solver time of the planning programme with CBC (target: ≤ 10 s on a 2-core
machine) and with HiGHS when highspy is installed.  As a baseline measured in
the same run, the LP relaxation of the same programme (CBC, integrality
dropped) is solved too; the MIP times are printed as ratios to it.

    python benchmarks/plan.py [--candidates N] [--time-limit S]
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

from inventory.store import open_store
from optimiser.buildlist import BuildList, BuildSpec
from optimiser.plan import (
    PlanItem,
    available_solvers,
    build_model,
    gather_candidates,
    plan_builds,
    stock_rows,
)
from optimiser.purchase import PurchaseOptions, augment
from optimiser.request import parse_request

#: Five invented requests a small club might build ten of each.
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


def demo_snapshot():
    tmp = tempfile.mkdtemp(prefix="drawerfit-bench-")
    store = open_store(str(Path(tmp) / "bench.db"))
    store.import_csv(str(resources.files("drawerfit") / "data" / "demo_stock.csv"))
    return store.snapshot()


def lp_relaxation_seconds(items, rows, catalogue) -> float:
    model = build_model(items, rows, catalogue)
    t0 = time.perf_counter()
    model.problem.solve(pulp.PULP_CBC_CMD(msg=False, mip=False))
    return time.perf_counter() - t0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--candidates", type=int, default=30, help="search top per source")
    ap.add_argument("--time-limit", type=float, default=None)
    ap.add_argument("--cache", metavar="FILE.pickle", default=None,
                    help="keep the candidates here: read them if the file exists, else "
                         "write them after the search (to time the solver again quickly)")
    args = ap.parse_args(argv)

    snap = demo_snapshot()
    purchase = PurchaseOptions(series="E24")
    augmented, catalogue = augment(snap, purchase)
    blist = BuildList(tuple(BuildSpec(name, replace(parse_request(m), builds=COPIES), COPIES)
                            for name, m in REQUESTS.items()), purchase)
    print(f"drawer: {len(snap.resistors)} resistor rows, {len(snap.capacitors)} capacitor rows, "
          f"{len(snap.transistors)} transistor types; {len(catalogue.items)} purchasable values")

    items = []
    t_search = 0.0
    cache = Path(args.cache) if args.cache else None
    if cache is not None and cache.is_file():
        with open(cache, "rb") as f:
            items, t_search = pickle.load(f)
        print(f"candidates read from {cache} (search took {t_search:.1f} s when made)")
    for b in blist.builds if not items else ():
        t0 = time.perf_counter()
        designs, note, st = gather_candidates(b.request, snap, augmented, top=args.candidates)
        dt = time.perf_counter() - t0
        t_search += dt
        print(f"  {b.name:<11} {len(designs):4d} candidates  ({st['searches']} searches, "
              f"{dt:6.1f} s){'  ' + note if note else ''}", flush=True)
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
        print(f"target: CBC optimal within 10 s: {'met' if ok else 'NOT met'} "
              f"({cbc.solver.status}, {cbc.solver.seconds:.2f} s)")
    if "cbc" in results and "highs" in results and results["cbc"].feasible \
            and results["highs"].feasible:
        print(f"cost CBC {results['cbc'].cost:.2f} vs HiGHS {results['highs'].cost:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
