"""DC solver: the loop equations hold, vectorised equals one-by-one, regions flagged."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from inventory.parts import Transistor
from optimiser.dc import operating_point, solve_bias, solve_terminals, thevenin
from optimiser.device import device_from_transistor
from optimiser.stage import StageBatch

T = Transistor("T", hfe_min=100, hfe_max=300, vaf=60, vce_sat=0.2)
M = device_from_transistor(T)


def _random_networks(seed, n):
    rng = np.random.default_rng(seed)
    r1 = 10 ** rng.uniform(3, 6, n)
    r2 = 10 ** rng.uniform(3, 6, n)
    rc = 10 ** rng.uniform(2, 5, n)
    re = 10 ** rng.uniform(1, 4, n)
    return r1, r2, rc, re


def test_kirchhoff_holds_everywhere_including_saturation_and_cutoff():
    r1, r2, rc, re = _random_networks(3, 20000)
    vcc = 12.0
    v, r = thevenin(vcc, r1, r2)
    op = solve_bias(v, r, re, rc, vcc, M)
    assert op.converged.all()
    # base loop and collector loop, relative to the supply
    assert np.max(np.abs(v - op.ib * r - op.vbe - op.ie * re)) < 1e-9 * vcc
    assert np.max(np.abs(vcc - op.ic * rc - op.vce - op.ie * re)) < 1e-9 * vcc
    # every region appears in this spread, and the flags follow their definitions
    assert op.saturated.any() and op.cutoff.any() and (~op.saturated & ~op.cutoff).any()
    np.testing.assert_array_equal(op.saturated, op.vce < M.vce_sat)


def test_vectorised_equals_one_by_one():
    r1, r2, rc, re = _random_networks(5, 40)
    batch = StageBatch.from_values("ce", R1=r1, R2=r2, RC=rc, RE=re)
    op = operating_point("ce", 15.0, batch, M)
    for i in range(batch.n):
        one = operating_point("ce", 15.0, batch.take([i]), M)
        np.testing.assert_allclose(one.ic, op.ic[i], rtol=1e-9)
        np.testing.assert_allclose(one.vce, op.vce[i], rtol=1e-9, atol=1e-12)


def test_early_effect_raises_ic_not_ib():
    """docs/model.md: the Early effect raises I_C, not I_B (forward-active)."""
    no_early = device_from_transistor(Transistor("T", hfe_min=100, hfe_max=100, vaf=None))
    early = device_from_transistor(Transistor("T", hfe_min=100, hfe_max=100, vaf=50))
    # base and emitter forced (R_TH = R_E = 0), collector 10 V through 0 Ω
    a = solve_terminals(0.65, 0.0, 0.0, 0.0, 10.0, 0.0, no_early.is_, 100.0, 0.0256926, 0.0)
    b = solve_terminals(0.65, 0.0, 0.0, 0.0, 10.0, 0.0, early.is_, 100.0, 0.0256926, 1 / 50)
    from optimiser.device import junction_currents

    ica, iba, *_ = junction_currents(a[0], a[1], no_early.is_, 100.0, 0.0256926, 0.0)
    icb, ibb, *_ = junction_currents(b[0], b[1], early.is_, 100.0, 0.0256926, 1 / 50)
    np.testing.assert_allclose(icb / ica, 1 + 9.35 / 50, rtol=1e-6)    # (1 + V_CB/V_AF)
    np.testing.assert_allclose(ibb, iba, rtol=1e-9)


@settings(max_examples=60, deadline=None)
@given(st.floats(1e3, 1e6), st.floats(1e3, 1e6), st.floats(0, 1e5), st.floats(0, 1e4),
       st.floats(1.0, 60.0), st.floats(-20.0, 80.0), st.floats(20.0, 800.0))
def test_solution_satisfies_the_loops(r1, r2, rc, re, vcc, temp, beta):
    v, r = thevenin(vcc, np.array([r1]), np.array([r2]))
    op = solve_bias(v, r, np.array([re]), np.array([rc]), vcc, M, temp_c=temp, beta=beta)
    assert op.converged.all()
    assert abs(v[0] - op.ib[0] * r[0] - op.vbe[0] - op.ie[0] * re) < 1e-9 * vcc
    assert abs(vcc - op.ic[0] * rc - op.vce[0] - op.ie[0] * re) < 1e-9 * vcc


def test_corner_shapes_broadcast():
    batch = StageBatch.from_values("ce", R1=[47e3, 56e3], R2=10e3, RC=4.7e3, RE=1e3)
    op = operating_point("ce", 12.0, batch, M, temp_c=np.array([[0.0, 50.0]]),
                         beta=np.array([[100.0, 300.0]]))
    assert op.ic.shape == (2, 2)
    # warmer and higher β: more current
    assert (op.ic[:, 1] > op.ic[:, 0]).all()


def test_converged_to_1e9_relative_against_a_much_tighter_solve():
    r1, r2, rc, re = _random_networks(11, 20000)
    v, r = thevenin(12.0, r1, r2)
    from optimiser.device import junction_currents, scaled, thermal_voltage

    is_, beta = scaled(M, 25.0)
    vt = thermal_voltage(25.0)
    a = solve_terminals(v, r, 0.0, re, 12.0, rc, is_, beta, vt, 1 / M.vaf)
    b = solve_terminals(v, r, 0.0, re, 12.0, rc, is_, beta, vt, 1 / M.vaf, tol=1e-15)
    ica = junction_currents(a[0], a[1], is_, beta, vt, 1 / M.vaf)[0]
    icb = junction_currents(b[0], b[1], is_, beta, vt, 1 / M.vaf)[0]
    on = icb > 1e-9
    assert np.max(np.abs(ica[on] / icb[on] - 1)) < 1e-9


def test_closed_form_pruning_current_matches_the_full_solver():
    """forward_active_ic (Lambert W, base loop only) vs the full solver where V_CB is known."""
    from optimiser.dc import forward_active_ic

    r1, r2, rc, re = _random_networks(13, 5000)
    v, r = thevenin(12.0, r1, r2)
    op = solve_bias(v, r, re, rc, 12.0, M)
    fa = ~op.saturated & ~op.cutoff & (op.vce > 1.0)
    ic = forward_active_ic(v, r, re, M, vcb=op.vce - op.vbe)
    np.testing.assert_allclose(ic[fa], op.ic[fa], rtol=1e-6)
