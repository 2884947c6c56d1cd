"""Quasi-static THD and swing against closed forms of the exponential law."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import iv

from inventory.parts import Transistor
from optimiser.dc import operating_point
from optimiser.device import device_from_transistor, thermal_voltage
from optimiser.distortion import swing_vpk, thd_pct
from optimiser.request import Request
from optimiser.stage import StageBatch

T = Transistor("T", hfe_min=200, hfe_max=200, vaf=None, vce_sat=0.2)


def _stage(vpk):
    """Fully bypassed ce driven from 0 Ω, no load: V_BE follows the EMF exactly and
    v_load = −R_C·(I_C − I_C0), so the output is the exponential law itself."""
    req = Request("ce", 12.0, source_ohm=0.0, load_ohm=None, input_vpk=vpk)
    b = StageBatch.from_values("ce", R1=47e3, R2=10e3, RC=1e3, RE_BYP=1e3, C_BYP=1e-3,
                               C_IN=1e-6, C_OUT=1e-6)
    m = device_from_transistor(T)
    return req, b, m, operating_point("ce", 12.0, b, m)


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


def test_swing_closed_form():
    """Saturation edge: I_C reaches (V_CC − V_E − vce_sat)/R_C at EMF vt·ln(I_sat/I_C0);
    the cut-off edge (1 % of I_C0) lies at −vt·ln 100.  The swing is the smaller load
    peak at the smaller of the two amplitudes."""
    req, b, m, op = _stage(1e-3)
    swing, a_lim = swing_vpk(req, b, m, op)
    ic0, ve, rc, vt = op.ic[0], op.ve[0], 1e3, thermal_voltage(25.0)
    i_sat = (12.0 - ve - 0.2) / rc
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


def test_swing_null_when_supply_amplitude_does_not_reach_the_limits():
    """An emitter follower driven through a large source resistance into no load never
    leaves the forward-active region for an EMF of supply_v: swing is null."""
    req = Request("cc", 12.0, source_ohm=1e6, load_ohm=None, input_vpk=0.01)
    b = StageBatch.from_values("cc", R1=10e3, R2=10e3, RE=1e3, C_IN=1e-6, C_OUT=1e-6)
    m = device_from_transistor(T)
    op = operating_point("cc", 12.0, b, m)
    swing, a = swing_vpk(req, b, m, op)
    assert np.isnan(swing[0]) and np.isnan(a[0])
