"""Quasi-static THD and swing against closed forms of the exponential law."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import iv

from inventory.parts import Transistor
from optimiser.dc import operating_point
from optimiser.device import device_from_transistor, thermal_voltage
from optimiser.distortion import IC_FLOOR, swing_vpk, thd_pct, transfer, waveform
from optimiser.request import Request
from optimiser.stage import StageBatch

T = Transistor("T", hfe_min=200, hfe_max=200, vaf=None, vce_sat=0.2)


def _stage(vpk, supply_v=12.0, r1=47e3, rc=1e3):
    """Fully bypassed ce driven from 0 Ω, no load: V_BE follows the EMF exactly and
    v_load = −R_C·(I_C − I_C0), so the output is the exponential law itself."""
    req = Request("ce", supply_v, source_ohm=0.0, load_ohm=None, input_vpk=vpk)
    b = StageBatch.from_values("ce", R1=r1, R2=10e3, RC=rc, RE_BYP=1e3, C_BYP=1e-3,
                               C_IN=1e-6, C_OUT=1e-6)
    m = device_from_transistor(T)
    return req, b, m, operating_point("ce", supply_v, b, m)


@pytest.mark.parametrize("vpk", [1e-3, 5e-3, 20e-3])
def test_thd_of_the_exponential_law_is_the_bessel_series(vpk):
    """exp(a·sin θ) = I0(a) + 2Σ Iₙ(a)·(sin/cos nθ): harmonic n has amplitude 2Iₙ(a)
    (Jacobi–Anger expansion; modified Bessel functions from scipy.special)."""
    req, b, m, op = _stage(vpk)
    a = vpk / thermal_voltage(25.0)
    expected = 100 * math.sqrt(sum(iv(n, a) ** 2 for n in range(2, 10))) / iv(1, a)
    assert thd_pct(req, b, m, op)[0] == pytest.approx(expected, rel=1e-6)


def test_small_signal_rule_second_harmonic():
    """HD2 ≈ a/4 for a small drive a = V_pk/V_T [GM Ch. 5, from memory; the Bessel
    form [AS] is checked in test_score.py]."""
    req, b, m, op = _stage(1e-3)
    a = 1e-3 / thermal_voltage(25.0)
    assert thd_pct(req, b, m, op)[0] == pytest.approx(100 * a / 4, rel=0.01)


# (supply V, R1, RC): a low-gain stage (RC = 1k) and three high-gain ones (44–50 dB)
# whose saturation edge comes at a few tens of millivolts of EMF
SWING_STAGES = [(12.0, 47e3, 1e3), (15.0, 82e3, 8.2e3), (9.0, 47e3, 4.7e3),
                (15.0, 68e3, 4.7e3)]


@pytest.mark.parametrize("supply_v, r1, rc", SWING_STAGES)
def test_swing_closed_form(supply_v, r1, rc):
    """Saturation edge: I_C reaches (V_CC − V_E − vce_sat)/R_C at EMF vt·ln(I_sat/I_C0);
    the cut-off edge (1 % of I_C0) lies at −vt·ln 100.  The swing is the smaller load
    peak at the smaller of the two amplitudes.

    Behind the ideal source the base is driven without limit, and past the saturation
    edge (EMF of volts) the forward-active test can pass again on the solved currents
    of a hard-driven junction; the limit must still be the first failure going out
    from 0, not a boundary found beyond it."""
    req, b, m, op = _stage(1e-3, supply_v, r1, rc)
    swing, a_lim = swing_vpk(req, b, m, op)
    ic0, ve, vt = op.ic[0], op.ve[0], thermal_voltage(25.0)
    i_sat = (supply_v - ve - 0.2) / rc
    # at V_CE = vce_sat the base-collector exponential takes 2·e^(−V_CE/V_T) of I_S·e^(V_BE/V_T)
    is_ = op.is_[0]
    u_sat = vt * math.log((i_sat - is_) / (is_ * (1 - 2 * math.exp(-0.2 / vt))))
    a_sat = u_sat - op.vbe[0]
    a_cut = vt * math.log(100)
    a = min(a_sat, a_cut)
    assert a_lim[0] == pytest.approx(a, rel=1e-6)
    up = rc * ic0 * (1 - math.exp(-a / vt))           # EMF −a: I_C falls, load rises
    down = rc * (i_sat - ic0) if a_sat < a_cut else rc * ic0 * (math.exp(a / vt) - 1)
    assert swing[0] == pytest.approx(min(up, down), rel=1e-5)


@pytest.mark.parametrize("supply_v, r1, rc", SWING_STAGES)
def test_swing_limit_holds_over_the_whole_period(supply_v, r1, rc):
    """The definition itself, sampled: forward-active at every EMF in [−a, a], not
    just past a on one side, and the swing is the smaller peak of v_load over [−a, a]."""
    req, b, m, op = _stage(1e-3, supply_v, r1, rc)
    swing, a = swing_vpk(req, b, m, op)
    emf = np.concatenate([np.linspace(-a[0], a[0], 2001), a[0] * np.array([-1.001, 1.001])])
    v, vce, ic = transfer(req, b, m, op, emf[None, :])
    ok = (vce >= m.vce_sat) & (ic >= IC_FLOOR * op.ic[:, None])
    assert ok[0, :-2].all()
    assert not ok[0, -2:].all()
    period = v[0, :-2]
    assert swing[0] == pytest.approx(min(period.max(), -period.min()), rel=1e-6)


def test_swing_null_when_supply_amplitude_does_not_reach_the_limits():
    """An emitter follower driven through a large source resistance into no load never
    leaves the forward-active region for an EMF of supply_v: swing is null."""
    req = Request("cc", 12.0, source_ohm=1e6, load_ohm=None, input_vpk=0.01)
    b = StageBatch.from_values("cc", R1=10e3, R2=10e3, RE=1e3, C_IN=1e-6, C_OUT=1e-6)
    m = device_from_transistor(T)
    op = operating_point("cc", 12.0, b, m)
    swing, a = swing_vpk(req, b, m, op)
    assert np.isnan(swing[0]) and np.isnan(a[0])


def _ebers_moll_vc(u, ve, is_, vt, supply_v, rc):
    """V_C of the held-emitter stage for a forced V_BE ``u`` (open load, no Early effect),
    from the Ebers–Moll equations with BR = 1,
    I_C = I_S·e^{u/V_T}·(1 − 2e^{−V_CE/V_T}) + I_S, and I_C = (V_CC − V_E − V_CE)/R_C,
    solved for V_CE by brentq.  Where R_C·I_S·e^{u/V_T} is huge (the junction driven hard)
    the same law is used as V_CE = V_T·ln 2 − V_T·ln(1 − (I_C − I_S)/(I_S·e^{u/V_T})), a
    form without the cancellation of the two large exponentials."""
    from scipy.optimize import brentq

    ebe = math.exp(u / vt)
    if rc * is_ * ebe < 1e6:
        def h(s):
            return s - (supply_v - ve - rc * (is_ * ebe * (1 - 2 * math.exp(-s / vt)) + is_))

        return ve + brentq(h, -1.0, supply_v - ve + 1.0, xtol=1e-14, rtol=1e-15)

    def g(s):
        x = ((supply_v - ve - s) / rc - is_) / (is_ * ebe)
        return s - vt * math.log(2.0) + vt * math.log1p(-x)

    return ve + brentq(g, vt * math.log(2.0) - 1e-3, 0.5, xtol=1e-14, rtol=1e-15)


@pytest.mark.parametrize("vpk", [0.2, 1.0])
def test_hard_drive_waveform_and_thd(vpk):
    """Behind a 0 Ω source the base and the held emitter fix V_BE = V_BE0 + EMF, so at an
    EMF of volts the junction law is many orders above the collector current.  The load
    voltage over the period (saturated near V_E + V_T·ln 2 on one side, cut off near V_CC
    on the other) and its THD match a scalar solution of the Ebers–Moll equations."""
    req, b, m, op = _stage(vpk, 15.0, 82e3, 8.2e3)
    vt = thermal_voltage(25.0)
    emf, v = waveform(req, b, m, op)
    ref = np.array([_ebers_moll_vc(op.vb[0] - op.ve[0] + e, op.ve[0], op.is_[0], vt, 15.0,
                                   8.2e3) for e in emf[0]]) - op.vc[0]
    assert v[0] == pytest.approx(ref, abs=1e-6)
    assert v[0].min() == pytest.approx(op.ve[0] + vt * math.log(2) - op.vc[0], abs=1e-3)
    X = np.fft.rfft(ref)
    expected = 100 * np.sqrt(np.sum(np.abs(X[2:10]) ** 2)) / np.abs(X[1])
    assert thd_pct(req, b, m, op)[0] == pytest.approx(expected, rel=1e-6)
