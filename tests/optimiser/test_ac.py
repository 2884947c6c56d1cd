"""Small-signal nodal analysis: two routes to the same answer (closed form and MNA)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from inventory.parts import Transistor
from optimiser import ac
from optimiser.dc import operating_point
from optimiser.device import device_from_transistor
from optimiser.request import Request
from optimiser.stage import StageBatch

BIG = 1.0   # farad: a midband short at 1 kHz (as in the recorded [NGSPICE] textbook runs)


def _setup(topology, req, t, **vals):
    m = device_from_transistor(t)
    b = StageBatch.from_values(topology, **vals)
    op = operating_point(topology, req.supply_v, b, m)
    return m, b, op, ac.small_signal(op, m)


def test_ce_gain_closed_form_hybrid_pi():
    """Hybrid-π without r_o: A = −(R_TH/(R_TH+R_S))·β·(R_C‖R_L)/(R_S‖R_TH + r_π + (β+1)R_E)."""
    t = Transistor("T", hfe_min=150, hfe_max=150, vaf=None)
    req = Request("ce", 12.0, load_ohm=10e3, source_ohm=600.0)
    r1, r2, rc, re = 47e3, 10e3, 4.7e3, 1e3
    m, b, op, ss = _setup("ce", req, t, R1=r1, R2=r2, RC=rc, RE=re, C_IN=BIG, C_OUT=BIG)
    assert not op.saturated[0]
    h = ac.frequency_response(req, b, m, op, [1e3], ss)[0, 0]
    rpi = float(ss["rpi"][0])
    beta_ac = float(ss["gm"][0]) * rpi
    rth = r1 * r2 / (r1 + r2)
    rs_th = 600 * rth / (600 + rth)
    rl = rc * 10e3 / (rc + 10e3)
    expected = -(rth / (rth + 600)) * beta_ac * rl / (rs_th + rpi + (beta_ac + 1) * re)
    assert h.real == pytest.approx(expected, rel=1e-6)
    assert abs(h.imag) < 1e-5 * abs(expected)


def test_cc_zout_closed_form():
    """Emitter follower: Zout = R_E ‖ ((R_S‖R_TH + r_π)/(β+1)) without r_o."""
    t = Transistor("T", hfe_min=100, hfe_max=100, vaf=None)
    req = Request("cc", 12.0, load_ohm=1e3, source_ohm=1e3)
    m, b, op, ss = _setup("cc", req, t, R1=47e3, R2=47e3, RE=2.2e3, C_IN=BIG, C_OUT=BIG)
    mid = ac.midband(req, b, m, op, ss)
    rpi = float(ss["rpi"][0])
    beta_ac = float(ss["gm"][0]) * rpi
    rs = 1e3 * 23.5e3 / (1e3 + 23.5e3)
    branch = (rs + rpi) / (beta_ac + 1)
    expected = 2.2e3 * branch / (2.2e3 + branch)
    assert abs(mid["zout"][0]) == pytest.approx(expected, rel=1e-6)


def test_single_output_pole():
    """Only C_OUT finite, no r_o: f_low = 1/(2π·C_OUT·(R_C + R_L)) [BN Ch. 9 f_LC, from memory]."""
    t = Transistor("T", hfe_min=100, hfe_max=100, vaf=None)
    req = Request("ce", 20.0, load_ohm=2.2e3, source_ohm=1e3, mid_hz=10e3)
    m, b, op, ss = _setup("ce", req, t, R1=40e3, R2=10e3, RC=4e3, RE_BYP=2e3, C_BYP=BIG,
                          C_IN=BIG, C_OUT=1e-6)
    gain = np.abs(ac.midband(req, b, m, op, ss)["h"])
    f_low, f_high, peak = ac.band_edges(req, b, m, op, gain, ss)
    pole = 1 / (2 * math.pi * 1e-6 * (4e3 + 2.2e3))
    # −3.01 dB below the gain at mid_hz (itself a hair under the asymptote) for one pole:
    # (1 + (p/mid)²)/(1 + (p/f)²) = 10^(−0.301)
    expected = pole / math.sqrt((1 + (pole / 10e3) ** 2) * 10 ** 0.301 - 1)
    assert f_low[0] == pytest.approx(expected, rel=1e-6)
    assert math.isnan(f_high[0])              # no ft, no cob: flat to 100 GHz
    assert peak[0] < 0.01


def test_frequency_axis_leads_and_batches():
    t = Transistor("T", hfe_min=100, hfe_max=300, ft=200e6, cob=3e-12)
    req = Request("ce", 12.0, load_ohm=10e3)
    m, b, op, ss = _setup("ce", req, t, R1=[47e3, 56e3, 68e3], R2=10e3, RC=4.7e3,
                          RE=[0, 100, 220], RE_BYP=[1e3, 900, 0], C_BYP=[47e-6, 47e-6, 0],
                          C_IN=1e-6, C_OUT=1e-6)
    f = np.logspace(0, 8, 17)
    H = ac.frequency_response(req, b, m, op, f, ss)
    assert H.shape == (17, 3)
    for i in range(3):   # grouping by shorted resistors gives the same as one at a time
        sub = b.take([i])
        Hi = ac.frequency_response(req, sub, m, op.take([i]), f)
        np.testing.assert_allclose(Hi[:, 0], H[:, i], rtol=1e-10)


def test_singular_matrix_is_explained():
    t = Transistor("T", hfe_min=100, hfe_max=100)
    req = Request("ce", 12.0)
    m = device_from_transistor(t)
    b = StageBatch.from_values("ce", R1=np.inf, R2=np.inf, RC=1e3, RE=1e3, C_IN=0.0, C_OUT=1e-6)
    op = operating_point("ce", 12.0, b.take([0]).__class__.from_values(
        "ce", R1=1e12, R2=1.0, RC=1e3, RE=1e3), m)       # deep cut-off, base floating
    ss = ac.small_signal(op, m)
    ss = ac.SmallSignal({k: np.zeros_like(v) for k, v in ss.items()})
    with pytest.raises(ac.SingularCircuitError, match="floating node"):
        ac.frequency_response(req, b, m, op, [1e3], ss)
