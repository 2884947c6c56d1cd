"""Bias (DC) worked examples and facts of the trade [BN, MB, SS, MH].

Each row names its source by its key in tests/reference/SOURCES.md.  "ngspice" figures
come from ngspice-39 [NGSPICE] on the netlists in tests/reference/netlists/textbook/
(TEMP = 27 °C, IS for V_BE = 0.70 V), named beside each check and rerun by
test_textbook_netlists.py when ngspice is present; the engine is set up with the same
model (tests/reference/textbook.py), so it must agree closely with them; the printed
book figures carry the book's shortcuts and get the tolerance the tables state.
"""

from __future__ import annotations

import numpy as np
import pytest

from inventory.parts import Transistor
from optimiser.dc import operating_point
from optimiser.device import DeviceModel
from optimiser.evaluate import evaluate
from optimiser.request import Request
from optimiser.stage import StageBatch

from .textbook import OPEN, book_model, op_at_27

pytestmark = pytest.mark.reference


def test_bn_voltage_divider_bias_exact():
    """[BN Ch. 4, Sec. "Voltage-divider bias", exact analysis; inputs confirmed, results
    from memory]: V_CC 22 V, 39k/3.9k, R_C 10k, R_E 1.5k, β 140."""
    m = book_model(140, 0.8463e-3)
    _, op = op_at_27("ce", 22.0, m, R1=39e3, R2=3.9e3, RC=10e3, RE=1.5e3)
    # ngspice: tests/reference/netlists/textbook/bn-ch4-voltage-divider.cir
    assert op.ib[0] == pytest.approx(6.045e-6, rel=1e-3)       # ngspice 6.045 µA
    assert op.ic[0] == pytest.approx(0.8463e-3, rel=1e-3)      # ngspice 0.8463 mA
    assert op.vce[0] == pytest.approx(12.258, rel=1e-3)        # ngspice (full KVL)
    assert op.ic[0] == pytest.approx(0.85e-3, rel=0.005)       # book 0.85 mA
    assert op.vce[0] == pytest.approx(12.22, rel=0.005)        # book 12.22 V


def test_mb_voltage_divider_firm_solution():
    """[MB "Transistor Biasing", VDB example; confirmed: malvino.com biasans2 page]:
    V_CC 10 V, 10k/2.2k, R_C 3.6k, R_E 1k, β 100: V_B 1.78, V_E 1.08, V_C 6.14 V."""
    m = book_model(100, 1.0839e-3 * 100 / 101)
    _, op = op_at_27("ce", 10.0, m, R1=10e3, R2=2.2e3, RC=3.6e3, RE=1e3)
    # ngspice: tests/reference/netlists/textbook/mb-voltage-divider.cir
    np.testing.assert_allclose([op.vb[0], op.ve[0], op.vc[0]], [1.7839, 1.0839, 6.1365],
                               rtol=2e-3)                          # same-model / ngspice
    np.testing.assert_allclose([op.vb[0], op.ve[0], op.vc[0]], [1.78, 1.08, 6.14],
                               rtol=5e-3)                          # book


@pytest.mark.parametrize("r1, r2, ngspice, book", [(80e3, 40e3, 0.9308e-3, 0.93e-3),
                                                   (8e3, 4e3, 0.9956e-3, 0.99e-3)])
def test_ss_divider_current_vs_beta_sensitivity(r1, r2, ngspice, book):
    """[SS, BJT chapter, bias design "I_E = 1 mA from V_CC = 12 V", from memory]:
    V_B = 4 V by the one-third rule, R_E 3.3k, β 100; a stiffer divider holds I_E nearer 1 mA."""
    m = book_model(100, 1e-3 * 100 / 101)
    _, op = op_at_27("ce", 12.0, m, R1=r1, R2=r2, RC=1e3, RE=3.3e3)
    # ngspice: tests/reference/netlists/textbook/ss-divider-bias.cir (ie_80k, ie_8k)
    assert op.ie[0] == pytest.approx(ngspice, rel=0.005)
    assert op.ie[0] == pytest.approx(book, rel=0.005)


def test_bn_fixed_bias_with_emitter_resistor():
    """[BN Ch. 5, "CE emitter-bias configuration", from memory]: V_CC 20 V, R_B 470k to
    V_CC (no R2), R_C 2.2k, R_E 0.56k, β 120: I_B 35.89 µA, I_E 4.3426 mA (ngspice)."""
    m = book_model(120, 4.3426e-3 * 120 / 121)
    _, op = op_at_27("ce", 20.0, m, R1=470e3, R2=OPEN, RC=2.2e3, RE=560.0)
    # ngspice: tests/reference/netlists/textbook/bn-ch5-emitter-bias.cir
    assert op.ib[0] == pytest.approx(35.89e-6, rel=1e-3)
    assert op.ie[0] == pytest.approx(4.3426e-3, rel=1e-3)


def test_bn_emitter_follower_bias():
    """[BN Ch. 5, "Emitter-follower configuration"; inputs confirmed]: V_CC 12 V,
    R_B 220k, R_E 3.3k, β 100: I_B 20.42 µA, I_E 2.0628 mA (ngspice), book 2.062 mA."""
    m = book_model(100, 2.0628e-3 * 100 / 101)
    _, op = op_at_27("cc", 12.0, m, R1=220e3, R2=OPEN, RE=3.3e3)
    # ngspice: tests/reference/netlists/textbook/bn-ch5-emitter-follower.cir (ib, ie)
    assert op.ib[0] == pytest.approx(20.42e-6, rel=1e-3)
    assert op.ie[0] == pytest.approx(2.062e-3, rel=1e-3)


# --- [BN, MB] the 10:1 divider rule -----------------------------------------------------

def _divider_stage(ratio, beta_ref=100.0, re=1e3, vth=3.0, vcc=12.0):
    """A divider with R_TH = ratio·β·R_E and Thevenin voltage vth."""
    rth = ratio * beta_ref * re
    r1 = rth * vcc / vth
    r2 = rth * vcc / (vcc - vth)
    return dict(R1=r1, R2=r2, RC=2.2e3, RE=re, C_IN=1e-6, C_OUT=1e-6)


@pytest.mark.parametrize("ratio, error_pct", [(0.01, 0.98), (0.1, 9.0)])
def test_ignoring_base_current_error(ratio, error_pct):
    """Ignoring I_B overstates I_E by R_TH/((β+1)R_E + R_TH) [BN Ch. 4; recomputed, py]:
    0.98 % at R_TH = 0.01·β·R_E (M&B "stiff") and 9.0 % at 0.1·β·R_E (the 10:1 rule:
    B&N's condition, M&B's "firm").  The engine's own V_BE moves a little with I_E,
    (V_T·ln of the current ratio, 2.4 mV at 9 %), so the check allows 0.2 percentage points and
    then confirms the formula exactly with the engine's two V_BE values."""
    vals = _divider_stage(ratio)
    b = StageBatch.from_values("ce", **vals)
    m = DeviceModel(is_=1e-14, beta=100.0, vaf=np.inf)
    a = operating_point("ce", 12.0, b, m)
    z = operating_point("ce", 12.0, b, m, beta=1e12)
    frac = 100 * (z.ie[0] - a.ie[0]) / z.ie[0]
    assert frac == pytest.approx(error_pct, abs=0.2)
    # the same statement with the engine's two V_BE values in place of one constant V_BE
    rth, re, vth = ratio * 100 * 1e3, 1e3, 3.0
    beta = float(a.beta[0])
    exact = 100 * (1 - (vth - a.vbe[0]) / (vth - z.vbe[0]) * re / (re + rth / (beta + 1)))
    assert frac == pytest.approx(exact, rel=1e-6)


@pytest.mark.parametrize("ratio, holds", [(0.01, True), (0.1, True), (1.0, False), (3.0, False)])
def test_ten_to_one_rule_predicts_hfe_sensitivity(ratio, holds):
    """Where R_TH ≤ 0.1·β_min·R_E holds (the 10:1 rule, B&N; "firm" in M&B) the engine's
    I_C moves < 10 % over hFE 100…300; where it is broken (R_TH = β·R_E or more) > 25 %."""
    t = Transistor("T", hfe_min=100, hfe_max=300, vaf=None)
    req = Request("ce", 12.0, temp_c=(25, 25))
    ev = evaluate(req, StageBatch.from_values("ce", **_divider_stage(ratio)), t,
                  band_edges=False, large_signal=False, corner_gain=False)
    drift = ev.metrics["ic_drift_pct"][0]
    spread = 100 * (ev.corners["ic_a"][0].max() / ev.corners["ic_a"][0].min() - 1)
    if holds:
        assert spread < 10 and drift < 10
        assert not any("10:1 rule" in w for w in ev.warnings(0))
    else:
        assert spread > 25
        assert any("10:1 rule" in w for w in ev.warnings(0))


# --- [BN, MH] stability factors against the engine's corners --------------------------

CIRCUIT_41 = dict(R1=39e3, R2=3.9e3, RC=10e3, RE=1.5e3, C_IN=1e-6, C_OUT=1e-6)


def test_stability_factor_beta_against_the_corners():
    """S(β) = I_C1(1 + R_TH/R_E)/(β1(1 + β2 + R_TH/R_E)) [BN Ch. 4 "Bias stabilization",
    from memory]; on the circuit of 4.1 for β 140 → 280: ΔI_C = 10.046 µA (py, exact for the
    constant-V_BE model).  The engine's corners (hFE 140 and 280 at 25 °C) move V_BE by
    V_T·ln(I_C2/I_C1) ≈ 0.3 mV as well, so the check allows 3 %."""
    t = Transistor("T", hfe_min=140, hfe_max=280, vbe=0.7, ic_ref=0.8463e-3, vaf=None)
    req = Request("ce", 22.0, temp_c=(25, 25))
    ev = evaluate(req, StageBatch.from_values("ce", **CIRCUIT_41), t, band_edges=False,
                  large_signal=False, corner_gain=False)
    ic = ev.corners["ic_a"][0]
    d_engine = ic[1] - ic[0]
    rth, re, b1, b2 = 39e3 * 3.9e3 / 42.9e3, 1.5e3, 140.0, 280.0
    d_formula = ic[0] * (1 + rth / re) / (b1 * (1 + b2 + rth / re)) * (b2 - b1)
    assert d_formula == pytest.approx(10.046e-6, rel=0.01)
    assert d_engine == pytest.approx(d_formula, rel=0.03)


def test_stability_factor_vbe():
    """S(V_BE) = −β/(R_TH + (β+1)R_E) = −0.65103 mA/V [BN Ch. 4, from memory]; ngspice with
    a 10 mV source in the base lead gives −0.6383 mA/V, i.e. with r_e in series with R_E
    [NGSPICE; tests/reference/netlists/textbook/bn-ch4-voltage-divider.cir, s_vbe].  The engine
    shifts V_BE by 10 mV through I_S."""
    m = book_model(140, 0.8463e-3)
    b = StageBatch.from_values("ce", **CIRCUIT_41)
    base = operating_point("ce", 22.0, b, m, temp_c=27.0).ic[0]
    shifted = DeviceModel(is_=m.is_ * np.exp(-0.010 / 0.025864926), beta=m.beta)
    moved = operating_point("ce", 22.0, b, shifted, temp_c=27.0).ic[0]
    s_vbe = (moved - base) / 0.010
    assert s_vbe == pytest.approx(-0.6383e-3, rel=0.01)
    rth = 39e3 * 3.9e3 / 42.9e3
    assert s_vbe == pytest.approx(-140 / (rth + 141 * 1.5e3), rel=0.03)
