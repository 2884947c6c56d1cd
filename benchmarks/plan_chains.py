"""Benchmark: a build list with a chain build, over the demo drawer as it ships.

Plans examples/club-kits/buildlist.toml (4 preamps, 4 buffers: the baseline,
measured in the same run) and examples/club-kits/mixed.toml (the same with two
ce→cc gain-and-buffer boards), each the whole planner: candidate searches
(single-stage and chain), pricing, enumeration, the programme.  Prints each
build's search time, pricing and solver time, the plan's cost, what the bound
proved and over what, and the mixed list's time as a ratio to the baseline.

    python benchmarks/plan_chains.py [--candidates N] [--search-time S] [--pricing-time S]
"""

# ruff: noqa: T201  (a script: it prints its figures)
from __future__ import annotations

import argparse
import sys
import tempfile
import time
from importlib import resources
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))                 # this checkout's packages, not an installed one

from drawerfit.render.plan import bound_line  # noqa: E402
from inventory.store import open_store  # noqa: E402
from optimiser.buildlist import load_buildlist  # noqa: E402
from optimiser.planning import DEFAULT_CANDIDATES, make_plan  # noqa: E402

LISTS = (ROOT / "examples" / "club-kits" / "buildlist.toml",
         ROOT / "examples" / "club-kits" / "mixed.toml")


def demo_snapshot():
    """The demo drawer as it ships."""
    tmp = tempfile.mkdtemp(prefix="drawerfit-bench-")
    store = open_store(str(Path(tmp) / "bench.db"))
    store.import_csv(str(resources.files("drawerfit") / "data" / "demo_stock.csv"))
    snap = store.snapshot()
    store.close()
    return snap


def run(path: Path, snap, args) -> float:
    blist = load_buildlist(path)
    t0 = time.perf_counter()
    plan = make_plan(blist, snap, candidates=args.candidates, search_time_s=args.search_time,
                     pricing_time_s=args.pricing_time)
    total = time.perf_counter() - t0
    print(f"{path.name}: {total:.2f} s in all, feasible {plan.feasible}, cost {plan.cost:.2f}, "
          f"solver {plan.solver.status} in {plan.solver.seconds:.2f} s")
    for s in plan.stats.get("search", []):
        print(f"  {s['request']}: {s['seconds']:.2f} s, {s['searches']} searches, "
              f"{s['candidates']} candidates")
    if plan.bound is not None:
        print(f"  pricing and enumeration {plan.bound.seconds:.2f} s")
        if plan.feasible:
            print("  " + bound_line(plan.bound))
    return total


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--candidates", type=int, default=DEFAULT_CANDIDATES)
    ap.add_argument("--search-time", type=float, default=20.0)
    ap.add_argument("--pricing-time", type=float, default=60.0)
    args = ap.parse_args()
    snap = demo_snapshot()
    base = run(LISTS[0], snap, args)
    mixed = run(LISTS[1], snap, args)
    print(f"mixed / baseline: {mixed / base:.1f}×")


if __name__ == "__main__":
    main()
