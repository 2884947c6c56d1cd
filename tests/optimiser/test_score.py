"""The ranking score: its terms, and the distortion term against the exponential law."""

import numpy as np
import pytest
from scipy.special import iv

from optimiser.device import thermal_voltage
from optimiser.score import degeneration, hd2_pct, score, score_terms


def test_terms_and_sum():
    t = score_terms(gain_inf_db=21.0, target_db=20.0, tol_db=2.0, drift_pct=5.0, hd2_pct=0.3,
                    supply_a=2e-3, emptied=2)
    assert float(t["gain"]) == pytest.approx(0.5)
    assert float(t["drift"]) == pytest.approx(0.5)
    assert float(t["distortion"]) == pytest.approx(0.3)
    assert float(t["current"]) == pytest.approx(0.2)
    assert float(t["stock"]) == pytest.approx(0.5)
    s = score(gain_inf_db=21.0, target_db=20.0, tol_db=2.0, drift_pct=5.0, hd2_pct=0.3,
              supply_a=2e-3, emptied=2)
    assert float(s) == pytest.approx(2.0)
    # no gain target: no gain term
    t = score_terms(gain_inf_db=3.0, target_db=None, tol_db=1.0, drift_pct=0, hd2_pct=0,
                    supply_a=0, emptied=0)
    assert float(t["gain"]) == 0.0


@pytest.mark.parametrize("vpk", [0.1e-3, 0.5e-3, 1e-3])
def test_hd2_matches_the_exponential_law(vpk):
    # exp(x·sinθ) has harmonics in the ratio of modified Bessel functions I_n(x)
    # (Abramowitz & Stegun 9.6.34); HD2 = I_2(x)/I_1(x) → x/4 for small x.
    x = vpk / thermal_voltage(25.0)
    exact = 100 * iv(2, x) / iv(1, x)
    assert float(hd2_pct(vpk, 1.0)) == pytest.approx(exact, rel=0.01)


def test_feedback_divides_the_second_harmonic():
    assert float(hd2_pct(1e-3, 1.0, 9.0)) == pytest.approx(float(hd2_pct(1e-3, 1.0)) / 10)
    assert float(degeneration("ce", 330.0, 600.0, 1e4)) == 330.0
    assert float(degeneration("cc", 1e3, 600.0, 1e3)) == pytest.approx(500.0)
    assert float(degeneration("cb", 1e3, 1e3, None)) == pytest.approx(500.0)
    assert np.all(np.asarray(hd2_pct(1e-3, np.array([1.0, 2.0]))) > 0)


def test_headroom_term_penalises_a_collector_near_saturation():
    # common practice: a quiescent V_CE of at least a quarter of the supply
    from optimiser.score import headroom_term
    assert headroom_term(3.0, 12.0) == 0.0
    assert headroom_term(6.0, 12.0) == 0.0
    assert abs(float(headroom_term(1.5, 12.0)) - 0.5) < 1e-12
    assert float(headroom_term(0.6, 12.0)) > float(headroom_term(1.2, 12.0)) > 0.0
    assert headroom_term(None, 12.0) == 0.0       # unknown V_CE: a lower bound of 0


def test_a_follower_without_a_gain_target_is_scored_against_unity():
    from optimiser.request import Request
    from optimiser.score import FOLLOWER_TOL_DB, score_gain_target

    assert score_gain_target(Request(topology="cc", supply_v=12.0)) == (0.0, FOLLOWER_TOL_DB)
    assert score_gain_target(Request(topology="cc", supply_v=12.0, gain=0.5,
                                     gain_tol_db=2.0)) == pytest.approx((20 * np.log10(0.5), 2.0))
    assert score_gain_target(Request(topology="ce", supply_v=12.0))[0] is None
    # −3 dB of loss costs three tolerances; unity costs nothing
    t = score_terms(gain_inf_db=np.array([-3.0, 0.0]), target_db=0.0, tol_db=FOLLOWER_TOL_DB,
                    drift_pct=0, hd2_pct=0, supply_a=0, emptied=0)
    assert list(t["gain"]) == [3.0, 0.0]
