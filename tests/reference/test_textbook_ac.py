"""Small-signal worked examples [BN, MB] (gain, Zin, Zout, cut-offs); sources in SOURCES.md.

The engine runs with the model of the ngspice netlists in
tests/reference/netlists/textbook/ (27 °C, IS for V_BE = 0.70 V, no VAF, no
capacitances; tests/reference/textbook.py), named beside each check and rerun by
test_textbook_netlists.py when ngspice is present.  The engine's figures are compared
with the ngspice figures closely and with the printed figure at the table's tolerance.
"""

from __future__ import annotations

import pytest

from optimiser.request import Request

from .textbook import OPEN, SHORT_C, book_model, low_edge_at_27, midband_at_27

pytestmark = pytest.mark.reference

MB = dict(R1=10e3, R2=2.2e3, RC=3.6e3, C_IN=SHORT_C, C_OUT=SHORT_C)


def test_mb_ce_gain_bypassed_and_swamped():
    """[MB "Voltage Amplifiers", from memory]: the circuit of 4.2 with R_L 10k, β 100.
    Fully bypassed: book 117 (25 mV rule), ngspice 109.8; swamped (180 Ω unbypassed,
    820 Ω bypassed): book 13.1, ngspice 12.86.  Swamping makes the gain far less
    sensitive to the model, which the book-vs-engine gaps show."""
    m = book_model(100, 1.0839e-3 * 100 / 101)
    req = Request("ce", 10.0, load_ohm=10e3, source_ohm=0.0, mid_hz=1e3)
    _, _, full = midband_at_27(req, m, **MB, RE=0.0, RE_BYP=1e3, C_BYP=SHORT_C)
    _, _, swamped = midband_at_27(req, m, **MB, RE=180.0, RE_BYP=820.0, C_BYP=SHORT_C)
    # ngspice: tests/reference/netlists/textbook/mb-voltage-divider.cir (bypassed, av) and
    # tests/reference/netlists/textbook/mb-swamped.cir (av)
    assert abs(full["h"]) == pytest.approx(109.8, rel=0.01)
    assert abs(full["h"]) == pytest.approx(117, rel=0.08)
    assert abs(swamped["h"]) == pytest.approx(12.86, rel=0.01)
    assert abs(swamped["h"]) == pytest.approx(13.1, rel=0.02)
    gap_full = abs(abs(full["h"]) / 117 - 1)
    gap_swamped = abs(abs(swamped["h"]) / 13.1 - 1)
    assert gap_swamped < gap_full / 2
    assert full["h"].real < 0            # inverting


def test_bn_ce_unbypassed_emitter_resistor():
    """[BN Ch. 5, "CE emitter-bias configuration", unbypassed, from memory]: V_CC 20 V,
    R_B 470k, R_C 2.2k, R_E 0.56k, β 120: A_v −3.855 (ngspice and lcapy), book −3.89;
    Z_i 59.77k (ngspice), book 59.34k."""
    m = book_model(120, 4.3426e-3 * 120 / 121)
    req = Request("ce", 20.0, load_ohm=None, source_ohm=0.0)
    _, _, mid = midband_at_27(req, m, R1=470e3, R2=OPEN, RC=2.2e3, RE=560.0,
                              C_IN=SHORT_C, C_OUT=SHORT_C)
    # ngspice: tests/reference/netlists/textbook/bn-ch5-emitter-bias.cir (av, zin)
    assert mid["h"].real == pytest.approx(-3.855, rel=0.01)
    assert mid["h"].real == pytest.approx(-3.89, rel=0.012)
    assert abs(mid["zin"]) == pytest.approx(59.77e3, rel=0.01)
    assert abs(mid["zin"]) == pytest.approx(59.34e3, rel=0.012)


def test_bn_common_base():
    """[BN Ch. 5, "Common-base configuration", from memory]: I_E 1.3 mA, R_C 5k, α 0.98
    (β 49): Z_i = R_E‖r_e 19.61 Ω (ngspice 19.54 Ω), A_v +245.9 (ngspice; book 245–250).
    The book's split supply (V_EE 2 V, V_CC 8 V) is shifted to one 10 V supply with the
    base held at 2 V by a stiff divider and a large C_B; the base current through the
    divider's 80 Ω leaves I_E at 1.298 mA, and the ngspice figures are of this circuit."""
    m = book_model(49, 1.3e-3 * 49 / 50)
    req = Request("cb", 10.0, load_ohm=None, source_ohm=0.0)
    _, op, mid = midband_at_27(req, m, R1=400.0, R2=100.0, RC=5e3, RE=1e3, C_B=SHORT_C,
                               C_IN=SHORT_C, C_OUT=SHORT_C)
    assert op.ie[0] == pytest.approx(1.3e-3, rel=0.005)
    # ngspice: tests/reference/netlists/textbook/bn-ch5-common-base.cir (zin, av)
    assert abs(mid["zin"]) == pytest.approx(19.54, rel=0.01)
    assert mid["h"].real == pytest.approx(245.9, rel=0.01)
    assert mid["h"].real == pytest.approx(245.0, rel=0.025)
    assert abs(mid["zout"]) == pytest.approx(5e3, rel=0.001)    # book Z_o = R_C


def test_bn_emitter_follower():
    """[BN Ch. 5, "Emitter-follower configuration"; inputs confirmed, results from memory]:
    V_CC 12 V, R_B 220k, R_E 3.3k, β 100: A_v 0.99621 (ngspice; book 0.996), Z_i 132.72k
    (ngspice; book 132.2k), Z_o 12.49 Ω (ngspice; book 12.56 Ω)."""
    m = book_model(100, 2.0628e-3 * 100 / 101)
    req = Request("cc", 12.0, load_ohm=None, source_ohm=0.0)
    _, _, mid = midband_at_27(req, m, R1=220e3, R2=OPEN, RE=3.3e3, C_IN=SHORT_C,
                              C_OUT=SHORT_C)
    # ngspice: tests/reference/netlists/textbook/bn-ch5-emitter-follower.cir (av, zin, zout)
    assert mid["h"].real == pytest.approx(0.99621, rel=5e-4)
    assert abs(mid["zin"]) == pytest.approx(132.72e3, rel=0.005)
    assert abs(mid["zin"]) == pytest.approx(132.2e3, rel=0.01)
    assert abs(mid["zout"]) == pytest.approx(12.49, rel=0.01)
    assert abs(mid["zout"]) == pytest.approx(12.56, rel=0.015)


BN9 = dict(R1=40e3, R2=10e3, RC=4e3, RE_BYP=2e3)


@pytest.mark.parametrize("caps, ngspice, book", [
    (dict(C_IN=10e-6, C_OUT=SHORT_C, C_BYP=SHORT_C), 6.735, 6.86),      # f_Ls
    (dict(C_IN=SHORT_C, C_OUT=1e-6, C_BYP=SHORT_C), 25.670, 25.68),     # f_LC
    (dict(C_IN=SHORT_C, C_OUT=SHORT_C, C_BYP=20e-6), 321.06, 327.0),    # f_LE
    (dict(C_IN=10e-6, C_OUT=1e-6, C_BYP=20e-6), 328.0, 327.0),          # all three
])
def test_bn_low_frequency_cutoffs(caps, ngspice, book):
    """[BN Ch. 9, "Low-frequency response—BJT amplifier", from memory]: V_CC 20 V, 40k/10k,
    R_C 4k, R_E 2k bypassed, R_L 2.2k, R_s 1k, β 100: f_Ls 6.86, f_LC 25.68, f_LE 327 Hz
    (book, each capacitor alone); ngspice 6.735 / 25.670 / 321.06 and 328.0 Hz with all three.
    The book's r_e = 26 mV/I_E is why f_Ls and f_LE are 2–3 % off the book."""
    m = book_model(100, 1.587e-3 * 100 / 101)
    req = Request("ce", 20.0, load_ohm=2.2e3, source_ohm=1e3, mid_hz=10e3)
    f = low_edge_at_27(req, m, **BN9, **caps)
    # ngspice: tests/reference/netlists/textbook/bn-ch9-low-frequency.cir (f_ls, f_lc, f_le, f_all)
    assert f == pytest.approx(ngspice, rel=0.01)
    assert f == pytest.approx(book, rel=0.03)


def test_bn_source_to_load_gain():
    """Same circuit, midband A_vs: ngspice −49.78 (book ≈ −51.2, with 26 mV)."""
    m = book_model(100, 1.587e-3 * 100 / 101)
    req = Request("ce", 20.0, load_ohm=2.2e3, source_ohm=1e3, mid_hz=10e3)
    _, _, mid = midband_at_27(req, m, **BN9, C_IN=SHORT_C, C_OUT=SHORT_C, C_BYP=SHORT_C)
    # ngspice: tests/reference/netlists/textbook/bn-ch9-low-frequency.cir (avs)
    assert mid["h"].real == pytest.approx(-49.78, rel=0.01)
    assert mid["h"].real == pytest.approx(-51.2, rel=0.04)
