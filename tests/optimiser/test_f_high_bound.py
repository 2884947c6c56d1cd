"""B23 of docs/search.md: the ceiling of f_high from C_μ and the collector's
conductance, against the engine's upper band edge on random stages."""

from __future__ import annotations

import math

import numpy as np
import pytest

from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
from optimiser.dc import operating_point
from optimiser.device import device_from_transistor
from optimiser.evaluate import evaluate
from optimiser.f_high_bounds import (
    F_HIGH_MARGIN,
    F_HIGH_VCE_MIN,
    collector_conductance_max,
    f_high_ceiling,
)
from optimiser.request import Request
from optimiser.search import search
from optimiser.search.collector import CollectorLevel
from optimiser.stage import StageBatch

COB = 4e-12


def _stages(topo, rng, n):
    rc = np.exp(rng.uniform(math.log(200.0), math.log(1e5), n))
    if topo == "ce":
        re = rng.uniform(0, 2e3, n) * (rng.random(n) < 0.8)
        return dict(R1=rng.uniform(5e3, 2e5, n), R2=rng.uniform(1e3, 5e4, n), RC=rc,
                    C_IN=1.0, C_OUT=1.0, C_BYP=1.0, RE=re, RE_BYP=rng.uniform(0, 2e3, n))
    return dict(R1=rng.uniform(5e3, 2e5, n), R2=rng.uniform(1e3, 5e4, n), RC=rc, C_IN=1.0,
                C_OUT=1.0, C_B=1.0, RE=rng.uniform(100, 2e4, n))


@pytest.mark.parametrize("topo", ["ce", "cb"])
@pytest.mark.parametrize("rs, rl, vaf, mid, ft", [
    (0.0, None, 100.0, 1e3, 250e6), (600.0, 1e4, 60.0, 1e3, 250e6), (50.0, 1e3, 100.0, 1e4, 100e6),
    (0.0, 1e4, 100.0, 1e5, 1e9), (1e3, None, 80.0, 1e3, 5e6), (0.0, None, 15.0, 1e6, 1e9),
    (100.0, 1e5, None, 1e4, 300e6)])
def test_f_high_ceiling_holds_against_the_engine(topo, rs, rl, vaf, mid, ft):
    # the engine's f_high (its band-edge search on the full small-signal network)
    # never above the ceiling where V_CE ≥ F_HIGH_VCE_MIN; without the margin the
    # largest ratio measured was 0.994 (capacitors 1 F: only the upper edge counts)
    rng = np.random.default_rng(17)
    t = Transistor("GP-N1", 100, 300, ft=ft, cob=COB, vaf=vaf)
    model = device_from_transistor(t)
    req = Request(topology=topo, supply_v=12.0, load_ohm=rl, source_ohm=rs, mid_hz=mid,
                  f_low_max_hz=mid / 10, f_high_min_hz=2 * mid)
    b = StageBatch.from_values(topo, **_stages(topo, rng, 2500))
    ev = evaluate(req, b, t, None, large_signal=False)
    op = operating_point(topo, 12.0, b, model)
    fh = np.asarray(ev.metrics["f_high_hz"], dtype=float)
    gain = 10 ** (np.asarray(ev.metrics["gain_db"], dtype=float) / 20)
    ceiling = f_high_ceiling(gain, collector_conductance_max(b.RC, rl, op.ic, model.vaf),
                             COB, mid)
    claim = np.asarray(ev.valid) & (op.vce >= F_HIGH_VCE_MIN) & np.isfinite(ceiling)
    assert claim.sum() > 300
    # a stage with no edge below 100 GHz would break the ceiling: none may exist
    assert np.all(np.isfinite(fh[claim]))
    ratio = fh[claim] / ceiling[claim]
    assert ratio.max() <= 1.0, ratio.max()
    if rs == 0:     # from an ideal source (no Miller loading) the ceiling is near-tight
        assert ratio.max() * F_HIGH_MARGIN > 0.9


def test_f_high_ceiling_is_monotone_in_the_gain_and_the_conductance():
    # the search takes it at the least gain and the largest conductance of a node:
    # that is a ceiling of every stage below it only if it falls with the gain and
    # grows with the conductance (checked on a grid)
    h = np.geomspace(1.5, 1e3, 200)[:, None]
    g = np.geomspace(1e-6, 1e-1, 200)[None, :]
    f = f_high_ceiling(h, g, COB, 1e4)
    assert np.all(np.diff(f, axis=0) <= 0) and np.all(np.diff(f, axis=1) >= 0)
    assert np.all(np.isinf(f_high_ceiling(np.array([1.0, 1.41]), 1e-3, COB, 1e3)))
    # an Early voltage of 1 V or less bounds no output conductance: no ceiling
    assert np.isinf(f_high_ceiling(10.0, collector_conductance_max(1e3, None, 1e-3, 0.5),
                                   COB, 1e3))
    # a plain collector pole, G/(2π C_μ), where the feed-forward is nothing to the gain
    far = f_high_ceiling(1e6, 1e-3, COB, 1.0) / F_HIGH_MARGIN
    assert far == pytest.approx(1e-3 / (2 * math.pi * COB), rel=1e-5)


@pytest.mark.parametrize("topo, f_high", [("ce", 10e6), ("cb", 90e6)])
def test_a_search_with_f_high_drops_candidates_and_ranks_the_same(monkeypatch, topo, f_high):
    # with f_high_min_hz the ceiling drops collector candidates (the statistics count
    # them); the ranking is the one of the search without it, design for design,
    # and every design returned meets the request when evaluated again
    t = Transistor("GP-N1", 100, 300, qty=4, ft=250e6, cob=COB, vaf=80.0, id=9, location="Q1")
    res = [Resistor(m * 10 ** d, 10, id=i, location=f"R{i}") for i, (d, m) in
           enumerate((d, m) for d in (2, 3, 4, 5) for m in (1.0, 2.2, 4.7))]
    caps = [Capacitor(v, 10, id=100 + i, location=f"C{i}") for i, v in
            enumerate((1e-6, 10e-6, 100e-6))]
    snap = StockSnapshot(tuple(res), tuple(caps), (t,))
    req = Request(topology=topo, supply_v=12.0, load_ohm=1e4, source_ohm=50.0, gain=10.0,
                  gain_tol_db=3.0, mid_hz=1e4, f_high_min_hz=f_high)
    out = search(req, snap, top=5, misses=0)
    assert out.stats["pruned"].get("f_high", 0) > 0
    monkeypatch.setattr(CollectorLevel, "_f_high_on", lambda self: False)
    plain = search(req, snap, top=5, misses=0)
    assert "f_high" not in plain.stats["pruned"]
    assert [(d.values(), round(d.score, 12)) for d in out.designs] == \
        [(d.values(), round(d.score, 12)) for d in plain.designs]
    for d in out.designs:
        ev = evaluate(req, StageBatch.from_values(topo, **d.values()), t, None)
        assert ev.meets[0]
