"""B23 of docs/search.md: the ceiling of f_high from C_μ and the collector's
conductance, against the engine's upper band edge on random stages."""

from __future__ import annotations

import math
from dataclasses import replace

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
from optimiser.search import confirm, search
from optimiser.search.collector import CollectorLevel
from optimiser.search.confirm import COUPLING_ROLES, f_high_missed
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


# --- the confirmation's screen (A4): the response with the largest coupling capacitors ---
#
# Checked against the engine (optimiser/evaluate.py, its band-edge search on the full
# small-signal network) on random ce and cb stages: every valid design, its coupling
# capacitors 1–300 times smaller than the screen's and its shelf capacitor (C_BYP, C_B)
# the same.  Without the validity rules A4 would be false: a design whose passband is
# not flat can rise above the larger capacitors' response (measured up to 1.17 times,
# 100 Ω source and load); and with a smaller shelf capacitor, which lowers the gain and
# widens the band, a valid design reached 1/0.70 of it — so the screen tries each shelf
# value.

_SCREEN_CASES = [(600.0, 1e4, 60.0, 1e3, 250e6), (50.0, 1e3, 100.0, 1e4, 100e6),
                 (0.0, None, 15.0, 1e5, 1e9), (1e3, 1e5, None, 1e3, 30e6),
                 (10e3, 1e3, 30.0, 1e6, 3e9), (100.0, 100.0, 80.0, 100.0, 5e6)]


def _designs(form, rng, n, mid):
    """Random stages of a form: resistors, the screen's capacitors and a design's
    (its couplings 1–300 times smaller, its shelf capacitor the same)."""
    vals = dict(R1=rng.uniform(5e3, 2e5, n), R2=rng.uniform(1e3, 5e4, n),
                RC=np.exp(rng.uniform(math.log(200.0), math.log(1e5), n)))
    re = np.exp(rng.uniform(math.log(10.0), math.log(3e3), n))
    roles = ["C_IN", "C_OUT"]
    if form == "unbypassed":
        vals["RE"] = re
    elif form == "fully bypassed":
        vals["RE_BYP"] = re
        roles.append("C_BYP")
    elif form == "partly bypassed":
        vals["RE"], vals["RE_BYP"] = re * rng.uniform(0.05, 0.5, n), re
        roles.append("C_BYP")
    else:                                   # cb
        vals["RE"] = 3 * re
        roles.append("C_B")
    screen = {r: 10 ** rng.uniform(-6, -2, n) * 1e3 / mid for r in roles}
    design = {r: screen[r] * 10 ** -rng.uniform(0, 2.5, n) if r in COUPLING_ROLES
              else screen[r] for r in roles}
    return vals, screen, design


@pytest.mark.parametrize("form", ["unbypassed", "fully bypassed", "partly bypassed", "cb"])
@pytest.mark.parametrize("rs, rl, vaf, mid, ft", _SCREEN_CASES)
def test_the_f_high_screen_never_drops_a_valid_design_the_engine_accepts(form, rs, rl, vaf,
                                                                         mid, ft):
    # the designs in 20 groups of neighbouring gain, each group its own request: its
    # gains as the window, its median f_high as f_high_min_hz.  Wherever the engine
    # finds a design valid, in the window and at or above f_high_min_hz, the screen
    # with the larger coupling capacitors lets it through.  Tightness: of the valid
    # designs in the window short of f_high_min_hz, the share the screen drops (printed)
    topo = "cb" if form == "cb" else "ce"
    rng = np.random.default_rng(7 + _SCREEN_CASES.index((rs, rl, vaf, mid, ft)))
    t = Transistor("GP-N1", 100, 300, ft=ft, cob=COB, vaf=vaf)
    vals, screen, design = _designs(form, rng, 3000, mid)
    b_design = StageBatch.from_values(topo, **vals, **design)
    b_screen = StageBatch.from_values(topo, **vals, **screen)
    probe = Request(topology=topo, supply_v=12.0, load_ohm=rl, source_ohm=rs, mid_hz=mid)
    ev = evaluate(probe, b_design, t, None, large_signal=False)
    gain = np.asarray(ev.metrics["gain"], dtype=float)
    fh = np.asarray(ev.metrics["f_high_hz"], dtype=float)
    live = np.flatnonzero(np.asarray(ev.valid) & np.isfinite(fh) & (gain > 2.0))
    if live.size < 100:
        pytest.skip(f"{live.size} valid designs with an upper edge (random capacitors)")
    kept = short = dropped = 0
    for group in np.array_split(live[np.argsort(gain[live])], 20):
        g_lo, g_hi = gain[group].min(), gain[group].max()
        f_min = float(np.median(fh[group]))
        req = Request(topology=topo, supply_v=12.0, load_ohm=rl, source_ohm=rs, mid_hz=mid,
                      gain=math.sqrt(g_lo * g_hi),
                      gain_tol_db=10 * math.log10(g_hi / g_lo) + 1e-9, f_high_min_hz=f_min)
        missed = f_high_missed(req, b_screen.take(group), t)
        meets = fh[group] >= f_min
        assert not missed[meets].any()
        kept += int(meets.sum())
        short += int((~meets).sum())
        dropped += int(missed[~meets].sum())
    print(f"{form}: {kept} meeting f_high_min_hz kept, "  # noqa: T201
          f"{dropped}/{short} short of it dropped")


def test_the_f_high_screen_leaves_what_it_cannot_judge_alone():
    t = Transistor("GP-N1", 100, 300, ft=250e6, cob=COB, vaf=80.0)
    b = StageBatch.from_values("ce", R1=[47e3], R2=[10e3], RC=[4.7e3], RE=[1e3], C_IN=[1e-6],
                               C_OUT=[1e-6])
    wide = Request(topology="ce", supply_v=12.0, gain=10.0, load_ohm=1e4, source_ohm=600.0,
                   f_high_min_hz=1e9)
    # a 1 GHz band from a 250 MHz transistor: dropped
    assert f_high_missed(wide, b, t).all()
    # no gain target (nothing bounds |H(mid)| from below), no f_high target, no ft/cob
    for req in (Request(topology="ce", supply_v=12.0, f_high_min_hz=1e9),
                Request(topology="ce", supply_v=12.0, gain=10.0)):
        assert not f_high_missed(req, b, t).any()
    assert not f_high_missed(wide, b, Transistor("GP-N2", 100, 300)).any()
    # a follower (A4 not tested there): no claim
    cc = StageBatch.from_values("cc", R1=[47e3], R2=[47e3], RE=[1e3], C_IN=[1e-6],
                                C_OUT=[1e-6])
    assert not f_high_missed(replace(wide, topology="cc", gain=0.9), cc, t).any()


def test_a_search_with_the_f_high_screen_ranks_the_same(monkeypatch):
    # the screen drops skeletons before the rounds of capacitor choice (the statistics
    # count them) and the ranking is the one without it, design for design
    t = Transistor("GP-N1", 100, 300, qty=4, ft=250e6, cob=COB, vaf=80.0, id=9, location="Q1")
    res = [Resistor(m * 10 ** d, 10, id=i, location=f"R{i}") for i, (d, m) in
           enumerate((d, m) for d in (1, 2, 3, 4, 5) for m in (1.0, 2.2, 4.7))]
    caps = [Capacitor(v, 10, id=100 + i, location=f"C{i}") for i, v in
            enumerate((10e-9, 1e-6, 10e-6, 100e-6))]
    snap = StockSnapshot(tuple(res), tuple(caps), (t,))
    req = Request(topology="ce", supply_v=12.0, load_ohm=1e4, source_ohm=600.0, gain=10.0,
                  gain_tol_db=1.0, f_high_min_hz=4e6)
    out = search(req, snap, top=5, misses=0)
    assert out.stats["pruned"].get("f_high_largest_caps", 0) > 0
    monkeypatch.setattr(confirm, "_f_high_screen",
                        lambda request, opts, part, croles, allowed, pending, stats: pending)
    plain = search(req, snap, top=5, misses=0)
    assert "f_high_largest_caps" not in plain.stats["pruned"]
    assert [(d.values(), round(d.score, 12)) for d in out.designs] == \
        [(d.values(), round(d.score, 12)) for d in plain.designs]
