"""Benchmark of the chain search (``python benchmarks/chains.py``).

Prints, for each chain request below, the wall-clock seconds of
:func:`optimiser.search.chains.search_chains` (top 5), the same as a multiple of a
baseline measured in the same run (the engine evaluating 2000 fixed ce stages,
``benchmarks/design.py``), the CPU seconds of the process, how many chains meet,
the best score and what the search covered.  The drawers: the demo drawer (62
resistor, 31 capacitor rows, three transistors) and the invented 57-row mixed drawer
of ``benchmarks/design.py``.  The goal is a proven answer in ≤ 10 s on a
40–60-row drawer.  Each search runs with the command's default time limit, so its
proof step (docs/search.md, "What is proven") has PROOF_TIME_S; printed are the
seconds before the proof (the composition alone), the total, whether rank 1 is proven,
how many ranks are, how far the stage lists were widened and why the proof stopped.
Nothing here asserts.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from importlib import resources
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from design import baseline, mixed_drawer, say  # noqa: E402

import drawerfit.cli  # noqa: F401, E402  (the commands load in their order)
from drawerfit.commands.design import DEFAULT_TIME_LIMIT_S  # noqa: E402
from inventory.store import open_store  # noqa: E402
from optimiser.request import parse_request  # noqa: E402
from optimiser.search.chains import search_chains  # noqa: E402

USER = dict(load_ohm="1k", source_ohm="10k", gain_db=40, f_low_max_hz=20)
#: (label, drawer, request mapping)
REQUESTS = [
    ("ce→cc 40 dB into 1k from 10k, f_low ≤ 20 Hz (the new user's)", "demo",
     {"topology": ["ce", "cc"], **USER}),
    ("the same", "mixed", {"topology": ["ce", "cc"], **USER}),
    ("ce→cc 26 dB into 600 Ω, Zout ≤ 50 Ω, THD ≤ 1 %", "mixed",
     {"topology": ["ce", "cc"], "load_ohm": 600, "source_ohm": 600, "gain_db": 26,
      "zout_max_ohm": 50, "thd_max_pct": 1.0, "f_low_max_hz": 50}),
    ("ce→cc 20 dB, drift ≤ 3 % over 0–70 °C", "mixed",
     {"topology": ["ce", "cc"], "load_ohm": "2k2", "source_ohm": 600, "gain_db": 20,
      "ic_drift_max_pct": 3.0, "temp_c": [0, 70]}),
    ("cb→cc 20 dB from 50 Ω into 1k", "mixed",
     {"topology": ["cb", "cc"], "load_ohm": "1k", "source_ohm": 50, "gain_db": 20,
      "f_low_max_hz": 100}),
    ("cb→cc 20 dB from 50 Ω into 1k", "demo",
     {"topology": ["cb", "cc"], "load_ohm": "1k", "source_ohm": 50, "gain_db": 20,
      "f_low_max_hz": 100}),
]


def demo_drawer():
    with tempfile.TemporaryDirectory() as tmp:
        store = open_store(str(Path(tmp) / "demo.sqlite"))
        with resources.as_file(resources.files("drawerfit") / "data" / "demo_stock.csv") as p:
            store.import_csv(p)
        snap = store.snapshot()
        store.close()
    return snap


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=1, help="runs per request (median)")
    args = ap.parse_args()
    base = baseline()
    say(f"baseline (engine, 2000 ce stages): {base:.2f} s")
    drawers = {"demo": demo_drawer(), "mixed": mixed_drawer()}
    walls, before, proven = [], [], 0
    for label, drawer, mapping in REQUESTS:
        req = parse_request({"supply_v": 12.0, **mapping}, pairs=True)
        times, cpus = [], []
        for _ in range(args.runs):
            c0, t0 = time.process_time(), time.perf_counter()
            res = search_chains(req, drawers[drawer], top=5,
                                time_limit_s=DEFAULT_TIME_LIMIT_S)
            times.append(time.perf_counter() - t0)
            cpus.append(time.process_time() - c0)
        wall = statistics.median(times)
        walls.append(wall)
        s = res.search
        p = s.get("proof", {})
        composed = wall - p.get("seconds", 0.0)
        before.append(composed)
        proven += bool(s.get("proven"))
        best = f"{res.designs[0].score:.3f}" if res.designs else "none meets"
        bound = "none" if p.get("bound") is None else f"{p['bound']:.3f}"
        say(f"{label} [{drawer}]: {wall:.2f} s (× {wall / base:.2f}), CPU {statistics.median(cpus):.2f} s, "
            f"before the proof {composed:.2f} s (× {composed / base:.2f}); "
            f"{len(res.designs)} chains, best {best}; {s.get('first_stages')} first stages × "
            f"{s.get('followers')} followers, {s.get('chains_screened', 0)} screened, "
            f"{s.get('chains_evaluated', 0)} with THD; proven: {'yes' if s.get('proven') else 'no'} "
            f"({s.get('proven_ranks', 0)} ranks; widened to {p.get('widened_to')}, stopped: "
            f"{p.get('stopped')}, bound {bound})")
    say(f"median {statistics.median(walls):.2f} s (before the proof "
        f"{statistics.median(before):.2f} s), worst {max(walls):.2f} s "
        f"({max(before):.2f} s); proven {proven} of {len(REQUESTS)}")


if __name__ == "__main__":
    main()
