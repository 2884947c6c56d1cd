"""The score of a chain (lower is better), from the terms of :mod:`optimiser.score`.

    gain        |G − G_target| / tol, G the whole chain's gain at mid_hz (dB)
    drift       the larger of the two stages' ic_drift_pct, over DRIFT_UNIT_PCT
    distortion  the whole chain's thd_pct at the request's input_vpk, over THD_UNIT_PCT
    current     both dividers' and both collectors' current from the supply (a cascode:
                what its divider and its collector resistor draw)
    stock       each real resistor or transistor row the builds would empty
    headroom    the worse of the two stages' V_CE headroom terms

The weights are those of :mod:`optimiser.score` (their one home).  Pure functions.
"""

from __future__ import annotations

import numpy as np

from optimiser.score import score_terms

__all__ = ["chain_score_terms", "supply_current"]


def supply_current(ev) -> np.ndarray:
    """Current drawn from the supply (A), arrays (n,): through each stage's R1 and
    each transistor's collector; a cascode (no coupling: every branch from the supply
    a resistor, one current through both transistors) through each resistor from the
    supply."""
    V = float(ev.request.supply_v)
    total = np.zeros(ev.batch.n)
    form = ev.batch.form
    if form.coupling is None:
        for role, a, b in form.wiring:
            if form.kind(role) == "resistor" and a == "supply":
                r = ev.batch.role(role)
                with np.errstate(divide="ignore", invalid="ignore"):
                    total += np.where(r > 0, (V - ev.volts[b]) / np.where(r > 0, r, 1.0), 0.0)
        return total
    for stage, st in zip(ev.batch.form.stages, ev.stages, strict=True):
        r1 = ev.batch.role(f"{stage}.R1")
        with np.errstate(divide="ignore", invalid="ignore"):
            total += np.where(r1 > 0, (V - st["vb_v"]) / np.where(r1 > 0, r1, 1.0), 0.0)
        total += st["ic_a"]
    return total


def chain_score_terms(ev, emptied) -> dict[str, np.ndarray]:
    """The score terms of the chains of a :class:`~optimiser.pair_evaluate.PairEvaluation`
    (``emptied``: stock rows each would empty, array (n,))."""
    req = ev.request
    drift = np.max(np.stack([st["ic_drift_pct"] for st in ev.stages]), axis=0)
    vce = np.min(np.stack([st["vce_v"] for st in ev.stages]), axis=0)
    return score_terms(gain_inf_db=ev.metrics["gain_db"], target_db=req.gain_db,
                       tol_db=req.gain_tol_db, drift_pct=drift, hd2_pct=ev.metrics["thd_pct"],
                       supply_a=supply_current(ev), emptied=emptied, vce_v=vce,
                       supply_v=req.supply_v)
