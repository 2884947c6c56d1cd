"""The score that ranks designs meeting a request (lower is better).

    score = |G∞ − G_target| / tol        gain:   G∞ the midband gain in dB with every
                                                 capacitor shorted, target and tol in dB
                                                 (0 when the request sets no gain; a
                                                 follower without one: 0 dB ±
                                                 FOLLOWER_TOL_DB)
          + drift / DRIFT_UNIT_PCT       bias drift: ic_drift_pct
          + HD2 / THD_UNIT_PCT           distortion: the second harmonic the junction's
                                         exponential law gives for the midband drive
                                         v̂_be (capacitors shorted), reduced by the local
                                         feedback: HD2 = 25 %·(v̂_be/V_T)/(1 + g_m·R_deg)
          + I_supply / CURRENT_UNIT_A    supply current: through R1 plus I_C
          + STOCK_PENALTY × (rows emptied)   stock: each real resistor row or
                                         transistor row the builds would empty
          + max(0, 1 − V_CE / (HEADROOM_FRACTION·V_supply))  headroom: a quiescent
                                         V_CE low in the supply leaves little room
                                         for the signal and for drift (common
                                         practice: bias near the middle of the
                                         load line, not at its saturated end)

The weights are the constants below, their one home: the search's bounds
(:mod:`optimiser.search.bounds`) read them at each call.

The gain and distortion terms use the stage with its capacitors shorted (what
the resistors and the transistor set), so that the score of a stage does not
depend on which capacitors are picked; the capacitors are chosen afterwards,
small ones that meet the request.  HD2 ≈ v̂_be/(4·V_T) is the textbook
small-drive result for an exponential junction, and local feedback of loop
gain T = g_m·R_deg divides the closed-loop second harmonic by 1 + T (from
memory: Gray & Meyer, "Analysis and Design of Analog Integrated Circuits",
large-signal BJT distortion and the effect of feedback on distortion).
R_deg is each topology's own (``degeneration`` of its module in :mod:`optimiser.stages`).  The reported thd_pct (the full quasi-static
sweep) is a hard target when the request sets thd_max_pct.  Every term is documented in docs/search.md.
Each term is ≥ 0, which the search uses as a lower bound before the
distortion is known.
"""

from __future__ import annotations

import numpy as np

from .stages import module as stage_module

__all__ = ["DRIFT_UNIT_PCT", "THD_UNIT_PCT", "CURRENT_UNIT_A", "STOCK_PENALTY",
           "FOLLOWER_TOL_DB", "score_gain_target",
           "HEADROOM_FRACTION", "headroom_term", "gain_term", "hd2_pct", "degeneration", "score_terms", "score"]

#: A drift of this many % costs 1 (against the other terms' units below).
DRIFT_UNIT_PCT = 10.0
#: An HD2 of this many % costs 1.
THD_UNIT_PCT = 1.0
#: A supply current of this many A costs 1.
CURRENT_UNIT_A = 10e-3
#: Each stock row the builds would empty costs this much.
STOCK_PENALTY = 0.25
#: V_CE below this fraction of the supply is penalised (common practice).
HEADROOM_FRACTION = 0.25


def headroom_term(vce_v, supply_v):
    """max(0, 1 − V_CE/(HEADROOM_FRACTION·V_supply)): 0 with ample headroom, 1 at V_CE = 0.

    ``vce_v`` is the quiescent collector-emitter voltage (V, array); ``None``
    (not yet known) counts as 0, which keeps every lower bound valid.
    """
    if vce_v is None or supply_v is None:
        return 0.0
    want = HEADROOM_FRACTION * float(supply_v)
    v = np.nan_to_num(np.asarray(vce_v, dtype=float), nan=want)
    return np.maximum(0.0, 1.0 - v / want)


#: A follower asked for no particular gain is scored against unity (0 dB) with this
#: tolerance: a buffer that loses a few dB to its source and load is a worse buffer.
FOLLOWER_TOL_DB = 1.0


def score_gain_target(request) -> tuple[float | None, float]:
    """(target dB, tolerance dB) of the score's gain term for ``request``.

    The request's own gain target when it sets one; otherwise what the topology
    asks (``score_gain_target()`` of its module: a follower, unity (0 dB) ±
    FOLLOWER_TOL_DB); otherwise no gain term.  Only the score uses this: the
    request's hard targets are unchanged.
    """
    if request.gain_db is not None:
        return float(request.gain_db), float(request.gain_tol_db)
    own = stage_module(request.topology).score_gain_target()
    if own is not None:
        return float(own[0]), float(own[1])
    return None, float(request.gain_tol_db)


def gain_term(gain_inf_db, target_db: float | None, tol_db: float):
    """Distance of the shorted-capacitor gain to the target, in units of the tolerance."""
    g = np.asarray(gain_inf_db, dtype=float)
    if target_db is None:
        return np.zeros_like(g)
    return np.abs(g - target_db) / max(float(tol_db), 1e-3)


def hd2_pct(input_vpk: float, drive, loop=0.0):
    """Second-harmonic distortion in % of a junction driven with v̂_be = input_vpk·drive.

    ``drive`` is |v_be/v_emf| at mid_hz with the capacitors shorted (V/V),
    ``loop`` the local loop gain g_m·R_deg; V_T at 25 °C.
    """
    from optimiser.device import thermal_voltage
    return 25.0 * float(input_vpk) * np.asarray(drive, dtype=float) / thermal_voltage(25.0) / (
        1.0 + np.asarray(loop, dtype=float))


def degeneration(topology: str, re, source_ohm: float, load_ohm: float | None):
    """R_deg of the distortion term (ohm), as the topology defines it: RE (ce),
    R_S‖RE (cb), RE‖R_L (cc)."""
    return stage_module(topology).degeneration(re, source_ohm, load_ohm)


def score_terms(*, gain_inf_db, target_db, tol_db, drift_pct, hd2_pct, supply_a, emptied,
                vce_v=None, supply_v=None):
    """The six terms of the score as arrays (NaN drift or HD2 counts as 0).

    Parameters are arrays (or scalars) broadcasting together: dB, %, %, A, a
    count of emptied rows, and the quiescent V_CE with the supply voltage (V)
    for the headroom term (0 while V_CE is not known).
    """
    drift = np.nan_to_num(np.asarray(drift_pct, dtype=float), nan=0.0)
    thd = np.nan_to_num(np.asarray(hd2_pct, dtype=float), nan=0.0)
    return {
        "gain": gain_term(gain_inf_db, target_db, tol_db),
        "drift": drift / DRIFT_UNIT_PCT,
        "distortion": thd / THD_UNIT_PCT,
        "current": np.asarray(supply_a, dtype=float) / CURRENT_UNIT_A,
        "stock": STOCK_PENALTY * np.asarray(emptied, dtype=float),
        "headroom": headroom_term(vce_v, supply_v),
    }


def score(**kw):
    """Sum of :func:`score_terms` (same arguments)."""
    t = score_terms(**kw)
    return t["gain"] + t["drift"] + t["distortion"] + t["current"] + t["stock"] + t["headroom"]
