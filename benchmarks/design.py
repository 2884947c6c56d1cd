"""Benchmark of the stock-constrained search (``python benchmarks/design.py``).

Prints, in one run:

1. the demo drawer with the demo request (target ≤ 1 s);
2. a full E96 1 % drawer (10 Ω–1 MΩ, 481 values) with E6 capacitors
   10 pF–1000 µF, top 10, for each topology, median of ``--runs`` runs
   (target ≤ 3 s per topology);
3. a plain exhaustive enumeration on a 40-value drawer beside the search on the
   same drawer, as a ratio (target ≥ 100×).  The enumeration's time is
   measured on a random sample of its candidates and scaled to all of them
   (it would take hours); the sample size is printed.

Times are wall-clock seconds on this machine and, since timings on a shared
machine are noisy, also multiples of a baseline measured in the same run (the
engine evaluating 2000 fixed ce stages); nothing here asserts.
"""

from __future__ import annotations

import argparse
import signal
import statistics
import sys
import time
from importlib import resources
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor  # noqa: E402
from inventory.values import series_values  # noqa: E402
from optimiser.evaluate import evaluate  # noqa: E402
from optimiser.request import Request, load_request  # noqa: E402
from optimiser.search import FORMS, cap_roles, search  # noqa: E402
from optimiser.stage import StageBatch  # noqa: E402

TRANSISTORS = (
    Transistor("GP-N1", 110, 450, qty=20, ft=250e6, cob=4e-12, vceo=45, ic_max=0.1, pd=0.5,
               vaf=100, id=9001, location="T1"),
    Transistor("GP-N2", 100, 300, qty=20, ft=300e6, cob=3.5e-12, vceo=40, ic_max=0.2, pd=0.6,
               vaf=80, id=9002, location="T2"),
)

REQUESTS = {
    "ce": Request(topology="ce", supply_v=12.0, load_ohm=10e3, source_ohm=600.0, gain=10.0,
                  f_low_max_hz=50.0, f_high_min_hz=100e3, ic_drift_max_pct=10.0,
                  temp_c=(0.0, 50.0)),
    "cb": Request(topology="cb", supply_v=12.0, load_ohm=10e3, source_ohm=50.0, gain=20.0,
                  f_low_max_hz=50.0, f_high_min_hz=100e3, ic_drift_max_pct=10.0,
                  temp_c=(0.0, 50.0)),
    "cc": Request(topology="cc", supply_v=12.0, load_ohm=1e3, source_ohm=10e3, gain=0.8,
                  gain_tol_db=2.0, f_low_max_hz=50.0, f_high_min_hz=100e3,
                  ic_drift_max_pct=10.0, temp_c=(0.0, 50.0)),
}


def e96_drawer() -> StockSnapshot:
    res = [Resistor(float(v), 100, tolerance=0.01, id=i, location=f"R{i}")
           for i, v in enumerate(series_values("E96", 10.0, 1e6))]
    caps = [Capacitor(float(v), 100, id=10_000 + i, location=f"C{i}",
                      dielectric="electrolytic" if v >= 1e-6 else "ceramic")
            for i, v in enumerate(series_values("E6", 10e-12, 1000e-6))]
    return StockSnapshot(tuple(res), tuple(caps), TRANSISTORS)


def small_drawer(n: int = 40) -> StockSnapshot:
    vals = series_values("E24", 100.0, 1e6)
    step = len(vals) / n
    res = [Resistor(float(vals[int(k * step)]), 20, id=k, location=f"R{k}") for k in range(n)]
    caps = [Capacitor(v, 20, id=500 + k, location=f"C{k}",
                      dielectric="electrolytic" if v >= 1e-6 else "ceramic")
            for k, v in enumerate([1e-6, 10e-6, 100e-6])]
    return StockSnapshot(tuple(res), tuple(caps), TRANSISTORS[:1])


def demo(runs: int) -> tuple[float, float, bool]:
    import tempfile

    from inventory.store import open_store

    with tempfile.TemporaryDirectory() as tmp:
        store = open_store(str(Path(tmp) / "demo.sqlite"))
        with resources.as_file(resources.files("drawerfit") / "data" / "demo_stock.csv") as p:
            store.import_csv(p)
        snap = store.snapshot()
        store.close()
    with resources.as_file(resources.files("drawerfit") / "data" / "demo_request.toml") as p:
        req = load_request(p)
    t = time.perf_counter()
    res = search(req, snap, top=5)
    cold = time.perf_counter() - t
    warm = []
    for _ in range(runs):
        t = time.perf_counter()
        search(req, snap, top=5)
        warm.append(time.perf_counter() - t)
    return cold, statistics.median(warm), res.feasible


def baseline() -> float:
    """Seconds for the engine to evaluate 2000 fixed ce stages (DC, corners,
    midband, band edges): the unit the other timings are also printed in, so
    that runs on a busier or slower machine compare."""
    rng = np.random.default_rng(1)
    n = 2000
    b = StageBatch.from_values("ce", R1=rng.uniform(5e3, 2e5, n), R2=rng.uniform(1e3, 5e4, n),
                               RC=rng.uniform(200, 3e4, n), RE=rng.uniform(0, 2e3, n),
                               RE_BYP=rng.uniform(0, 2e3, n), C_IN=1e-6, C_OUT=1e-6,
                               C_BYP=1e-4)
    req = REQUESTS["ce"]
    evaluate(req, b.take(np.arange(100)), TRANSISTORS[0], None)      # warm-up
    times = []
    for _ in range(3):
        t = time.perf_counter()
        evaluate(req, b, TRANSISTORS[0], None)
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def exhaustive_rate(req: Request, snap: StockSnapshot, sample: int) -> tuple[float, int]:
    """Seconds per candidate of plain enumeration, and the number of candidates."""
    rv = sorted({r.value for r in snap.resistors})
    cv = sorted({c.value for c in snap.capacitors})
    total = 0
    per_form = []
    for form in FORMS[req.topology]:
        nr = {"unbypassed": 4, "fully bypassed": 4, "partly bypassed": 5, None: 4}[form]
        nc = len(cap_roles(req.topology, form))
        n = len(rv) ** nr * len(cv) ** nc
        per_form.append((form, nr, nc, n))
        total += n
    rng = np.random.default_rng(0)
    form, nr, nc, _ = per_form[-1]
    roles = {"unbypassed": ("R1", "R2", "RC", "RE"), "fully bypassed": ("R1", "R2", "RC", "RE_BYP"),
             "partly bypassed": ("R1", "R2", "RC", "RE", "RE_BYP"), None: ("R1", "R2", "RC", "RE")}[form]
    vals = {r: rng.choice(rv, sample) for r in roles}
    vals.update({c: rng.choice(cv, sample) for c in cap_roles(req.topology, form)})
    b = StageBatch.from_values(req.topology, **vals)
    t = time.perf_counter()
    evaluate(req, b, snap.transistors[0], None)
    return (time.perf_counter() - t) / sample, total


def say(text: str) -> None:
    """One line of the report on stdout."""
    sys.stdout.write(text + "\n")
    sys.stdout.flush()


class _Stopped(Exception):
    pass


def _alarm(signum, frame):
    raise _Stopped()


signal.signal(signal.SIGALRM, _alarm)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--skip-e96", action="store_true")
    ap.add_argument("--sample", type=int, default=2000)
    ap.add_argument("--topologies", default="ce,cb,cc")
    ap.add_argument("--limit", type=int, default=600, help="seconds before a run is stopped")
    a = ap.parse_args()
    say("drawerfit search benchmark (wall-clock seconds)")
    runs = max(a.runs, 5)
    cold, dt, feasible = demo(runs)        # first: its first run loads the modules
    base = baseline()
    say(f"baseline: the engine on 2000 ce stages (DC, corners, AC, band edges), {base:.2f} s "
        f"(median of 3); figures below also as multiples of it")
    say(f"demo drawer, demo request: median {dt:.2f} s over {runs} runs "
        f"(× {dt / base:.2f} baseline; target ≤ 1 s); first run of the process "
        f"{cold:.2f} s (it loads the numpy/scipy modules); feasible={feasible}")
    if not a.skip_e96:
        snap = e96_drawer()
        say(f"E96 drawer: {len(snap.resistors)} resistor values, {len(snap.capacitors)} "
              f"capacitor values, {len(snap.transistors)} transistor types; top 10")
        for topo in a.topologies.split(","):
            req = REQUESTS[topo]
            times = []
            res = None
            try:
                for _ in range(a.runs):
                    t = time.perf_counter()
                    signal.alarm(a.limit)
                    res = search(req, snap, top=10, misses=0)
                    signal.alarm(0)
                    times.append(time.perf_counter() - t)
            except _Stopped:
                say(f"  {topo}: stopped after {a.limit} s without finishing (target ≤ 3 s)")
                continue
            med = statistics.median(times)
            say(f"  {topo}: median {med:.2f} s over {a.runs} runs (× {med / base:.1f} baseline; "
                f"target ≤ 3 s), {len(res.designs)} designs, "
                f"{res.stats.get('collector_candidates', 0)} stages solved")
    snap = small_drawer(40)
    req = REQUESTS["ce"]
    t = time.perf_counter()
    res = search(req, snap, top=10, misses=0)
    ts = time.perf_counter() - t
    rate, total = exhaustive_rate(req, snap, a.sample)
    te = rate * total
    say(f"40-value drawer, ce request: search {ts:.2f} s; exhaustive enumeration "
          f"{total:.3g} candidates × {rate * 1e6:.0f} µs (measured on {a.sample}) ≈ {te:.3g} s; "
          f"ratio {te / ts:.3g}× (target ≥ 100×)")


if __name__ == "__main__":
    main()
