"""Benchmark of the stock-constrained search (``python benchmarks/design.py``).

Prints, in one run:

1. the demo drawer with the demo request (target ≤ 1 s);
2. a full E96 1 % drawer (10 Ω–1 MΩ, 481 values) with E6 capacitors
   10 pF–1000 µF, top 10, for each topology, median of ``--runs`` runs
   (target ≤ 3 s per topology);
3. a plain exhaustive enumeration on a 40-value drawer beside the search on the
   same drawer, as a ratio (target ≥ 100×).  The enumeration's time is
   measured on a random sample of its candidates and scaled to all of them
   (it would take hours); the sample size is printed;
4. with ``--families`` (or ``--quick``, six of them, about a minute),
   the request families below, each request searched once to a proven answer as
   ``drawerfit design`` asks it (top 10, the nearest misses computed when nothing
   meets the request), per family and overall the median and the worst time
   (goal: every request ≤ 3 s, median ≤ 0.5 s on 2 cores).

The families (:data:`FAMILIES`), on an invented 54-row mixed drawer
(:func:`mixed_drawer`: E12 and E24 resistors with gaps, ceramics and electrolytics
with gaps, three transistor types), the same drawer with its capacitors stopping
at 1 µF (:func:`mixed_drawer` with ``cap_max``) and the E96 drawer of 2.:

* minimal — only ``topology`` and ``supply_v``;
* typical — a gain into a load with f_low ≤ 30–50 Hz;
* tight f_low — f_low ≤ 1–3 Hz;
* infeasible f_low — an f_low the capacitors in stock cannot reach;
* infeasible gain — a gain no stage of the drawer gives within its tolerance;
* high gain — 40–50 dB;
* tight drift — bias drift ≤ 0.5–2 % over 0–70 °C;
* THD — ``thd_max_pct`` set;
* followers — common collector with and without a gain target;
* cb from 50 Ω — common base driven from a 50 Ω source;
* chains — two transistors on the E96 drawer: capacitor-coupled ce→cc and cb→cc,
  direct-coupled ce→cc and the cascode (:func:`optimiser.search.chains.search_chains`,
  top 10; proven when its ``search.complete`` is, the chains' proof step within the
  time limit's PROOF_TIME_S).

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
from optimiser.request import Request, load_request, parse_request  # noqa: E402
from optimiser.search import FORMS, cap_roles, search  # noqa: E402
from optimiser.search.chains import search_chains  # noqa: E402
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


#: Transistor types of the mixed drawer (invented labels and figures).
MIXED_TRANSISTORS = (
    Transistor("DF-N10", 100, 300, qty=6, ft=250e6, cob=4e-12, vceo=40, ic_max=0.1, pd=0.5,
               vaf=80, id=9101, location="T1"),
    Transistor("DF-N20", 200, 450, qty=3, ft=150e6, cob=6e-12, vceo=30, ic_max=0.1, pd=0.4,
               vaf=50, id=9102, location="T2"),
    Transistor("DF-N30", 50, 150, qty=4, ft=100e6, cob=10e-12, vceo=60, ic_max=0.5, pd=0.8,
               vaf=120, id=9103, location="T3"),
)


def mixed_drawer(cap_max: float | None = None, seed: int = 7) -> StockSnapshot:
    """An invented drawer of 44 resistor rows (E12 100 Ω–820 kΩ with gaps, some E24
    values, 0.125–0.5 W, 1–25 pieces), 10 capacitor rows (ceramics 100 pF–100 nF,
    electrolytics 1–470 µF, with gaps) and three transistor types: 57 rows.
    ``cap_max`` drops the capacitors above it."""
    rng = np.random.default_rng(seed)
    e12 = series_values("E12", 100.0, 820e3)
    gaps = {1.5e3, 2.7e3, 5.6e3, 12e3, 39e3, 180e3, 270e3, 560e3, 680e3}
    vals = [v for v in e12 if round(v, 6) not in gaps]
    vals = sorted(vals + [2.0e3, 5.1e3, 7.5e3, 20e3, 51e3])          # some E24 values
    res = [Resistor(float(v), int(rng.integers(1, 26)), power_w=float(rng.choice([0.125, 0.25, 0.5])),
                    id=200 + k, location=f"A{k}") for k, v in enumerate(vals)]
    cvals = [(100e-12, "ceramic", 50), (1e-9, "ceramic", 50), (10e-9, "ceramic", 50),
             (100e-9, "ceramic", 50), (1e-6, "electrolytic", 50), (4.7e-6, "electrolytic", 35),
             (22e-6, "electrolytic", 25), (47e-6, "electrolytic", 16),
             (100e-6, "electrolytic", 25), (470e-6, "electrolytic", 16)]
    caps = [Capacitor(v, int(rng.integers(2, 15)), voltage_v=float(volt), dielectric=d,
                      id=300 + k, location=f"B{k}")
            for k, (v, d, volt) in enumerate(cvals) if cap_max is None or v <= cap_max * 1.001]
    return StockSnapshot(tuple(res), tuple(caps), MIXED_TRANSISTORS)


def _req(topo, **kw) -> Request:
    """The request as a user's file gives it: read by parse_request, so the documented
    defaults (a THD ceiling, a least I_C, a ce gain target) apply as they would."""
    mapping = {"topology": list(topo) if isinstance(topo, tuple) else topo,
               "supply_v": kw.pop("supply_v", 12.0)}
    mapping.update({k: list(v) if isinstance(v, tuple) else v
                    for k, v in kw.items() if v is not None})
    return parse_request(mapping, file="benchmark family", pairs=_two(topo))


def _two(topo) -> bool:
    """A two-transistor request: a chain (two stage kinds) or the cascode."""
    return isinstance(topo, tuple | list) or topo == "cascode"


_TYP = dict(load_ohm=10e3, source_ohm=600.0)
_T070 = dict(temp_c=(0.0, 70.0))
#: family -> [(label, drawer, request)]; drawer "mixed", "mixed<=1u" or "e96".
FAMILIES: dict[str, list[tuple[str, str, Request]]] = {
    "minimal": [
        ("ce", "mixed", _req("ce")), ("cb", "mixed", _req("cb")),
        ("cc", "mixed", _req("cc")), ("ce 9 V", "mixed", _req("ce", supply_v=9.0)),
        ("ce", "e96", _req("ce")),
    ],
    "typical": [
        ("ce 20 dB 30 Hz", "mixed", _req("ce", gain=10.0, f_low_max_hz=30.0, **_TYP)),
        ("ce 26 dB 50 Hz 5 k", "mixed", _req("ce", gain=20.0, f_low_max_hz=50.0,
                                             load_ohm=5e3, source_ohm=1e3)),
        ("cb 20 dB 50 Hz", "mixed", _req("cb", gain=10.0, f_low_max_hz=50.0, load_ohm=10e3,
                                         source_ohm=50.0)),
        ("cc 0.8 30 Hz", "mixed", _req("cc", gain=0.8, gain_tol_db=2.0, f_low_max_hz=30.0,
                                       load_ohm=1e3, source_ohm=10e3)),
        ("ce 20 dB 30 Hz", "e96", _req("ce", gain=10.0, f_low_max_hz=30.0, **_TYP)),
    ],
    "tight f_low": [
        ("ce 20 dB 1 Hz", "mixed", _req("ce", gain=10.0, f_low_max_hz=1.0, **_TYP)),
        ("ce 20 dB 2 Hz", "mixed", _req("ce", gain=10.0, f_low_max_hz=2.0, **_TYP)),
        ("cb 20 dB 3 Hz", "mixed", _req("cb", gain=10.0, f_low_max_hz=3.0, load_ohm=10e3,
                                        source_ohm=50.0)),
        ("cc 1 Hz", "mixed", _req("cc", f_low_max_hz=1.0, load_ohm=1e3, source_ohm=600.0)),
        ("ce 20 dB 2 Hz", "e96", _req("ce", gain=10.0, f_low_max_hz=2.0, **_TYP)),
        ("cb 1 Hz from 50 Ω", "mixed<=1u", _req("cb", f_low_max_hz=1.0, load_ohm=1e3,
                                                source_ohm=50.0)),
    ],
    "infeasible f_low": [
        ("ce 20 dB 2 Hz from 50 Ω", "mixed<=1u", _req("ce", gain=10.0, f_low_max_hz=2.0,
                                                      load_ohm=10e3, source_ohm=50.0)),
        ("ce 2 Hz from 50 Ω", "mixed<=1u", _req("ce", f_low_max_hz=2.0, load_ohm=1e3,
                                                source_ohm=50.0)),
        ("cb 0.01 Hz from 50 Ω", "mixed<=1u", _req("cb", f_low_max_hz=0.01, load_ohm=1e3,
                                                   source_ohm=50.0)),
        ("cc 1 Hz into 100 Ω", "mixed<=1u", _req("cc", f_low_max_hz=1.0, load_ohm=100.0,
                                                 source_ohm=50.0)),
        ("ce 20 dB 0.05 Hz", "mixed", _req("ce", gain=10.0, f_low_max_hz=0.05, load_ohm=1e3,
                                           source_ohm=50.0)),
    ],
    "infeasible gain": [
        ("cc 0.999 ±0.01 dB", "mixed", _req("cc", gain=0.999, gain_tol_db=0.01,
                                            load_ohm=100.0, source_ohm=10e3)),
        ("ce 45 dB into 1 k at 5 V", "mixed", _req("ce", supply_v=5.0, gain=178.0,
                                                   gain_tol_db=0.5, load_ohm=1e3,
                                                   source_ohm=600.0)),
        ("cb 40 dB into 1 k", "mixed", _req("cb", gain=100.0, gain_tol_db=0.5, load_ohm=1e3,
                                            source_ohm=5.0)),
        ("cc 0.999 ±0.01 dB", "e96", _req("cc", gain=0.999, gain_tol_db=0.01,
                                          load_ohm=100.0, source_ohm=10e3)),
    ],
    "high gain": [
        ("ce 40 dB", "mixed", _req("ce", gain=100.0, **_TYP)),
        ("ce 44 dB", "mixed", _req("ce", gain=158.0, **_TYP)),
        ("ce 48 dB 24 V", "mixed", _req("ce", supply_v=24.0, gain=251.0, **_TYP)),
        ("ce 44 dB", "e96", _req("ce", gain=158.0, **_TYP)),
    ],
    "tight drift": [
        ("ce 20 dB drift 1 %", "mixed", _req("ce", gain=10.0, ic_drift_max_pct=1.0,
                                             **_TYP, **_T070)),
        ("cb drift 2 %", "mixed", _req("cb", gain=10.0, ic_drift_max_pct=2.0, load_ohm=10e3,
                                       source_ohm=50.0, **_T070)),
        ("cc drift 0.5 %", "mixed", _req("cc", ic_drift_max_pct=0.5, load_ohm=1e3,
                                         source_ohm=600.0, **_T070)),
        ("ce 20 dB drift 1 %", "e96", _req("ce", gain=10.0, ic_drift_max_pct=1.0,
                                           **_TYP, **_T070)),
    ],
    "THD": [
        ("ce 20 dB THD 1 % at 50 mV", "mixed", _req("ce", gain=10.0, thd_max_pct=1.0,
                                                    input_vpk=0.05, **_TYP)),
        ("ce 26 dB THD 0.5 %", "mixed", _req("ce", gain=20.0, thd_max_pct=0.5, **_TYP)),
        ("cb 20 dB THD 1 %", "mixed", _req("cb", gain=10.0, thd_max_pct=1.0, load_ohm=10e3,
                                           source_ohm=50.0)),
        ("ce 20 dB THD 1 % at 50 mV", "e96", _req("ce", gain=10.0, thd_max_pct=1.0,
                                                  input_vpk=0.05, **_TYP)),
    ],
    "followers": [
        ("cc 0.9 from 10 k", "mixed", _req("cc", gain=0.9, load_ohm=1e3, source_ohm=10e3)),
        ("cc no gain into 100 Ω", "mixed", _req("cc", load_ohm=100.0, source_ohm=600.0)),
        ("cc 0.8 f_low 20 Hz", "mixed", _req("cc", gain=0.8, gain_tol_db=2.0, f_low_max_hz=20.0,
                                             load_ohm=1e3, source_ohm=10e3)),
        ("cc 0.9 from 10 k", "e96", _req("cc", gain=0.9, load_ohm=1e3, source_ohm=10e3)),
    ],
    "cb from 50 Ω": [
        ("cb 20 dB", "mixed", _req("cb", gain=10.0, load_ohm=10e3, source_ohm=50.0)),
        ("cb 32 dB", "mixed", _req("cb", gain=40.0, load_ohm=10e3, source_ohm=50.0)),
        ("cb no gain", "mixed", _req("cb", load_ohm=10e3, source_ohm=50.0)),
        ("cb 26 dB", "e96", _req("cb", gain=20.0, load_ohm=10e3, source_ohm=50.0)),
    ],
    # two transistors (docs/search.md, "Chains"), searched by search_chains with the
    # proof step its time limit allows; "proven" is its search.complete
    "chains": [
        ("ce→cc 40 dB 1 k from 10 k 20 Hz", "e96",
         _req(("ce", "cc"), gain_db=40.0, load_ohm=1e3, source_ohm=10e3, f_low_max_hz=20.0)),
        ("cb→cc 20 dB 1 k from 50 Ω", "e96",
         _req(("cb", "cc"), gain_db=20.0, load_ohm=1e3, source_ohm=50.0, f_low_max_hz=100.0)),
        ("ce→cc direct 40 dB 1 k from 10 k", "e96",
         _req(("ce", "cc"), coupling="direct", gain_db=40.0, load_ohm=1e3, source_ohm=10e3,
              f_low_max_hz=20.0)),
        ("cascode 30 dB 10 k 1 MHz", "e96",
         _req("cascode", gain_db=30.0, load_ohm=10e3, source_ohm=600.0, f_low_max_hz=50.0,
              f_high_min_hz=1e6)),
    ],
}

#: ``--quick``: six requests of five families on the mixed drawers (about a minute on
#: a quiet machine; the infeasible one spends most of it on its nearest misses).
QUICK = (("minimal", 2), ("typical", 0), ("tight f_low", 0), ("tight f_low", 3),
         ("infeasible f_low", 0), ("followers", 0))


def _drawer(name: str) -> StockSnapshot:
    if name == "e96":
        return e96_drawer()
    if name == "mixed<=1u":
        return mixed_drawer(cap_max=1e-6)
    return mixed_drawer()


def _cpu() -> float:
    """CPU seconds of this process and its finished children (the search's second
    process): on a loaded machine a steadier figure than the wall clock."""
    import resource

    a = resource.getrusage(resource.RUSAGE_SELF)
    b = resource.getrusage(resource.RUSAGE_CHILDREN)
    return a.ru_utime + a.ru_stime + b.ru_utime + b.ru_stime


def families(base: float, limit: float, quick: bool, only: str | None = None) -> None:
    """Each request of :data:`FAMILIES` once (as ``drawerfit design`` asks it), the
    time to a proven answer (nearest misses included when nothing meets it)."""
    picks = [(f, FAMILIES[f][i]) for f, i in QUICK] if quick else \
        [(f, item) for f, items in FAMILIES.items() for item in items]
    if only:
        picks = [(f, it) for f, it in picks if only in f]
    drawers: dict[str, StockSnapshot] = {}
    per: dict[str, list[float]] = {}
    unproven = []
    say(f"request families ({len(picks)} requests; time to a proven answer, nearest "
        f"misses included; stopped at {limit:g} s)")
    for fam, (label, dname, req) in picks:
        snap = drawers.get(dname) or drawers.setdefault(dname, _drawer(dname))
        cpu0 = _cpu()
        t = time.perf_counter()
        if _two(req.topology):
            res = search_chains(req, snap, top=10, time_limit_s=limit)
        else:
            res = search(req, snap, top=10, time_limit_s=limit)
        dt = time.perf_counter() - t
        cpu = _cpu() - cpu0
        per.setdefault(fam, []).append(dt)
        if _two(req.topology):
            done, feasible = bool(res.search.get("complete")), bool(res.designs)
            tail = _chain_tail(res.search)
        else:
            done, feasible = bool(res.stats.get("complete", True)), res.feasible
            pr = res.stats["pruned"]
            tail = f"f_low prunes {sum(v for k, v in pr.items() if k.startswith('f_low'))}"
        if not done:
            unproven.append(f"{fam}: {label} ({dname})")
        say(f"  {fam:17s} {label:28s} {dname:9s} {dt:7.2f} s  × {dt / base:6.2f}  "
            f"CPU {cpu:6.2f} s  {'feasible' if feasible else 'none meets it'}"
            f"{'' if done else '  NOT PROVEN (time limit)'}  {tail}")
    allt = [x for v in per.values() for x in v]
    say("per family: median / worst, seconds and × baseline")
    for fam, ts in per.items():
        med, worst = statistics.median(ts), max(ts)
        say(f"  {fam:17s} n={len(ts):2d}  median {med:6.2f} s (× {med / base:5.2f})  "
            f"worst {worst:6.2f} s (× {worst / base:5.2f})")
    med, worst = statistics.median(allt), max(allt)
    say(f"  {'all':17s} n={len(allt):2d}  median {med:6.2f} s (× {med / base:5.2f})  "
        f"worst {worst:6.2f} s (× {worst / base:5.2f}); over 3 s: "
        f"{sum(x > 3.0 for x in allt)}; goal: every request ≤ 3 s, median ≤ 0.5 s")
    if unproven:
        say("  not proven within the limit: " + "; ".join(unproven))


def _chain_tail(srch: dict) -> str:
    """What a chain search proved: its proven ranks, and the proof's widening, stop and
    bound (capacitor-coupled chains; the direct and cascode searches have none)."""
    p = srch.get("proof") or {}
    if not p:
        return f"proven ranks {srch.get('proven_ranks', 0)}"
    b = "none" if p.get("bound") is None else f"{p['bound']:.3f}"
    return (f"proven ranks {srch.get('proven_ranks', 0)}; widened to {p.get('widened_to')}, "
            f"stopped: {p.get('stopped')}, bound {b}")


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
    ap.add_argument("--families", action="store_true",
                    help="also the request families (about 40 requests)")
    ap.add_argument("--quick", action="store_true",
                    help="only a subset of the families (about a minute), nothing else")
    ap.add_argument("--only-family", default=None, help="families whose name holds this")
    ap.add_argument("--family-limit", type=float, default=120.0,
                    help="seconds before a family request is stopped (as design --time-limit)")
    a = ap.parse_args()
    say("drawerfit search benchmark (wall-clock seconds)")
    if a.quick or a.only_family:
        base = baseline()
        say(f"baseline: the engine on 2000 ce stages, {base:.2f} s (median of 3)")
        families(base, a.family_limit, a.quick, a.only_family)
        return
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
    if a.families:
        families(base, a.family_limit, False)


if __name__ == "__main__":
    main()
