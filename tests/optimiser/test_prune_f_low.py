"""The f_low floors of optimiser/f_low_bounds.py: against scipy's analog response of a
first-order high-pass (the lemma's section) and against the engine's f_low on random
stages (never above it)."""

import math
import zlib

import numpy as np
import pytest
from scipy import signal

from inventory.parts import Transistor
from optimiser import stages
from optimiser.ac import EDGE_DB
from optimiser.device import thermal_voltage
from optimiser.evaluate import evaluate
from optimiser.f_low_bounds import (
    BYPASS_SHELF_MARGIN,
    CB_EMITTER_MARGIN,
    cb_emitter_impedance_max,
    edge_floor_hz,
    f_low_floor,
    largest_capacitance,
    loop_resistance_needed,
)
from optimiser.request import Request
from optimiser.stage import StageBatch

T = Transistor("GP-N1", 100, 300, ft=250e6, cob=4e-12, vaf=60.0)


def _section_edge(r, c, mid):
    """Where the first-order high-pass R–C (scipy.signal.freqs, analog) is EDGE_DB
    below its value at mid: bisection on a log grid of the exact response."""
    b, a = [r * c, 0.0], [r * c, 1.0]
    _, hm = signal.freqs(b, a, worN=[2 * math.pi * mid])
    lo, hi = math.log(1e-6), math.log(mid)
    for _ in range(200):
        x = 0.5 * (lo + hi)
        _, h = signal.freqs(b, a, worN=[2 * math.pi * math.exp(x)])
        if abs(h[0]) < abs(hm[0]) * 10 ** (-EDGE_DB / 20):
            lo = x
        else:
            hi = x
    return math.exp(lo)


@pytest.mark.parametrize("r, c, mid", [(1e4, 1e-6, 1e3), (600.0, 10e-6, 1e3),
                                       (1e5, 100e-9, 1e5), (2e3, 1e-6, 200.0)])
def test_floor_is_the_section_edge_without_slack(r, c, mid):
    # with no slack (K = 1) the floor is exactly the edge of the section (scipy's
    # analog frequency response of b = [RC, 0], a = [RC, 1])
    got = float(edge_floor_hz(c, r, mid, slack_db=0.0))
    want = _section_edge(r, c, mid)
    assert got == pytest.approx(want, rel=1e-9)
    # a flat band that may rise 1 dB lowers the floor, never raises it
    assert float(edge_floor_hz(c, r, mid)) < got


def test_needed_resistance_inverts_the_floor():
    rng = np.random.default_rng(1)
    for _ in range(200):
        c = 10 ** rng.uniform(-8, -3)
        mid = 10 ** rng.uniform(2, 6)
        f = 10 ** rng.uniform(-2, math.log10(mid) - 0.5)
        r = loop_resistance_needed(f, c, mid)
        assert float(edge_floor_hz(c, r, mid)) == pytest.approx(f, rel=1e-9)
        assert float(edge_floor_hz(c, r * 0.99, mid)) > f       # less R: a higher floor
        assert float(edge_floor_hz(c, r * 1.01, mid)) < f
    # nothing is excluded where the target lies at or above the floor's ceiling
    assert loop_resistance_needed(900.0, 1e-6, 1e3) == 0.0
    # below the engine's first grid point (1 mHz) nothing is claimed
    assert float(edge_floor_hz(1e-12, 1e15, 1e3)) == 0.0


def test_largest_capacitance_counts_only_values_with_pieces():
    assert largest_capacitance([1e-7, 1e-5, 1e-6], [True, False, True]) == 1e-6
    assert largest_capacitance([]) == 0.0


def _load(rc, rl):
    return rc if rl is None else rc * rl / (rc + rl)


@pytest.mark.parametrize("rl", [1e3, 1e4, None])
def test_cb_emitter_impedance_bound_against_the_engine(rl, capsys):
    # |Z_in| of common-base stages (every capacitor 1 F) never above RE‖Z_e,max
    rng = np.random.default_rng(zlib.crc32(repr(("cb", rl)).encode()))
    b = _stages("cb", rng, 3000)
    b = StageBatch.from_values("cb", R1=b.R1, R2=b.R2, RC=b.RC, RE=b.RE, C_IN=1.0, C_OUT=1.0,
                               C_B=1.0)
    req = Request(topology="cb", supply_v=12.0, load_ohm=rl, source_ohm=50.0)
    ev = evaluate(req, b, T, None, band_edges=False, large_signal=False, corner_gain=False)
    ok = np.asarray(ev.valid, dtype=bool)
    ic = np.asarray(ev.metrics["ic_a"], dtype=float)
    ze = cb_emitter_impedance_max(ic, ic, _load(b.RC, rl), T.vaf, thermal_voltage(25.0))
    bound = b.RE * ze / (b.RE + ze)
    ratio = np.asarray(ev.metrics["zin_ohm"], dtype=float)[ok] / bound[ok]
    assert ok.sum() > 500
    assert ratio.max() <= 1.0, ratio.max()
    with capsys.disabled():
        print(f"\n  cb Z_in / bound R_L={rl}: median {np.median(ratio):.4f}, "  # noqa: T201 (tightness, reported)
              f"max {ratio.max():.4f} (margin {CB_EMITTER_MARGIN})")


def _stages(topo, rng, n):
    c = lambda: 10 ** rng.uniform(-7, -3, n)   # noqa: E731 (100 nF .. 1 mF)
    if topo == "ce":
        re = rng.uniform(0, 2e3, n) * (rng.random(n) < 0.7)
        byp = rng.uniform(0, 2e3, n) * (rng.random(n) < 0.7)
        vals = dict(R1=10 ** rng.uniform(3.5, 6, n), R2=10 ** rng.uniform(3, 5.5, n),
                    RC=10 ** rng.uniform(2.3, 4.7, n), RE=re, RE_BYP=byp,
                    C_BYP=np.where(byp > 0, c(), 0.0), C_IN=c(), C_OUT=c())
    elif topo == "cb":
        vals = dict(R1=10 ** rng.uniform(3.5, 6, n), R2=10 ** rng.uniform(3, 5.5, n),
                    RC=10 ** rng.uniform(2.3, 4.7, n), RE=10 ** rng.uniform(2, 4.5, n),
                    C_B=c(), C_IN=c(), C_OUT=c())
    else:
        vals = dict(R1=10 ** rng.uniform(3.5, 6, n), R2=10 ** rng.uniform(3, 5.5, n),
                    RC=rng.uniform(0, 3e3, n) * (rng.random(n) < 0.3),
                    RE=10 ** rng.uniform(2, 4.5, n), C_IN=c(), C_OUT=c())
    return StageBatch.from_values(topo, **vals)


@pytest.mark.parametrize("topo", ["ce", "cb", "cc"])
@pytest.mark.parametrize("rs, rl, mid", [(50.0, 1e4, 1e3), (600.0, 2e3, 1e3),
                                         (10e3, None, 1e3), (600.0, 1e4, 1e5)])
def test_floor_never_above_the_engine(topo, rs, rl, mid, capsys):
    # the claim "over this node, f_low >= floor" against the engine's nodal f_low on
    # random valid stages; the tightness (floor / f_low, median) is printed
    rng = np.random.default_rng(zlib.crc32(repr((topo, rs, rl, mid)).encode()))
    b = _stages(topo, rng, 1500)
    req = Request(topology=topo, supply_v=12.0, load_ohm=rl, source_ohm=rs, mid_hz=mid)
    ev = evaluate(req, b, T, None, band_edges=True, large_signal=False, corner_gain=False)
    f_low = np.asarray(ev.metrics["f_low_hz"], dtype=float)
    rth = b.R1 * b.R2 / (b.R1 + b.R2)
    mod = stages.module(topo)
    floor = f_low_floor(mod.INPUT, mod.OUTPUT, b.C_IN, b.C_OUT, mid, rs, rl, rth, b.RC,
                        b.RE + b.RE_BYP)
    if topo == "cb":
        # the common-base input: R_S + RE‖Z_e,max at the stage's own I_C
        ic = np.asarray(ev.metrics["ic_a"], dtype=float)
        ze = cb_emitter_impedance_max(ic, ic, _load(b.RC, rl), T.vaf, thermal_voltage(25.0))
        loop = rs + b.RE * ze / (b.RE + ze)
        floor = np.maximum(floor, edge_floor_hz(b.C_IN, loop, mid))
    ok = np.asarray(ev.valid, dtype=bool)
    assert ok.sum() > 200
    claimed = ok & (floor > 0)
    # a floor above 0 claims an edge: the engine must find one, at or above it
    assert np.all(np.isfinite(f_low[claimed]))
    ratio = floor[claimed] / f_low[claimed]
    assert ratio.max() <= 1.0 + 1e-9, ratio.max()
    with capsys.disabled():
        print(f"\n  f_low floor {topo} R_S={rs:g} R_L={rl} mid={mid:g}: {claimed.sum()} "  # noqa: T201 (tightness, reported)
              f"stages, floor/f_low median {np.median(ratio):.3f}, max {ratio.max():.4f}")
    assert np.median(ratio) > 0.05        # not an empty claim


def _response(req, b, f):
    from optimiser.ac import frequency_response
    from optimiser.dc import operating_point
    from optimiser.device import device_from_transistor

    model = device_from_transistor(T)
    op = operating_point(b.topology, req.supply_v, b, model)
    return np.abs(frequency_response(req, b, model, op, f)), op


@pytest.mark.parametrize("rs, rl, mid", [(50.0, 1e4, 1e3), (600.0, 2e3, 1e3),
                                         (10e3, None, 1e5)])
def test_bypass_shelf_inequality_against_the_engine(rs, rl, mid, capsys):
    # the shelf lemma: with C_BYP the only finite capacitor, |H(f)| ≤ |H_open(f)|·
    # sqrt(1 + (2πf·C_BYP·RE_BYP)²), H_open the same stage with C_BYP open; the
    # engine's nodal response at 0.1 Hz .. mid_hz on random partly and fully
    # bypassed stages
    rng = np.random.default_rng(zlib.crc32(repr((rs, rl, mid)).encode()))
    n = 1500
    byp = 10 ** rng.uniform(1.5, 4, n)
    vals = dict(R1=10 ** rng.uniform(3.5, 6, n), R2=10 ** rng.uniform(3, 5.5, n),
                RC=10 ** rng.uniform(2.3, 4.7, n), RE=rng.uniform(0, 1e3, n) * (rng.random(n) < 0.5),
                RE_BYP=byp, C_IN=1.0, C_OUT=1.0)
    cb = 10 ** rng.uniform(-7, -3, n)
    req = Request(topology="ce", supply_v=12.0, load_ohm=rl, source_ohm=rs, mid_hz=mid)
    f = np.logspace(-1, math.log10(mid), 25)
    h, op = _response(req, StageBatch.from_values("ce", C_BYP=cb, **vals), f)
    h_open, _ = _response(req, StageBatch.from_values("ce", C_BYP=0.0, **vals), f)
    live = (op.ic > 1e-6) & (op.vce > 0.3)
    u = 2 * math.pi * f[:, None] * cb[None, :] * byp[None, :]
    ratio = (h / (h_open * np.sqrt(1 + u * u)))[:, live]
    # near saturation the base-collector junction conducts: the margin covers it
    assert ratio.max() <= BYPASS_SHELF_MARGIN, ratio.max()
    with capsys.disabled():
        print(f"\n  bypass shelf R_S={rs:g} R_L={rl} mid={mid:g}: {live.sum()} stages x "  # noqa: T201 (tightness, reported)
              f"{f.size} f, |H|/bound median {np.median(ratio):.3f}, max {ratio.max():.4f}")


@pytest.mark.parametrize("rs, rl", [(50.0, 1e4), (600.0, 2e3), (10e3, None)])
def test_bypass_floor_never_above_the_engine(rs, rl):
    # the shelf claim as the search takes it, on random stages with every capacitor
    # finite: the gain with C_BYP open (C_IN, C_OUT shorted, at mid_hz — what the
    # search's per-ohm ceiling bounds) and the mid_hz gain as the window's bottom;
    # where Z' is below bypass_load_needed at f, the engine's f_low is above f
    from optimiser.f_low_bounds import bypass_load_needed

    rng = np.random.default_rng(zlib.crc32(repr((rs, rl, "floor")).encode()))
    n = 2000
    mid = 1e3
    byp = 10 ** rng.uniform(1.5, 4, n)
    vals = dict(R1=10 ** rng.uniform(3.5, 6, n), R2=10 ** rng.uniform(3, 5.5, n),
                RC=10 ** rng.uniform(2.3, 4.7, n),
                RE=rng.uniform(0, 1e3, n) * (rng.random(n) < 0.5), RE_BYP=byp)
    caps = dict(C_IN=10 ** rng.uniform(-6, -3, n), C_OUT=10 ** rng.uniform(-6, -3, n),
                C_BYP=10 ** rng.uniform(-6, -3, n))
    req = Request(topology="ce", supply_v=12.0, load_ohm=rl, source_ohm=rs, mid_hz=mid)
    b = StageBatch.from_values("ce", **vals, **caps)
    ev = evaluate(req, b, T, None, band_edges=True, large_signal=False, corner_gain=False)
    f_low = np.asarray(ev.metrics["f_low_hz"], dtype=float)
    g_mid = np.asarray(ev.metrics["gain"], dtype=float)
    h_open, _ = _response(req, StageBatch.from_values("ce", C_IN=1.0, C_OUT=1.0, C_BYP=0.0,
                                                      **vals), [mid])
    z = vals["RC"] if rl is None else vals["RC"] * rl / (vals["RC"] + rl)
    per_z = h_open[0] / z
    ok = np.asarray(ev.valid, dtype=bool)
    checked = 0
    for f in (0.3, 1.0, 3.0, 10.0, 30.0):
        # the floor's claim for the stage's own C_BYP (c_max = the stage's value)
        need = np.array([float(bypass_load_needed(g_mid[i], per_z[i], caps["C_BYP"][i],
                                                  byp[i], f)) for i in range(n)])
        claimed = ok & (z < need)
        checked += int(claimed.sum())
        assert np.all(f_low[claimed] > f), (f, f_low[claimed].min())
    assert checked > 50


@pytest.mark.parametrize("topo", ["ce", "cb", "cc"])
@pytest.mark.parametrize("rs, rl", [(50.0, 1e4), (600.0, 1e3)])
def test_drawer_floor_never_above_the_engine(topo, rs, rl, capsys):
    # drawer_f_low_floor claims: every stage whose resistors are at most r_max and
    # whose capacitors are at most c_max has f_low >= the floor.  Against the
    # engine's nodal f_low on random valid stages of such a drawer (values drawn up
    # to r_max and c_max, capacitors near the top so that the claim is tested where
    # it is tight); the tightness (floor / least f_low seen) is printed.
    from optimiser.f_low_bounds import drawer_f_low_floor
    from optimiser.stages import module

    rng = np.random.default_rng(zlib.crc32(repr(("drawer", topo, rs, rl)).encode()))
    r_max, c_max, mid, n = 47e3, 1e-6, 1e3, 3000
    b = _stages(topo, rng, n)
    clip = {r: np.minimum(getattr(b, r), r_max) for r in ("R1", "R2", "RC", "RE", "RE_BYP")}
    caps = {r: np.where(getattr(b, r) > 0, c_max * rng.uniform(0.5, 1.0, n), 0.0)
            for r in ("C_IN", "C_OUT", "C_BYP", "C_B")}
    b = StageBatch.from_values(topo, **{k: v for k, v in {**clip, **caps}.items()
                                        if k in module(topo).ROLE_NAMES})
    req = Request(topology=topo, supply_v=12.0, load_ohm=rl, source_ohm=rs, mid_hz=mid)
    ev = evaluate(req, b, T, None, band_edges=True, large_signal=False, corner_gain=False)
    f_low = np.asarray(ev.metrics["f_low_hz"], dtype=float)
    ok = np.asarray(ev.valid, dtype=bool) & np.isfinite(f_low)
    assert ok.sum() > 100
    roles = module(topo).ROLE_NAMES
    fl = drawer_f_low_floor(module(topo).INPUT, module(topo).OUTPUT, c_max, r_max, sum(x in roles for x in ("RE", "RE_BYP")),
                            mid, rs, rl)
    assert fl["floor_hz"] > 0
    assert f_low[ok].min() >= fl["floor_hz"], (f_low[ok].min(), fl)
    with capsys.disabled():
        print(f"\n  drawer floor {topo} R_S={rs:g} R_L={rl:g}: {fl['floor_hz']:.4g} Hz, "  # noqa: T201 (tightness, reported)
              f"least f_low of {ok.sum()} stages {f_low[ok].min():.4g} Hz "
              f"(ratio {fl['floor_hz'] / f_low[ok].min():.3f})")


def test_capacitance_needed_inverts_the_floor():
    from optimiser.f_low_bounds import capacitance_needed

    rng = np.random.default_rng(3)
    for _ in range(200):
        r = 10 ** rng.uniform(1, 6)
        mid = 10 ** rng.uniform(2, 6)
        f = 10 ** rng.uniform(-2, math.log10(mid) - 0.5)
        c = capacitance_needed(f, r, mid)
        assert float(edge_floor_hz(c, r, mid)) == pytest.approx(f, rel=1e-9)
        assert float(edge_floor_hz(c * 0.99, r, mid)) > f      # a smaller C cannot reach f
    assert capacitance_needed(1.0, math.inf, 1e3) == 0.0


def test_infeasible_answer_names_the_floor_of_the_capacitors_in_stock():
    # a drawer whose capacitors stop at 1 µF cannot reach 10 mHz: the answer says so
    # first, with the least C_IN and C_OUT (each inverts the floor at the largest loop)
    from inventory.parts import Capacitor, Resistor, StockSnapshot
    from optimiser.search.suggestions import f_low_floor_note

    snap = StockSnapshot(
        tuple(Resistor(v, 10, id=k) for k, v in enumerate([1e3, 10e3, 100e3])),
        (Capacitor(1e-6, 10, id=50), Capacitor(100e-6, 0, id=51)), (T,))
    req = Request(topology="cb", supply_v=12.0, load_ohm=1e3, source_ohm=50.0,
                  f_low_max_hz=0.01)
    text, fl = f_low_floor_note(req, snap)
    assert fl["c_max_f"] == 1e-6                    # the empty 100 µF row does not count
    assert fl["input_loop_ohm"] == 50.0 + 100e3     # R_S + the largest RE
    assert fl["floor_hz"] > 0.01 and text.startswith("f_low cannot fall below")
    assert "C_IN at least" in text and "necessary, not sufficient" in text
    assert f_low_floor_note(replace_f(req, 10.0), snap) is None     # within reach: nothing said


def replace_f(req, f):
    from dataclasses import replace
    return replace(req, f_low_max_hz=f)


@pytest.mark.parametrize("topo", ["ce", "cb", "cc"])
@pytest.mark.parametrize("lim, mid", [(3.0, 1e3), (20.0, 1e3), (300.0, 1e5)])
def test_f_low_missed_is_the_engines_verdict(topo, lim, mid):
    # the confirmation's screen (grid points first, the edge search for the rest)
    # says "missed" exactly where the engine's f_low exceeds f_low_max_hz
    from optimiser.search.confirm import f_low_missed

    rng = np.random.default_rng(zlib.crc32(repr(("missed", topo, lim, mid)).encode()))
    b = _stages(topo, rng, 600)
    req = Request(topology=topo, supply_v=12.0, load_ohm=1e4, source_ohm=600.0, mid_hz=mid,
                  f_low_max_hz=lim)
    ev = evaluate(req, b, T, None, band_edges=True, large_signal=False, corner_gain=False)
    f_low = np.asarray(ev.metrics["f_low_hz"], dtype=float)
    want = np.isfinite(f_low) & (f_low > lim)
    got = f_low_missed(req, b, T)
    assert 20 < want.sum() < b.n - 20           # both verdicts occur
    assert np.array_equal(got, want)


def test_loops_refuse_a_topology_name_for_a_terminal():
    # the loops are keyed by the terminal the source drives / the load hangs from;
    # a topology's name in its place would silently bound the wrong loop
    from optimiser.f_low_bounds import input_loop_max, output_loop_max
    with pytest.raises(ValueError):
        input_loop_max("cb", 50.0, rth=1e3, re_total=1e3)
    with pytest.raises(ValueError):
        output_loop_max("cc", 1e3, rc=1e3, re_total=1e3)
    assert input_loop_max("emitter", 50.0, rth=1e3, re_total=2e3) == 2050.0
    assert output_loop_max("emitter", 1e3, rc=5e3, re_total=2e3) == 3000.0
