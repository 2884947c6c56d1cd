"""The THD floor of a directly driven junction (optimiser/thd_bounds.py) against the
engine's quasi-static THD and against the Bessel series of the exponential law."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.special import iv

from inventory.parts import Transistor
from optimiser.dc import operating_point
from optimiser.device import device_from_transistor
from optimiser.distortion import IC_FLOOR, swing_vpk, thd_pct
from optimiser.request import Request
from optimiser.stage import StageBatch
from optimiser.thd_bounds import (
    THD_MARGIN,
    cannot_clip,
    early_compression,
    emitter_driven_thd_floor,
    least_logistic_thd_pct,
    least_vce,
    logistic_thd_pct,
)


@pytest.mark.parametrize("a", [0.05, 0.389, 1.2])
def test_bare_exponential_is_the_bessel_series(a):
    """c = 0: exp(a·sin θ) = I0(a) + 2Σ Iₙ(a)·(sin/cos nθ), harmonic n of amplitude
    2Iₙ(a) (Jacobi–Anger expansion; modified Bessel functions from scipy.special)."""
    expected = 100 * math.sqrt(sum(iv(n, a) ** 2 for n in range(2, 10))) / iv(1, a)
    assert logistic_thd_pct(a, 0.0) == pytest.approx(expected, rel=1e-9)


def test_logistic_midpoint_has_no_even_harmonics():
    """c = 1: σ(x) − 1/2 is odd in x, so σ(a·sin θ) has no even harmonics and the THD
    is the odd harmonics' (Taylor series of the logistic function, from memory:
    σ(x) = 1/2 + x/4 − x³/48 + …, so HD3 ≈ (a³/192)/(a/4) = a²/48 for small a)."""
    a = 0.1
    assert logistic_thd_pct(a, 1.0) == pytest.approx(100 * a * a / 48, rel=0.01)
    # and the compression lowers the THD from the bare exponential's
    assert logistic_thd_pct(a, 0.3) < logistic_thd_pct(a, 0.0)


def _random_cb(rng, n, vaf, supply_v, load_ohm, vpk, source_ohm=0.0):
    lg = lambda lo, hi: 10 ** rng.uniform(math.log10(lo), math.log10(hi), n)  # noqa: E731
    b = StageBatch.from_values("cb", R1=lg(1e3, 1e6), R2=lg(1e3, 1e6), RC=lg(100, 1e6),
                               RE=lg(10, 1e5), C_IN=1.0, C_OUT=1.0, C_B=1.0)
    m = device_from_transistor(Transistor("X", 100, 300, vaf=vaf, vce_sat=0.2))
    req = Request("cb", supply_v, source_ohm=source_ohm, load_ohm=load_ohm, input_vpk=vpk)
    op = operating_point("cb", supply_v, b, m)
    ok = op.converged & ~op.cutoff & (op.vce >= m.vce_sat)
    rl = b.RC if load_ohm is None else b.RC * load_ohm / (b.RC + load_ohm)
    return req, b, m, op, ok, rl


# (V_AF, supply, load, drive): strong and weak Early compression, no Early effect;
# drives from 2 mV (many stages near saturation pass the clipping test) to 30 mV
CASES = [(15.0, 12.0, None, 0.01), (15.0, 5.0, 10e3, 0.002), (50.0, 12.0, None, 0.01),
         (80.0, 24.0, 1e3, 0.03), (120.0, 9.0, 10e3, 0.002), (None, 12.0, None, 0.01)]


@pytest.mark.parametrize("vaf, supply_v, load_ohm, vpk", CASES)
def test_floor_never_above_the_engine(vaf, supply_v, load_ohm, vpk):
    """On 1500 random cb stages from 0 Ω: where cannot_clip holds, the engine's swing
    search finds no exit from forward-active within the drive, and the floor stays
    at or below the engine's THD; it keeps at least 0.99 of it (median)."""
    rng = np.random.default_rng(int(1000 * vpk) + int(supply_v))
    req, b, m, op, ok, rl = _random_cb(rng, 1500, vaf, supply_v, load_ohm, vpk)
    vcb = op.vce - op.vbe
    c_lo = 0.99 * early_compression(op.ic, rl, vcb, m.vaf)
    safe = ok & cannot_clip(vpk, op.vt, op.ic, rl, op.vce, m.vce_sat, IC_FLOOR, c_lo)
    assert safe.sum() > 200
    _, a_lim = swing_vpk(req, b, m, op)
    assert not np.any(safe & np.isfinite(a_lim) & (a_lim < vpk))
    vce_min = least_vce(vpk, op.vt, op.ic, rl, op.vce, c_lo)
    floor = emitter_driven_thd_floor(vpk, op.vt, op.ic, rl, vcb, m.vaf, 0.0, vce_min)
    thd = thd_pct(req, b, m, op)
    r = floor[safe] / thd[safe]
    assert r.max() <= 1.0
    assert np.median(r) >= 0.99
    # near saturation (least V_CE of the cycle under 1 V) the floor still holds
    near = safe & (vce_min < 1.0)
    assert np.all(floor[near] <= thd[near])


def test_floor_over_a_bracket_holds_for_every_stage_inside():
    """The floor over node ranges (the upper ends of I_C and R', the lower end of
    V_CB) is at most the floor of every stage whose figures lie inside them."""
    rng = np.random.default_rng(5)
    req, b, m, op, ok, rl = _random_cb(rng, 800, 30.0, 12.0, None, 0.01)
    vcb = op.vce - op.vbe
    vce_min = op.vce - rl * op.ic * np.expm1(0.01 / op.vt) - 0.01
    s = ok & cannot_clip(0.01, op.vt, op.ic, rl, op.vce, m.vce_sat, IC_FLOOR)
    one = emitter_driven_thd_floor(0.01, op.vt[s], op.ic[s], rl[s], vcb[s], m.vaf, 0.0,
                                   vce_min[s])
    wide = emitter_driven_thd_floor(0.01, op.vt[s], 2 * op.ic[s], 2 * rl[s], vcb[s] - 1, m.vaf,
                                    0.0, vce_min[s])
    assert np.all(wide <= one * (1 + 1e-12))
    assert np.any(wide < one)


def test_no_claim_behind_a_source_resistance():
    """Behind any source resistance the emitter's local feedback lowers the THD far
    below the bare junction's (measured: under 0.01 % on some 10 Ω stages), and the
    floor claims nothing there."""
    rng = np.random.default_rng(9)
    req, b, m, op, ok, rl = _random_cb(rng, 600, 80.0, 12.0, None, 0.01, source_ohm=10.0)
    thd = thd_pct(req, b, m, op)
    assert np.nanmin(np.where(ok, thd, np.inf)) < 1.0     # the form would not hold here
    vcb = op.vce - op.vbe
    f = emitter_driven_thd_floor(0.01, op.vt, op.ic, rl, vcb, m.vaf, 10.0, op.vce)
    assert np.all(f == 0.0)


def test_table_bounds_the_logistic_form_between_its_points():
    """The tabulated least THD over [0, c] is at most the form itself at 2000 random
    c (drives 1–40 mV at 25 °C), and within 1 % of it (median) below c = 0.5, where
    the form falls with c (beyond c = 1 it rises again, the mirror image of the
    logistic curve, and the least over [0, c] stays at the dip)."""
    rng = np.random.default_rng(3)
    for a in (0.04, 0.389, 1.5):
        c = rng.uniform(0.0, 3.9, 2000)
        exact = logistic_thd_pct(np.full(c.size, a), c)
        low = least_logistic_thd_pct(a, c)
        assert np.all(low <= exact)
        small = c < 0.5
        assert np.median(low[small] / exact[small]) >= 0.99


def test_margin_is_small():
    """The floor is the logistic THD less THD_MARGIN (half a percent of it)."""
    assert 0 < THD_MARGIN <= 0.01


@pytest.mark.parametrize("vaf, supply_v, load_ohm, vpk", CASES)
def test_floor_holds_for_every_stage_that_stays_forward_active(vaf, supply_v, load_ohm, vpk):
    """The floor as the search takes it (``floor_proven``: V_CE,min the larger of
    vce_sat and ``least_vce``, no clipping test) never drops a stage that meets the THD
    target as the engine judges it (``evaluate.thd_rule``: THD at most the ceiling and
    the period forward-active); and it stays at or below the engine's THD on every
    stage whose period is forward-active, near saturation included."""
    from optimiser.distortion import thd_at_input
    from optimiser.search.thd_floor import floor_proven

    rng = np.random.default_rng(int(1000 * vpk) + int(supply_v) + 7)
    req, b, m, op, ok, rl = _random_cb(rng, 1500, vaf, supply_v, load_ohm, vpk)
    thd, active = thd_at_input(req, b, m, op)
    vcb = op.vce - op.vbe
    c_lo = 0.99 * early_compression(op.ic, rl, vcb, m.vaf)
    vce_min = np.maximum(least_vce(vpk, op.vt, op.ic, rl, op.vce, c_lo), m.vce_sat)
    floor = emitter_driven_thd_floor(vpk, op.vt, op.ic, rl, vcb, m.vaf, 0.0, vce_min)
    fa = ok & active
    assert fa.sum() > 200 and (ok & ~active).sum() >= 5     # both kinds are drawn
    assert np.all(floor[fa] <= thd[fa])
    for lim in (1.0, 5.0, 8.0):
        r = Request("cb", supply_v, load_ohm=load_ohm, input_vpk=vpk, thd_max_pct=lim)
        meets = ok & active & (thd <= lim)
        assert not np.any(meets & floor_proven(r, b.RC, op, m))


@pytest.mark.parametrize("vaf, supply_v, load_ohm, vpk", CASES)
def test_direct_drive_limit_is_below_every_stage_that_meets_it(vaf, supply_v, load_ohm, vpk):
    """The request-level limit (``direct_drive_thd_floor``, before any search) is at
    most the engine's THD of every valid random cb stage from 0 Ω whose period stays
    forward-active, so a THD ceiling below it is beyond the stage's reach; and
    ``physical_limits`` states it exactly then, for a drawer holding that transistor."""
    from inventory.parts import StockSnapshot
    from optimiser.distortion import thd_at_input
    from optimiser.search.limits import direct_drive_thd_floor, physical_limits

    rng = np.random.default_rng(int(1000 * vpk) + int(supply_v) + 11)
    req, b, m, op, ok, rl = _random_cb(rng, 1500, vaf, supply_v, load_ohm, vpk)
    thd, active = thd_at_input(req, b, m, op)
    t = Transistor("X", 100, 300, vaf=vaf, vce_sat=0.2)
    floor = direct_drive_thd_floor(req, t)
    fa = ok & active
    assert floor <= thd[fa].min()
    if vpk >= 0.01 and (vaf is None or vaf >= 50):
        # not vacuous where the junction's own distortion dominates (at 2 mV the
        # base–collector share, at V_AF 15 V the compression, leave no claim)
        assert floor > 0.5 * thd[fa].min()
    snap = StockSnapshot(resistors=(), capacitors=(), transistors=(replace(t, qty=5),))
    for lim, beyond in ((0.9 * floor, floor > 0), (1.1 * floor, False)):
        r = Request("cb", supply_v, load_ohm=load_ohm, input_vpk=vpk, thd_max_pct=lim)
        got = [x for x in physical_limits(r, snap) if x["target"] == "thd_max_pct"]
        assert bool(got) is beyond
        if got:
            assert got[0]["reachable"] == pytest.approx(floor)
