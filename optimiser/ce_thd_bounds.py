"""A lower bound of the quasi-static THD of a common-emitter stage (docs/search.md, B25).

Pure functions over numpy arrays; the search takes them at the collector candidates
of a ce stage once their exact operating point is solved.

The reduced loop (a ce stage behind a source resistance)
--------------------------------------------------------
At midband the engine's THD (:func:`optimiser.distortion.thd_pct`) is that of the
load voltage over one period of a sine EMF of amplitude v̂.  The ce stage's
quasi-static circuit (:func:`optimiser.stages.ce.quasi_static`) is the base Thevenin
V_B0' + k·e behind r_b (k = R_TH/(R_TH + R_S), r_b = R_TH‖R_S), the unbypassed
emitter resistance r_e to a held node, and the collector Thevenin behind
R' = R_C‖R_L; the load voltage is −R'·(I_C − I_C0), so the THD is that of I_C.  The
device law without its base–collector diode terms and the I_S "−1" terms
(docs/model.md, "Currents") is I_C = J·q, I_B = J/β, J = I_S·e^{V_BE/V_T},
q = 1 + V_CB/V_AF.  With j = J/J0, u = ln j and i = I_C/I_C0, the base loop
k·e = ΔV_BE + r_b·ΔI_B + r_e·ΔI_E and the collector's
ΔV_CB = −R'·ΔI_C − r_e·ΔI_E − ΔV_BE give exactly

    x = u + g_b·(j − 1) + g_e·(i − 1),      x = k·e/V_T = a·sin θ,
    i = j·(1 + c − d·u − ε·(j − 1))/(1 + c·j),

with a = k·v̂/V_T, g_e = r_e·I_C0/V_T, g_b = (r_e + r_b)·I_B0/V_T,
c = I_C0·(R' + r_e)/w, d = V_T/w, ε = r_e·I_B0/w and w = V_AF + V_CB0 (c = d = ε = 0
without an Early voltage).  x grows with u, so each sample of the period is one
scalar root (Newton's method).  ``reduced_thd_pct`` takes the THD of i over the
harmonics 2–9, sampled at 32 points of the period: the harmonics above the 9th of
these smooth periods are far below the digits kept, so 32 points give the engine's
256-point figure (aliasing of harmonics 23 and above only).

What it leaves out: the base–collector diode's currents, e^{−V_CE/V_T} of the
junction's (β times that in the base loop); near saturation they flatten a peak and
the reduced THD can exceed the engine's (14 % above it at V_CE = 0.24 V on a random
stage).  So the floor is claimed only where the period's least V_CE, from the
reduced loop's own extreme currents, is at least ``VCE_CLAIM`` above vce_sat and at
least ``VCE_FLOOR`` (there e^{−V_CE/V_T} < 4·10^-9), and their share,
BC_SHARE·(1 + (r_e + r_b)·I_C0/V_T)·(1 + g_b + g_e)·j_max·e^{−V_CE,min/V_T}/a of the
fundamental, is taken off (it matters only for a THD far below any ceiling, e.g.
0.007 % at V_CE,min = 0.50 V behind 5 kΩ at 12 mA, where the reduced THD was 1.3 %
above the engine's).  Elsewhere the floor is 0 (no claim): the engine decides.

Claim: for a ce stage at its nominal operating point (I_C0, I_B0, V_CE0, V_CB0) with
the forms' r_e, the engine's THD at input_vpk is at least
``ce_thd_floor`` (the reduced THD less ``THD_MARGIN`` and ``THD_SLACK``), wherever the latter is
positive.  Checked against the engine on random stages of the three emitter forms
(sources 0–10 kΩ, loads open to 1 kΩ, V_AF 15 V to none, 10–50 mV) in
tests/optimiser/test_ce_thd_bound.py: the reduced THD is within 5·10^-5 of the
engine's, relative, where the floor is claimed.
"""

from __future__ import annotations

import numpy as np

__all__ = ["THD_MARGIN", "THD_SLACK", "BC_SHARE", "VCE_CLAIM", "VCE_FLOOR", "ce_loop_terms", "reduced_thd_pct",
           "ce_thd_floor"]

#: Relative margin taken off the reduced THD (its measured error is 5·10^-5) ...
THD_MARGIN = 0.005
#: ... and an absolute one (percentage points: the engine's FFT keeps no more digits
#: of a THD far below any ceiling).
THD_SLACK = 1e-4
#: The floor is claimed where the period's least V_CE is at least this far above
#: vce_sat ...
VCE_CLAIM = 0.3
#: ... and at least this (V).
VCE_FLOOR = 0.5
#: Multiple of the base–collector diode's share of the period taken off (as
#: :data:`optimiser.thd_bounds.BC_SHARE`: its harmonics against the fundamental, with
#: a factor two to spare).
BC_SHARE = 8.0
#: Samples of the period; the sine takes each value twice, so 17 distinct ones.
_POINTS = 32
_Q = _POINTS // 4
_SIN = np.sin(2.0 * np.pi * np.arange(-_Q, _Q + 1) / _POINTS)          # distinct samples
_K = np.arange(_POINTS)
_IDX = np.where(_K <= _Q, _K, np.where(_K <= 3 * _Q, 2 * _Q - _K, _K - _POINTS)) + _Q
#: Columns 1 (the fundamental) and 2–9 of the DFT matrix of the period.
_DFT = np.exp(-2j * np.pi * np.outer(_K, np.r_[1, np.arange(2, 10)]) / _POINTS)
_NEWTON = 40


def ce_loop_terms(input_vpk, vt, ic, ib, vcb, k_in, r_b, r_e, r_load, vaf):
    """(a, g_b, g_e, c, d, ε) of the reduced loop (module doc) for a ce stage at its
    operating point: I_C0 ``ic``, I_B0 ``ib``, V_CB0 ``vcb``; input divider share
    ``k_in`` = R_TH/(R_TH + R_S), base resistance ``r_b`` = R_TH‖R_S, unbypassed
    emitter resistance ``r_e``, collector load ``r_load`` = R_C‖R_L, ``vaf`` (inf:
    none)."""
    ic, ib, vcb, k_in, r_b, r_e, r_load, vt = (np.asarray(x, dtype=float) for x in (
        ic, ib, vcb, k_in, r_b, r_e, r_load, vt))
    a = k_in * float(input_vpk) / vt
    g_e = r_e * ic / vt
    g_b = (r_e + r_b) * ib / vt
    if np.isfinite(vaf):
        w = vaf + vcb
        c, d, eps = ic * (r_load + r_e) / w, vt / w, r_e * ib / w
    else:
        c = d = eps = np.zeros(np.broadcast(a, g_e).shape)
    return np.broadcast_arrays(a, g_b, g_e, c, d, eps)


def reduced_thd_pct(a, g_b, g_e, c, d, eps):
    """THD (%, harmonics 2–9) of i over a period of x = a·sin θ in the reduced loop
    (module doc), with the extremes of j and i over the period and whether every
    sample's root converged: (thd, j_min, j_max, i_min, i_max, converged), each of the
    arguments' broadcast shape."""
    a, g_b, g_e, c, d, eps = (np.asarray(v, dtype=float) for v in
                              np.broadcast_arrays(a, g_b, g_e, c, d, eps))
    shape = a.shape
    a, g_b, g_e, c, d, eps = (v.reshape(-1, 1) for v in (a, g_b, g_e, c, d, eps))
    x = a * _SIN[None, :]
    u = x / (1.0 + g_b + g_e)
    with np.errstate(over="ignore", invalid="ignore"):
        for _ in range(_NEWTON):
            j = np.exp(u)
            num = 1.0 + c - d * u - eps * (j - 1.0)
            den = 1.0 + c * j
            i = j * num / den
            di = (j * num - j * (d + eps * j)) / den - i * c * j / den
            f = u + g_b * (j - 1.0) + g_e * (i - 1.0) - x
            u = u - f / (1.0 + g_b * j + g_e * di)
        j = np.exp(u)
        i = j * (1.0 + c - d * u - eps * (j - 1.0)) / (1.0 + c * j)
        f = u + g_b * (j - 1.0) + g_e * (i - 1.0) - x
        ok = np.all(np.abs(f) <= 1e-12 * (1.0 + np.abs(x)), axis=1) & np.all(np.isfinite(i), axis=1)
        X = np.abs(i[:, _IDX] @ _DFT)
        thd = 100.0 * np.sqrt(np.sum(X[:, 1:] ** 2, axis=1)) / X[:, 0]
    out = (thd, j.min(axis=1), j.max(axis=1), i.min(axis=1), i.max(axis=1), ok)
    return tuple(v.reshape(shape) for v in out)


def ce_thd_floor(input_vpk, vt, ic, ib, vce, vcb, k_in, r_b, r_e, r_load, vaf,
                 vce_sat) -> np.ndarray:
    """A lower bound (%) of the engine's THD at ``input_vpk`` of ce stages at their
    nominal operating point (arguments as :func:`ce_loop_terms`, ``vce`` = V_CE0):
    the reduced THD less THD_MARGIN where the period's least V_CE,
    V_CE0 − (R' + r_e)·I_C0·(i_max − 1) − r_e·I_B0·(j_max − 1), is at least
    vce_sat + VCE_CLAIM and VCE_FLOOR and every root converged; 0 (no claim)
    elsewhere."""
    terms = ce_loop_terms(input_vpk, vt, ic, ib, vcb, k_in, r_b, r_e, r_load, vaf)
    thd, _, j_max, _, i_max, ok = reduced_thd_pct(*terms)
    ic, ib, r_e, r_load, vce = (np.asarray(x, dtype=float) for x in (ic, ib, r_e, r_load, vce))
    vce_min = vce - (r_load + r_e) * ic * (i_max - 1.0) - r_e * ib * (j_max - 1.0)
    claim = ok & (vce_min >= max(float(vce_sat) + VCE_CLAIM, VCE_FLOOR)) & np.isfinite(thd)
    # the base–collector diode's share: e^{−V_CE/V_T} of the junction's current (up to
    # j_max of J0) in the collector, and through the base loop (r_e + r_b) times
    # that over V_T (I_B's part is β times the collector's), against a fundamental
    # of about a/(1 + g) of I_C0
    a, g_b, g_e = terms[0], terms[1], terms[2]
    vt = np.asarray(vt, dtype=float)
    h = 1.0 + (r_e + np.asarray(r_b, dtype=float)) * ic / vt
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        bc = 100.0 * BC_SHARE * h * (1.0 + g_b + g_e) * j_max * np.exp(-vce_min / vt) / a
    bc = np.where(np.isfinite(bc), bc, np.inf)
    floor = (1.0 - THD_MARGIN) * np.where(claim, thd, 0.0) - THD_SLACK - bc
    return np.where(claim, np.maximum(floor, 0.0), 0.0)
