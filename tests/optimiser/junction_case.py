"""The set-up the junction floor's checks share (B12 of docs/search.md): the engine's
gain + distortion + headroom score terms of a batch of stages, which stages are valid
and inside the gain window, and the floor's arguments from each stage's bias."""

from __future__ import annotations

import numpy as np

from optimiser.dc import thevenin
from optimiser.evaluate import evaluate
from optimiser.prune import bias_current
from optimiser.score import score_terms
from optimiser.search import gain_window, skeleton_figures
from optimiser.search.bounds import GAIN_SLACK_DB


def engine_terms_and_floor_args(req, b, t, m, lo, hi, least_ok: int):
    """(ok, terms, actual, kw, rth): the stages of ``b`` (transistor ``t``, device
    ``m``, Early bounds ``lo``, ``hi``) the engine finds valid with a gain that can
    reach the window (at least ``least_ok`` of them, asserted), the engine's score
    terms, their gain + distortion + headroom sum, :func:`optimiser.prune.
    junction_floor`'s keyword arguments (without ``k_in``) and each stage's R_TH."""
    ev = evaluate(req, b, t, None, band_edges=False, large_signal=False)
    f = skeleton_figures(req, b, t)
    win = gain_window(req)
    ok = ev.valid & (f["gain_inf_db"] >= 20 * np.log10(win[0]) - GAIN_SLACK_DB)
    assert ok.sum() > least_ok
    v = req.supply_v
    terms = score_terms(gain_inf_db=f["gain_inf_db"], target_db=req.gain_db,
                        tol_db=req.gain_tol_db, drift_pct=0.0, hd2_pct=f["hd2_pct"],
                        supply_a=0.0, emptied=0, vce_v=f["vce_v"], supply_v=v)
    actual = terms["gain"] + terms["distortion"] + terms["headroom"]
    vth, rth = thevenin(v, b.R1, b.R2)
    ic_lo = bias_current(vth, rth, b.re_total, m, 25.0, None, lo)
    ic_hi = bias_current(vth, rth, b.re_total, m, 25.0, None, hi)
    kw = dict(ic_lo=ic_lo, ic_hi=ic_hi, ve_lo=ic_lo * b.re_total, supply_v=v,
              load_ohm=req.load_ohm, input_vpk=req.input_vpk,
              gain_lo_db=20 * np.log10(win[0]) - GAIN_SLACK_DB,
              target_db=req.gain_db, tol_db=req.gain_tol_db, vce_sat=m.vce_sat)
    return ok, terms, actual, kw, rth
