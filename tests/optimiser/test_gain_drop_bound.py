"""Bound B24 of docs/search.md: a ce stage's midband gain per volt of I_C·Z'
(:func:`optimiser.prune.ce_gain_per_drop`), checked against the engine
(optimiser/evaluate.py through the search's midband figures) on random stages."""

import numpy as np
import pytest

from inventory.parts import Transistor
from optimiser.dc import operating_point, thevenin
from optimiser.device import device_from_transistor
from optimiser.evaluate import evaluate
from optimiser.prune import (
    bias_current,
    ce_gain_at_swing,
    ce_gain_per_drop,
    ce_gain_per_load,
    ce_swing_needed,
    early_bounds,
    gain_headroom_floor,
)
from optimiser.request import Request
from optimiser.score import score_terms
from optimiser.search import gain_window, skeleton_figures
from optimiser.search.bounds import B15_MARGIN, GAIN_SLACK_DB
from optimiser.stage import StageBatch
from tests.optimiser.junction_case import engine_terms_and_floor_args

CASES = [(600.0, 1e4, 60.0, 1e3), (0.0, None, 30.0, 1e3), (10e3, 2e3, 100.0, 1e5),
         (600.0, 1e4, 100.0, 1e6), (50.0, 1e3, 20.0, 1e3)]


def _stages(rs, rl, vaf, mid, n=8000, seed=11, gdb=None):
    """Random ce stages (all three emitter forms, some near saturation), their
    validity, the engine's midband gain and DC point, and the current bracket B1
    the search would give their bias node."""
    rng = np.random.default_rng(seed)
    t = Transistor("GP-N1", 100, 300, ft=250e6, cob=4e-12, vaf=vaf)
    kw = dict(gain=10 ** (gdb / 20), gain_tol_db=2.0) if gdb is not None else {}
    req = Request(topology="ce", supply_v=12.0, load_ohm=rl, source_ohm=rs, mid_hz=mid,
                  f_low_max_hz=mid / 10, f_high_min_hz=2 * mid, **kw)
    re = rng.uniform(0, 2e3, n) * (rng.random(n) < 0.7) * rng.choice([1.0, 0.01], n)
    b = StageBatch.from_values("ce", R1=rng.uniform(5e3, 2e5, n), R2=rng.uniform(1e3, 5e4, n),
                               RC=np.exp(rng.uniform(np.log(200), np.log(3e4), n)),
                               C_IN=1.0, C_OUT=1.0, C_BYP=1.0, RE=re,
                               RE_BYP=rng.uniform(0, 2e3, n))
    ok = evaluate(req, b, t, None, band_edges=False, large_signal=False).valid
    f = skeleton_figures(req, b, t)
    m = device_from_transistor(t)
    op = operating_point("ce", 12.0, b, m)
    lo, hi = early_bounds(12.0, m)
    vth, rth = thevenin(12.0, b.R1, b.R2)
    ic_lo = bias_current(vth, rth, b.re_total, m, 25.0, None, lo)
    ic_hi = bias_current(vth, rth, b.re_total, m, 25.0, None, hi)
    per = ce_gain_per_drop(ic_lo=ic_lo, r_th=rth, re_lo=b.RE, re_hi=b.RE, source_ohm=rs,
                           model=m, q_hi=hi, mid_hz=mid)
    return req, b, m, ok, f, op, ic_lo, ic_hi, per


@pytest.mark.parametrize("rs, rl, vaf, mid", CASES)
def test_gain_per_drop_holds_against_the_engine(rs, rl, vaf, mid):
    # the claim itself (G ≤ per_y·I_C·Z' at the engine's own I_C), and the two forms
    # the search takes: at the bias node, I_C·Z' ≤ y_max‖(I_C,hi·R_L); at a collector
    # candidate, I_C ≤ y_max/RC — y_max = V − I_C,lo·R_E − vce_sat the largest drop
    req, b, m, ok, f, op, ic_lo, ic_hi, per = _stages(rs, rl, vaf, mid)
    assert ok.sum() > 2000
    g = 10 ** (f["gain_inf_db"] / 20)
    zc = b.RC if rl is None else b.RC * rl / (b.RC + rl)
    ratio = (g / (per * op.ic * zc))[ok]
    # without the search's margin (B15_MARGIN) the ratio stays below 1
    assert ratio.max() <= 1.0 < B15_MARGIN, ratio.max()
    # tightness: measured median 0.95-0.99 over these cases
    assert np.median(ratio) > 0.9, np.median(ratio)
    y_max = 12.0 - ic_lo * b.re_total - m.vce_sat
    a = np.inf if rl is None else ic_hi * rl
    top = y_max if rl is None else y_max * a / (y_max + a)
    assert np.all(g[ok] <= (per * top)[ok]), np.max((g / (per * top))[ok])
    at_rc = np.minimum(ic_hi, y_max / b.RC) * zc
    assert np.all(g[ok] <= (per * at_rc)[ok]), np.max((g / (per * at_rc))[ok])
    # and at the bias node it is below the per-ohm form at I_C,hi (B6 with
    # Z' ≤ (y_max/I_C,lo)‖R_L) on most nodes of small RE, where the width of the
    # current's bracket is the main slack
    per_z = ce_gain_per_load(ic_lo=ic_lo, ic_hi=ic_hi, r_th=thevenin(12.0, b.R1, b.R2)[1],
                             re_lo=b.RE, re_hi=b.RE, source_ohm=rs, model=m,
                             q_hi=early_bounds(12.0, m)[1], mid_hz=mid)
    z_max = y_max / ic_lo if rl is None else (y_max / ic_lo) * rl / (y_max / ic_lo + rl)
    low = ok & (b.RE < 20.0)
    assert np.median((per * top / (per_z * z_max))[low]) < 1.0


@pytest.mark.parametrize("rs, rl, gdb", [(600.0, 1e4, 40.0), (0.0, None, 30.0),
                                         (50.0, 1e3, 26.0), (600.0, 1e4, 20.0)])
def test_gain_headroom_floor_with_the_drop_need_holds_against_the_engine(rs, rl, gdb):
    # B15 with B24's need (the search's second form of B15): y‖(I_C,hi·R_L) ≥ G/per_y
    # is B15's relation for the current I_C,hi and the load per gain 1/(per_y·I_C,hi);
    # the engine's gain + headroom terms of a stage in the window never below it
    req, b, m, ok, f, op, ic_lo, ic_hi, per = _stages(rs, rl, 60.0, 1e3, n=20000, seed=5,
                                                      gdb=gdb)
    win = gain_window(req)
    ok = ok & (f["gain_inf_db"] >= 20 * np.log10(win[0]) - GAIN_SLACK_DB)
    assert ok.sum() > 200
    terms = score_terms(gain_inf_db=f["gain_inf_db"], target_db=req.gain_db,
                        tol_db=req.gain_tol_db, drift_pct=0.0, hd2_pct=0.0, supply_a=0.0,
                        emptied=0, vce_v=f["vce_v"], supply_v=12.0)
    actual = terms["gain"] + terms["headroom"]
    floor = gain_headroom_floor(
        z_per_gain=1.0 / (per * B15_MARGIN * ic_hi), ic_lo=ic_hi, ve_lo=ic_lo * b.re_total,
        supply_v=12.0, vce_sat=m.vce_sat, load_ohm=rl,
        gain_lo_db=20 * np.log10(win[0]) - GAIN_SLACK_DB, target_db=req.gain_db,
        tol_db=req.gain_tol_db)
    assert np.all(floor[ok] <= actual[ok] + 1e-12), np.max((floor - actual)[ok])
    # not empty where the gain asks for a large drop
    if gdb >= 30.0:
        assert (floor[ok] > 0.05).sum() >= 5


def _at_swing(b, m, rs, mid, ic_lo, swing):
    return ce_gain_at_swing(swing=swing, ic_lo=ic_lo, r_th=thevenin(12.0, b.R1, b.R2)[1],
                            re_lo=b.RE, re_hi=b.RE, source_ohm=rs, model=m,
                            q_hi=early_bounds(12.0, m)[1], mid_hz=mid, supply_v=12.0)


@pytest.mark.parametrize("rs, rl, vaf, mid", CASES)
def test_gain_at_swing_holds_against_the_engine(rs, rl, vaf, mid):
    # B24 with the output conductance: G ≤ ce_gain_at_swing(I_C·Z') at the engine's
    # own I_C, and at the swing the bias node allows (y_max‖(I_C,hi·R_L))
    req, b, m, ok, f, op, ic_lo, ic_hi, per = _stages(rs, rl, vaf, mid)
    g = 10 ** (f["gain_inf_db"] / 20)
    zc = b.RC if rl is None else b.RC * rl / (b.RC + rl)
    ratio = (g / _at_swing(b, m, rs, mid, ic_lo, op.ic * zc))[ok]
    # without the search's margin (B15_MARGIN) the ratio stays below 1
    assert ratio.max() <= 1.0 < B15_MARGIN, ratio.max()
    assert np.median(ratio) > 0.93, np.median(ratio)
    # at least as tight as the form without the output conductance, tighter with it
    plain = (g / (per * op.ic * zc))[ok]
    assert np.all(ratio >= plain - 1e-12)
    y_max = 12.0 - ic_lo * b.re_total - m.vce_sat
    top = y_max if rl is None else y_max * ic_hi * rl / (y_max + ic_hi * rl)
    assert np.all(g[ok] <= _at_swing(b, m, rs, mid, ic_lo, top)[ok])


@pytest.mark.parametrize("rs, rl, vaf, mid", CASES)
def test_swing_needed_inverts_the_gain_at_swing(rs, rl, vaf, mid):
    # the least I_C·Z' for a gain is the inverse of the ceiling (which grows with the
    # swing): the ceiling at that swing is the gain; inf where no swing reaches it
    req, b, m, ok, f, op, ic_lo, ic_hi, per = _stages(rs, rl, vaf, mid, n=2000)
    rng = np.random.default_rng(2)
    gain = 10 ** rng.uniform(0, 3, b.RE.size)
    y = ce_swing_needed(gain=gain, ic_lo=ic_lo, r_th=thevenin(12.0, b.R1, b.R2)[1],
                        re_lo=b.RE, re_hi=b.RE, source_ohm=rs, model=m,
                        q_hi=early_bounds(12.0, m)[1], mid_hz=mid, supply_v=12.0)
    fin = np.isfinite(y)
    assert fin.sum() > 100
    back = _at_swing(b, m, rs, mid, ic_lo, y)
    assert np.allclose(back[fin], gain[fin], rtol=1e-9)
    # where it is inf, no swing up to 10^6 V gives that gain
    far = _at_swing(b, m, rs, mid, ic_lo, np.full(b.RE.size, 1e6))
    assert np.all(far[~fin] < gain[~fin] * (1 + 1e-9))


@pytest.mark.parametrize("rs, rl, vin, gdb, mid", [
    (600.0, 1e4, 0.01, 20.0, 1e3), (600.0, 1e4, 0.01, 40.0, 1e3), (50.0, 2e3, 0.002, 26.0, 1e3),
    (10e3, 1e4, 0.01, 20.0, 1e5), (600.0, 1e4, 0.01, 26.0, 1e6)])
def test_junction_floor_with_the_divider_of_the_emitter_holds_against_the_engine(
        rs, rl, vin, gdb, mid):
    # B12 with k_in = B6's k_up at the stage's own unbypassed RE (R_in ≤
    # R_TH‖(r_π,max + (β_hi + 1)·RE)) in place of R_TH/(R_TH + R_S): the engine's
    # gain + distortion + headroom terms of a valid stage in the window never below
    # it, over every RC (the bias nodes) nor at the stage's RC (the candidates)
    from optimiser.prune import ce_input_divider_max, junction_floor

    rng = np.random.default_rng(17)
    n = 8000
    t = Transistor("GP-N1", 100, 300, ft=250e6, cob=4e-12, vaf=60.0)
    m = device_from_transistor(t)
    lo, hi = early_bounds(12.0, m)
    req = Request(topology="ce", supply_v=12.0, load_ohm=rl, source_ohm=rs, input_vpk=vin,
                  mid_hz=mid, gain=10 ** (gdb / 20), gain_tol_db=2.0)
    b = StageBatch.from_values(
        "ce", R1=rng.uniform(5e3, 2e5, n), R2=rng.uniform(1e3, 5e4, n),
        RC=np.exp(rng.uniform(np.log(200), np.log(3e4), n)), C_IN=1.0, C_OUT=1.0, C_BYP=1.0,
        RE=rng.uniform(0, 2e3, n) * (rng.random(n) < 0.6) * rng.choice([1.0, 0.01], n),
        RE_BYP=rng.uniform(0, 2e3, n))
    ok, _, actual, kw, rth = engine_terms_and_floor_args(req, b, t, m, lo, hi, 100)
    kw["k_in"] = ce_input_divider_max(ic_lo=kw["ic_lo"], r_th=rth, re_hi=b.RE,
                                      source_ohm=rs, model=m, q_hi=hi)
    free = junction_floor(**kw)
    known = junction_floor(**kw, rc=b.RC)
    assert np.all(free[ok] <= actual[ok]), np.max((free - actual)[ok])
    assert np.all(known[ok] <= actual[ok]), np.max((known - actual)[ok])
    # tighter than the floor with R_TH/(R_TH + R_S) on some stages, and not empty
    plain = junction_floor(**{**kw, "k_in": rth / (rth + rs)}, rc=b.RC)
    assert np.all(known[ok] >= plain[ok] - 1e-12)
    if rs > 0:
        pos = ok & (plain > 0)
        assert np.median(known[pos] / plain[pos]) > 1.0
    # tightness, reported: measured at most 0.98-0.999 of the engine's terms
    assert np.max((known / actual)[ok & (actual > 0)]) < 1.0
