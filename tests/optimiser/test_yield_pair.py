"""Monte Carlo yield of two-transistor circuits (optimiser.yield_.monte_carlo_pair).

Hand-checkable cases: with every tolerance zero, one hFE and one temperature every
sample is the nominal circuit, so the yield is 0 or 100 %; the median of a log-uniform
hFE on [a, b] is √(a·b) (the log is uniform, so its median is the midpoint of the
logs), so a floor on S1's collector current at its value for hFE = √(a·b) passes half
of the samples when nothing else spreads (binomial standard error √(p(1−p)/n)).
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from optimiser.circuit_file import load_circuit
from optimiser.pair_evaluate import evaluate_pair
from optimiser.yield_ import draw_pair, monte_carlo_pair

EXAMPLES = Path(__file__).resolve().parents[2] / "examples" / "bench"


def _circuit(name="preamp-buffer.toml"):
    return load_circuit(EXAMPLES / name)


def _bare(request, **kw):
    """The request with no target but those given and one temperature."""
    none = dict(gain=None, f_low_max_hz=None, f_high_min_hz=None, zout_max_ohm=None,
                zin_min_ohm=None, thd_max_pct=None, ic_min_a=None, ic_drift_max_pct=None,
                temp_c=(25.0, 25.0))
    return replace(request, **{**none, **kw})


def _fixed_hfe(t, beta):
    return replace(t, hfe_min=beta, hfe_max=beta, hfe_typ=None)


@pytest.mark.parametrize("name", ["preamp-buffer.toml", "cascode-check.toml"])
def test_no_spread_gives_the_nominal_circuit_and_yield_0_or_100(name):
    c = _circuit(name)
    zero = {r: 0.0 for r in c.values}
    ts = tuple(_fixed_hfe(t, 200.0) for t in c.transistors)
    nominal = evaluate_pair(_bare(c.request), c.batch(), ts, band_edges=False,
                            large_signal=False)
    g_db = float(nominal.metrics["gain_db"][0])
    inside = _bare(c.request, gain=10 ** ((g_db + 0.5) / 20), gain_tol_db=1.0)
    res = monte_carlo_pair(inside, c.form, c.values, ts, zero, samples=50, seed=1)
    assert res.yield_pct == 100.0
    assert np.allclose(res.samples["gain_db"], g_db, rtol=1e-9)
    for k, stage in enumerate(c.form.stages):
        assert np.allclose(res.samples[f"{stage}.ic_a"], nominal.stages[k]["ic_a"][0],
                           rtol=1e-9)
    outside = _bare(c.request, gain=10 ** ((g_db + 3.0) / 20), gain_tol_db=1.0)
    res = monte_carlo_pair(outside, c.form, c.values, ts, zero, samples=50, seed=1)
    assert res.yield_pct == 0.0 and res.fail_share["gain"] == 1.0


def test_a_floor_at_the_median_hfe_passes_about_half():
    c = _circuit()
    zero = {r: 0.0 for r in c.values}
    t1, t2 = c.transistors
    geo = math.sqrt(t1.hfe_min * t1.hfe_max)
    at_median = evaluate_pair(_bare(c.request), c.batch(), c.transistors, band_edges=False,
                              large_signal=False, betas=(geo, None))
    floor = float(at_median.stages[0]["ic_a"][0])
    # S2 runs at about twice S1's current whatever its hFE: only S1's floor can fail
    assert float(at_median.stages[1]["ic_a"][0]) > 1.5 * floor
    n = 4000
    res = monte_carlo_pair(_bare(c.request, ic_min_a=floor), c.form, c.values,
                           c.transistors, zero, samples=n, seed=7)
    se = math.sqrt(0.25 / n)
    assert res.yield_pct / 100 == pytest.approx(0.5, abs=4 * se)
    assert res.fail_share["S2.ic_a"] == 0.0
    # each transistor's hFE drawn on its own spread, independently of the other
    b1, b2 = res.samples["S1.beta25"], res.samples["S2.beta25"]
    assert b1.min() >= t1.hfe_min and b1.max() <= t1.hfe_max
    assert abs(np.corrcoef(np.log(b1), np.log(b2))[0, 1]) < 4 / math.sqrt(n)


def test_tolerances_spread_the_parts_within_their_bounds_and_the_seed_repeats():
    c = _circuit("cascode-check.toml")
    tol = dict(c.tolerances)
    a = draw_pair(c.form, c.values, c.transistors, tol, c.request.temp_c, 3000, 11)
    b = draw_pair(c.form, c.values, c.transistors, tol, c.request.temp_c, 3000, 11)
    for role, v in c.values.items():
        x = a[0].role(role)
        assert np.array_equal(x, b[0].role(role))
        assert x.min() >= v * (1 - tol[role]) - 1e-12 and x.max() <= v * (1 + tol[role]) + 1e-12
        # uniform on ±tol: standard deviation tol·v/√3
        assert np.std(x) == pytest.approx(v * tol[role] / math.sqrt(3), rel=0.08)
    t0, t1 = c.request.temp_c
    assert a[2].min() >= t0 and a[2].max() <= t1


@pytest.mark.parametrize("name,coupling", [("preamp-buffer.toml", "direct"),
                                           ("cascode-check.toml", None)])
def test_per_sample_hfe_and_temperature_are_each_circuits_own(name, coupling):
    """The batch at (β1, β2, T) per row equals each circuit solved alone at its own."""
    c = _circuit(name)
    values = dict(c.values)
    form = c.form
    if coupling == "direct":
        from optimiser.stages import pair_form

        form = pair_form(["ce", "cc"], "direct")
        values = {r: v for r, v in values.items() if r in form.role_names}
    from optimiser.stages.pair import PairBatch

    b1, b2, temps = np.array([110.0, 180.0, 290.0]), np.array([250.0, 130.0, 160.0]), \
        np.array([0.0, 25.0, 50.0])
    batch = PairBatch.from_values(form, **{r: np.full(3, v) for r, v in values.items()})
    many = evaluate_pair(c.request, batch, c.transistors, band_edges=False, large_signal=False,
                         temp_c=temps, betas=(b1, b2))
    for j in range(3):
        one = evaluate_pair(c.request, batch.take([j]), c.transistors, band_edges=False,
                            large_signal=False, temp_c=float(temps[j]),
                            betas=(float(b1[j]), float(b2[j])))
        for k in range(2):
            assert many.stages[k]["ic_a"][j] == pytest.approx(one.stages[k]["ic_a"][0], rel=1e-9)
        assert many.metrics["gain"][j] == pytest.approx(one.metrics["gain"][0], rel=1e-9)
    assert len({round(float(x), 12) for x in many.stages[0]["ic_a"]}) == 3
