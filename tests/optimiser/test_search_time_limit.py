"""The search's time limit: what it returns is valid and it says what is proven."""

from __future__ import annotations

from importlib import resources

import numpy as np
import pytest

from inventory.store import open_store
from optimiser.evaluate import evaluate
from optimiser.request import load_request
from optimiser.search import search
from optimiser.stage import StageBatch


def _demo(tmp_path):
    store = open_store(str(tmp_path / "demo.sqlite"))
    with resources.as_file(resources.files("drawerfit") / "data" / "demo_stock.csv") as p:
        store.import_csv(p)
    with resources.as_file(resources.files("drawerfit") / "data" / "demo_request.toml") as p:
        request = load_request(p)
    return store.snapshot(), request


def _e24_drawer():
    # a full E24 drawer (121 values): about a second to a proven ranking here
    from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
    from inventory.values import series_values

    t = Transistor("GP-N1", 110, 450, qty=20, ft=250e6, cob=4e-12, vceo=45, ic_max=0.1,
                   pd=0.5, vaf=100, id=9001, location="T1")
    res = [Resistor(float(v), 10, id=i, location=f"R{i}")
           for i, v in enumerate(series_values("E24", 10.0, 1e6))]
    caps = [Capacitor(float(v), 10, id=1000 + i, location=f"C{i}",
                      dielectric="electrolytic" if v >= 1e-6 else "ceramic")
            for i, v in enumerate(series_values("E6", 10e-12, 1000e-6))]
    return StockSnapshot(tuple(res), tuple(caps), (t,))


@pytest.mark.parametrize("split", [False, True], ids=["one process", "two processes"])
def test_stopped_search_says_so_and_returns_only_valid_designs(monkeypatch, split):
    import optimiser.search.workers as W
    from optimiser.request import Request

    if split:       # the drawer searched on two processes (optimiser/search/workers.py)
        monkeypatch.setattr(W, "PARALLEL_ABOVE", 20)
        monkeypatch.setenv("DRAWERFIT_WORKERS", "2")
    snap = _e24_drawer()
    request = Request(topology="ce", supply_v=12.0, load_ohm=10e3, source_ohm=600.0, gain=10.0,
                      f_low_max_hz=50.0, f_high_min_hz=100e3, ic_drift_max_pct=10.0,
                      temp_c=(0.0, 50.0))
    # a limit well under what the whole search takes here (measured first, so the
    # test does not depend on the machine's speed)
    import time
    t0 = time.perf_counter()
    full = search(request, snap, top=3, misses=0)
    whole = time.perf_counter() - t0
    assert full.stats["complete"] is True
    res = search(request, snap, top=3, misses=0, time_limit_s=whole / 5)
    st = res.stats
    assert st["complete"] is False
    assert st.get("workers", 1) == (2 if split else 1)
    assert 0 <= st["proven_ranks"] <= len(res.designs)
    js = res.to_json()["search"]
    assert js["complete"] is False and js["proven_ranks"] == st["proven_ranks"]
    # a proven rank scores no more than anything left unexamined
    for d in res.designs[:st["proven_ranks"]]:
        assert d.score <= st["open_bound"]
    # every design returned meets the request when the engine re-evaluates it
    t = {x.label: x for x in snap.transistors}
    for d in res.designs:
        b = StageBatch.from_values(d.topology, **{r: np.array([v]) for r, v in d.values().items()})
        ev = evaluate(request, b, t[d.transistor])
        assert bool(ev.meets[0]), ev.violations(0)


def test_search_without_limit_is_complete(tmp_path):
    snap, request = _demo(tmp_path)
    from dataclasses import replace
    # a cc request on the demo drawer finishes quickly; its ranking is proven
    req = replace(request, topology="cc", gain=None, f_high_min_hz=None, load_ohm=2200.0,
                  source_ohm=10e3, ic_drift_max_pct=None)
    res = search(req, snap, top=2, misses=0, time_limit_s=None)
    assert res.stats["complete"] is True
    assert res.stats["proven_ranks"] == len(res.designs)
