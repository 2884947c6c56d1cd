"""Safety margins of the search's bounds and the score bound of a skeleton.

Each margin widens a closed-form estimate so that it stays on the safe side of
the engine (docs/search.md lists the bounds B1–B20); the pure bounds themselves
are in :mod:`optimiser.prune` and :mod:`optimiser.f_low_bounds`.

The score's weights have one home, :mod:`optimiser.score`; the bounds turn their
figures into score terms only through the functions below, which read the
weights at each call (a changed weight changes every bound with it).
"""

from __future__ import annotations

import numpy as np

from optimiser import score as weights
from optimiser.request import Request
from optimiser.score import score_gain_target, score_terms

#: Safety margins of the pruning estimates (docs/search.md).
GAIN_SLACK_DB = 1e-3         # midband estimate vs engine (agree to ~1e-6 dB)
HIGH_GAIN_SLACK_DB = 6.0     # how far above the window a stage may sit and still be
                             # pulled into it by small capacitors (assumption A2)
GAIN_BOUND_MARGIN = 1.05    # closed-form gain bounds B6, B8 and cb/cc forms widened by this
LEAST_GAIN_MARGIN = 1.01    # B11, the least gain an RC gives a ce stage (measured: the bound
                            # without it stays ≤ 0.992 of the engine's gain)
B15_MARGIN = 1.003          # the tighter ce gain bound of B6 at the bias level and B15
                            # (measured: the engine's gain ≤ 0.9994 of it without margin)
DRIFT_REL_SLACK = 0.05       # × (V+1)/V_AF, relative margin on the bias drift bound
DRIFT_ABS_SLACK = 0.01       # percentage points (with the relative margin alone the bound
                             # stayed ≤ 0.9986 of the engine's drift on 10^5 random stages)
IC_MIN_MARGIN = 1.001        # the top of the current bracket widened by this against the
                             # least-current target (B1 holds with no margin in the tests)
DRIFT_BOUND_CAP_PCT = 20.0   # the bound claims no more than this (B2 fails for huge drifts)


def skeleton_bound(request: Request, gain_inf_db, drift_pct, hd2, supply_a, vce_v,
                   stock_lb) -> np.ndarray:
    """B15 at the skeleton level: the score without the capacitors' terms.

    The gain (capacitors shorted), drift, distortion, current and headroom terms
    of :func:`optimiser.score.score_terms` at the skeleton's exact figures, plus the
    stock bound of its resistors; no capacitor can lower any of them.
    """
    target_db, tol_db = score_gain_target(request)
    terms = score_terms(gain_inf_db=gain_inf_db, target_db=target_db, tol_db=tol_db,
                        drift_pct=drift_pct, hd2_pct=hd2, supply_a=supply_a, emptied=0,
                        vce_v=vce_v, supply_v=request.supply_v)
    return terms["gain"] + terms["drift"] + terms["distortion"] + terms["current"] \
        + stock_lb + terms["headroom"]


def drift_term(drift_pct):
    """The score's drift term of a drift (%)."""
    return drift_pct / weights.DRIFT_UNIT_PCT


def current_term(supply_a):
    """The score's supply-current term of a current (A)."""
    return supply_a / weights.CURRENT_UNIT_A


def distortion_term(hd2_pct):
    """The score's distortion term of an HD2 (%)."""
    return hd2_pct / weights.THD_UNIT_PCT


def stock_term(rows_emptied):
    """The score's stock term of a number of emptied rows."""
    return weights.STOCK_PENALTY * rows_emptied


def headroom_volts(supply_v):
    """The V_CE below which the score's headroom term starts to cost (V)."""
    return weights.HEADROOM_FRACTION * supply_v
