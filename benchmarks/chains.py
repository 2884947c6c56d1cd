"""Benchmark of the chain search (``python benchmarks/chains.py``).

Prints, for each chain request below, the wall-clock seconds of
:func:`optimiser.search.chains.search_chains` (top 5) without and with its proof step,
each also as a multiple of a
baseline measured in the same run (the engine evaluating 2000 fixed ce stages,
``benchmarks/design.py``), the CPU seconds of the process, how many chains meet,
the best score and what the search covered (capacitor- and direct-coupled chains
and cascodes; ``--coupling`` runs one kind).  The drawers: the demo drawer (62
resistor, 31 capacitor rows, three transistors) and the invented 57-row mixed drawer
of ``benchmarks/design.py``.  The goal is a proven answer in ≤ 10 s on a
40–60-row drawer.  Each search runs with the command's default time limit, so its
proof step (docs/search.md, "What is proven") has PROOF_TIME_S; "without" sets that
budget to 0 for the run (the composition alone).  Also printed: whether rank 1 is
proven, how many ranks are, how far the stage lists were widened, why the proof
stopped and the bound it reached.  Nothing here asserts.
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
from optimiser.search import chains  # noqa: E402
from optimiser.search.chain_exact import PROOF_TIME_S  # noqa: E402

USER = dict(load_ohm="1k", source_ohm="10k", gain_db=40, f_low_max_hz=20)
CASCODE = {"topology": "cascode", "load_ohm": "10k", "source_ohm": 600, "gain_db": 30,
           "f_low_max_hz": 50, "f_high_min_hz": 1e6}
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
    ("ce→cc direct, the new user's", "demo",
     {"topology": ["ce", "cc"], "coupling": "direct", **USER}),
    ("the same", "mixed", {"topology": ["ce", "cc"], "coupling": "direct", **USER}),
    ("ce→cc direct 26 dB into 600 Ω, Zout ≤ 50 Ω, THD ≤ 1 %", "mixed",
     {"topology": ["ce", "cc"], "coupling": "direct", "load_ohm": 600, "source_ohm": 600,
      "gain_db": 26, "zout_max_ohm": 50, "thd_max_pct": 1.0, "f_low_max_hz": 50}),
    ("cascode 30 dB into 10k from 600 Ω, f_low ≤ 50 Hz, f_high ≥ 1 MHz", "demo", CASCODE),
    ("the same", "mixed", CASCODE),
    ("cascode 30 dB, Zout ≤ 50 Ω (nothing meets)", "demo", {**CASCODE, "zout_max_ohm": 50}),
    ("cascode without a gain target", "demo",
     {k: v for k, v in CASCODE.items() if k != "gain_db"}),
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
    ap.add_argument("--coupling", choices=("capacitor", "direct", "cascode"),
                    help="only the requests of this coupling (or the cascodes)")
    ap.add_argument("--proof-s", type=float, default=PROOF_TIME_S,
                    help="the proof's budget in seconds (PROOF_TIME_S by default)")
    args = ap.parse_args()
    base = baseline()
    say(f"baseline (engine, 2000 ce stages): {base:.2f} s")
    drawers = {"demo": demo_drawer(), "mixed": mixed_drawer()}
    walls, befores, proven = [], [], 0
    for label, drawer, mapping in REQUESTS:
        kind = ("cascode" if mapping["topology"] == "cascode"
                else mapping.get("coupling", "capacitor"))
        if args.coupling and kind != args.coupling:
            continue
        req = parse_request({"supply_v": 12.0, **mapping}, pairs=True)
        # before: the same search with no proof budget (PROOF_TIME_S 0 for this run)
        b_wall, b_cpu, _ = timed(req, drawers[drawer], args.runs, proof_s=0.0)
        wall, cpu, res = timed(req, drawers[drawer], args.runs, proof_s=args.proof_s)
        walls.append(wall)
        befores.append(b_wall)
        s = res.search
        p = s.get("proof", {})
        proven += bool(s.get("proven"))
        best = f"{res.designs[0].score:.3f}" if res.designs else "none meets"
        bound = "none" if p.get("bound") is None else f"{p['bound']:.3f}"
        if kind == "cascode":
            what = (f"{s.get('dividers')} divider triples, {s.get('estimated')} estimated, "
                    f"{s.get('candidates')} candidates")
        else:
            what = f"{s.get('first_stages')} first stages × {s.get('followers')} followers"
        say(f"{label} [{drawer}]: without the proof {b_wall:.2f} s (× {b_wall / base:.2f}), "
            f"CPU {b_cpu:.2f} s; with it {wall:.2f} s (× {wall / base:.2f}), CPU {cpu:.2f} s; "
            f"{len(res.designs)} designs, best {best}; {what}, "
            f"{s.get('chains_screened', 0)} screened, "
            f"{s.get('chains_evaluated', 0)} with THD; proven: {'yes' if s.get('proven') else 'no'} "
            f"({s.get('proven_ranks', 0)} ranks; widened to {p.get('widened_to')}, stopped: "
            f"{p.get('stopped')}, bound {bound})")
    say(f"median {statistics.median(walls):.2f} s (without the proof "
        f"{statistics.median(befores):.2f} s), worst {max(walls):.2f} s "
        f"({max(befores):.2f} s); proven {proven} of {len(walls)}")


def timed(req, snap, runs: int, proof_s: float):
    """(median wall s, median CPU s, last result) of ``runs`` searches with the
    command's time limit and a proof budget of ``proof_s``."""
    times, cpus = [], []
    kept = chains.PROOF_TIME_S
    chains.PROOF_TIME_S = proof_s
    try:
        for _ in range(runs):
            c0, t0 = time.process_time(), time.perf_counter()
            res = chains.search_chains(req, snap, top=5, time_limit_s=DEFAULT_TIME_LIMIT_S)
            times.append(time.perf_counter() - t0)
            cpus.append(time.process_time() - c0)
    finally:
        chains.PROOF_TIME_S = kept
    return statistics.median(times), statistics.median(cpus), res


if __name__ == "__main__":
    main()
