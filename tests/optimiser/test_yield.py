"""Monte Carlo yield and worst case: propagation of error, reproducibility, rejection."""

from __future__ import annotations

import math

import numpy as np
import pytest

from inventory.parts import Transistor
from optimiser.evaluate import design_of, evaluate
from optimiser.request import Request
from optimiser.stage import StageBatch
from optimiser.yield_ import apply_yield, draw, monte_carlo, worst_case

T = Transistor("GP-N1", hfe_min=100, hfe_max=300, vaf=100, ft=250e6, cob=4e-12)
CE = dict(R1=47e3, R2=10e3, RC=4.7e3, RE=1e3, C_IN=1e-6, C_OUT=1e-6)
REQ = Request("ce", 12.0, load_ohm=10e3, temp_c=(25.0, 25.0))


def test_divider_spread_matches_first_order_propagation():
    """σ_V² = Σ(∂V/∂R_i·σ_i)² with σ_i = R_i·tol/√3 for a uniform spread [TAYLOR Ch. 3,
    from memory]; within 10 %."""
    batch, _, _ = draw("ce", CE, T, {"R1": 0.05, "R2": 0.05}, (25, 25), 20000, seed=3)
    r1, r2 = batch.R1, batch.R2
    v = 12 * r2 / (r1 + r2)
    R1, R2 = CE["R1"], CE["R2"]
    d1 = -12 * R2 / (R1 + R2) ** 2
    d2 = 12 * R1 / (R1 + R2) ** 2
    sigma = math.hypot(d1 * R1 * 0.05 / math.sqrt(3), d2 * R2 * 0.05 / math.sqrt(3))
    assert np.std(v) == pytest.approx(sigma, rel=0.10)


def test_collector_current_spread_matches_first_order_propagation():
    """The same rule with the engine's own sensitivities of I_C (finite differences) to each
    resistor and to hFE (log-uniform on [100, 300]: its variance from the distribution)."""
    tol = {"R1": 0.05, "R2": 0.05, "RE": 0.05, "RC": 0.05}
    res = monte_carlo(REQ, CE, T, tol, samples=20000, seed=5)
    base = evaluate(REQ, StageBatch.from_values("ce", **CE), T, band_edges=False,
                    large_signal=False, corner_gain=False).metrics["ic_a"][0]
    var = 0.0
    for role in ("R1", "R2", "RE", "RC"):
        v = dict(CE, **{role: CE[role] * 1.001})
        ic = evaluate(REQ, StageBatch.from_values("ce", **v), T, band_edges=False,
                      large_signal=False, corner_gain=False).metrics["ic_a"][0]
        var += ((ic - base) / (CE[role] * 0.001) * CE[role] * 0.05 / math.sqrt(3)) ** 2
    a, b = 100.0, 300.0
    mean = (b - a) / math.log(b / a)
    var_beta = (b * b - a * a) / (2 * math.log(b / a)) - mean ** 2
    from optimiser.dc import operating_point
    from optimiser.device import device_from_transistor

    m = device_from_transistor(T)
    bt = StageBatch.from_values("ce", **CE)
    i1 = operating_point("ce", 12.0, bt, m, beta=mean).ic[0]
    i2 = operating_point("ce", 12.0, bt, m, beta=mean * 1.001).ic[0]
    var += ((i2 - i1) / (mean * 0.001)) ** 2 * var_beta
    assert np.std(res.samples["ic_a"]) == pytest.approx(math.sqrt(var), rel=0.10)


def test_same_seed_same_figures_other_seed_within_sampling_error():
    req = Request("ce", 12.0, load_ohm=10e3, gain=float(
        evaluate(REQ, StageBatch.from_values("ce", **CE), T, band_edges=False,
                 large_signal=False).metrics["gain"][0]), gain_tol_db=0.3, temp_c=(0, 50))
    a = monte_carlo(req, CE, T, None, samples=2000, seed=1)
    b = monte_carlo(req, CE, T, None, samples=2000, seed=1)
    c = monte_carlo(req, CE, T, None, samples=2000, seed=2)
    assert a.yield_pct == b.yield_pct
    np.testing.assert_array_equal(a.samples["gain"], b.samples["gain"])
    p = a.yield_pct / 100
    assert 0.05 < p < 0.95
    se = math.sqrt(2 * p * (1 - p) / 2000) * 100
    assert abs(a.yield_pct - c.yield_pct) < 4 * se
    assert not np.array_equal(a.samples["gain"], c.samples["gain"])


def test_nominal_pass_low_yield_rejected_by_min_yield():
    """An unbypassed stage whose gain target is its nominal gain with a ±0.2 dB window:
    it meets every target at nominal values, but 5 % resistors spread the gain wider."""
    nominal = evaluate(REQ, StageBatch.from_values("ce", **CE), T, band_edges=False,
                       large_signal=False)
    req = Request("ce", 12.0, load_ohm=10e3, gain=float(nominal.metrics["gain"][0]),
                  gain_tol_db=0.2, min_yield_pct=90.0)
    ev = evaluate(req, StageBatch.from_values("ce", **CE), T)
    assert ev.meets[0]
    res = monte_carlo(req, CE, T, None, samples=2000, seed=0)
    assert res.yield_pct < 50
    assert res.most_frequent_failure == "gain"
    d = design_of(ev, 0)
    apply_yield(d, res, req)
    assert d.meets_spec is False
    assert d.violations[-1].startswith("yield_pct ") and d.violations[-1].endswith("< 90")
    assert d.metrics["yield_pct"] == res.yield_pct


def test_worst_case_brackets_the_monte_carlo_samples():
    req = Request("ce", 12.0, load_ohm=10e3, gain=3.0, temp_c=(0, 50))
    res = monte_carlo(req, CE, T, None, samples=3000, seed=4)
    wc = worst_case(req, CE, T, None)
    for k in ("gain", "ic_a", "vce_v"):
        lo, hi = wc.ranges[k]
        x = res.samples[k]
        assert lo <= x.min() * (1 + 1e-3) and x.max() <= hi * (1 + 1e-3), k
    assert not wc.meets and "gain" in wc.failing
