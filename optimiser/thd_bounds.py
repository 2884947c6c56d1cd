"""A lower bound of the quasi-static THD of a junction driven directly by the source.

Pure functions over numpy arrays; the search (:mod:`optimiser.search`) takes them
where a stage's junction is driven by the source itself: the input at the emitter,
the base held by its capacitor, a source of 0 Ω (docs/search.md, B22).

The lemma (a directly driven junction with the Early effect)
------------------------------------------------------------
At midband the engine's THD (:func:`optimiser.distortion.thd_pct`) is that of the
load voltage over one period of a sine EMF of amplitude v̂.  With the base held and
the emitter held by a 0 Ω source, V_BE = V_BE0 − e exactly, and the collector node is
the Thevenin V_th − I_C·R' (R' = R_C‖R_L), so the load voltage is −R'·(I_C − I_C0):
its THD is that of I_C.  The device law (docs/model.md, "Currents") without its
base–collector diode terms is I_C = I_S·e^{V_BE/V_T}·(1 + V_CB/V_AF) with
V_CB = V_th − I_C·R' − V_B, which solves to

    I_C = A·G/(1 + k·G),   G = e^{V_BE/V_T},  k = I_S·R'/V_AF,

a logistic function of V_BE: I_C ∝ σ(ln c + x), x = −e/V_T, where at the quiescent
point c = k·G0 = I_C0·R'/(V_AF + V_CB0).  So the THD is a function of the drive
a = v̂/V_T and of c alone, ``logistic_thd_pct(a, c)`` (c = 0: the bare exponential,
whose harmonics are the modified Bessel functions of a).  The base–collector
terms the form leaves out are e^{−V_CE/V_T} of the junction's current, below
4·10^-4 of it while V_CE ≥ 0.2 V; they are covered by THD_MARGIN.

The form holds only while the transistor stays forward-active over the whole cycle:
a stage driven into saturation has a THD below it (the swing flattens against the
saturation edge and the harmonics of the two ends partly cancel).  ``cannot_clip``
is a sufficient test that it does not leave forward-active at v̂: the current
rises at most to the logistic form's peak, I_C0·(1 + c)·e^{a}/(1 + c·e^{a}) ≤
I_C0·e^{a}, so V_CE falls by at most the larger of R'·(I_C,peak − I_C0) and v̂
(the emitter follows the EMF), and I_C stays above I_C0·e^{−a}.

Claim: for a stage whose base is held and whose emitter is driven from 0 Ω, with
its quiescent I_C0 ≤ ic_hi, R' ≤ rl_hi, V_CB0 ≥ vcb_lo, and
for which ``cannot_clip`` holds, the engine's THD at amplitude v̂ is at least
``emitter_driven_thd_floor``.  Checked against the engine on random stages, near
saturation included, in tests/optimiser/test_thd_bounds.py.
"""

from __future__ import annotations

import functools

import numpy as np

__all__ = ["THD_MARGIN", "CLIP_MARGIN", "C_TABLE_TOP", "logistic_thd_pct",
           "least_logistic_thd_pct", "early_compression", "least_vce", "cannot_clip",
           "emitter_driven_thd_floor"]

#: Relative margin taken off the logistic THD (the left-out base–collector terms
#: and the grid over c).
THD_MARGIN = 0.005
#: Multiple of e^{a − V_CE,min/V_T}/a taken off for the base–collector terms (their
#: harmonics against the fundamental, with a factor two to spare).
BC_SHARE = 8.0
#: Relative margin on the bare exponential's peak in the clipping test.
CLIP_MARGIN = 0.01
#: Points of the period (the engine's :data:`optimiser.distortion.N_POINTS`).
_POINTS = 256
_HARMONICS = np.arange(2, 10)
_SIN = np.sin(2.0 * np.pi * np.arange(_POINTS) / _POINTS)
#: Columns 1 (the fundamental) and 2–9 of the DFT matrix.
_DFT = np.exp(-2j * np.pi * np.outer(np.arange(_POINTS), np.r_[1, _HARMONICS]) / _POINTS)
#: The grid of compressions the least THD is tabulated on (per drive).
C_TABLE_TOP = 4.0
_C_TABLE = np.linspace(0.0, C_TABLE_TOP, 4097)


def logistic_thd_pct(a, c) -> np.ndarray:
    """THD (%, harmonics 2–9) of σ(ln c + a·sin θ), σ(z) = e^z/(1 + e^z), for drives
    ``a`` = v̂/V_T and compressions ``c`` ≥ 0 (c = 0: the bare exponential e^{a·sin θ}).

    The period is sampled at 256 points as the engine samples it."""
    a, c = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(c, dtype=float))
    shape = a.shape
    a, c = a.ravel(), c.ravel()
    # one exponential per distinct drive (a search has one), then the harmonics as a
    # product with the needed columns of the DFT matrix
    a_u, inv = np.unique(a, return_inverse=True)
    g = np.exp(a_u[:, None] * _SIN[None, :])[inv.ravel()]
    i = g / (1.0 + c[:, None] * g)
    X = np.abs(i @ _DFT)
    fund = X[:, 0]
    harm = np.sqrt(np.sum(X[:, 1:] ** 2, axis=1))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(fund > 0, 100.0 * harm / fund, 0.0).reshape(shape)


def early_compression(ic, r_load, vcb, vaf) -> np.ndarray:
    """c = I_C0·R'/(V_AF + V_CB0), the compression of the logistic form (0 without
    an Early voltage)."""
    ic, r_load, vcb = (np.asarray(x, dtype=float) for x in (ic, r_load, vcb))
    if not np.isfinite(vaf):
        return np.zeros(np.broadcast(ic, r_load, vcb).shape)
    return ic * r_load / (vaf + vcb)


def least_vce(input_vpk, vt, ic_hi, rl_hi, vce_lo, c_lo=0.0) -> np.ndarray:
    """A lower bound of V_CE over a cycle of amplitude ``input_vpk`` at the emitter
    (0 Ω source) for quiescent I_C0 ≤ ic_hi, R' ≤ rl_hi, V_CE0 ≥ vce_lo and a
    compression c ≥ c_lo: V_CE(e) = V_CE0 − R'·(I_C(e) − I_C0) − e, and the current
    rises (e < 0) at most to the logistic form's I_C0·(1 + c)·e^a/(1 + c·e^a) (the
    base–collector terms only lower it; CLIP_MARGIN covers their share of I_C0),
    while it falls (e > 0) the emitter's rise is at most v̂."""
    a = float(input_vpk) / np.asarray(vt, dtype=float)
    ea = np.exp(a)
    c = np.maximum(np.asarray(c_lo, dtype=float), 0.0)
    rise = ((1.0 + c) * ea / (1.0 + c * ea) - 1.0) * (1.0 + CLIP_MARGIN) + CLIP_MARGIN * a
    drop = np.asarray(rl_hi, dtype=float) * np.asarray(ic_hi, dtype=float) * rise
    return np.asarray(vce_lo, dtype=float) - np.maximum(drop, float(input_vpk))


def cannot_clip(input_vpk, vt, ic_hi, rl_hi, vce_lo, vce_sat, ic_floor, c_lo=0.0) -> np.ndarray:
    """True where a stage driven at the emitter from 0 Ω provably stays forward-active
    (V_CE ≥ vce_sat and I_C ≥ ic_floor·I_C0) over a whole cycle of amplitude
    ``input_vpk``, for quiescent I_C0 ≤ ic_hi, R' ≤ rl_hi, V_CE0 ≥ vce_lo and a
    compression c ≥ c_lo (:func:`least_vce`; the current never falls below
    I_C0·e^{−a})."""
    a = float(input_vpk) / np.asarray(vt, dtype=float)
    fall = np.exp(-a) * (1.0 - CLIP_MARGIN)
    return (least_vce(input_vpk, vt, ic_hi, rl_hi, vce_lo, c_lo) >= vce_sat) & (fall >= ic_floor)


@functools.lru_cache(maxsize=32)
def _least_thd_table(a: float) -> np.ndarray:
    """At each point c_k of :data:`_C_TABLE`, a lower bound of the logistic THD at
    every c ≤ c_k: per cell [c_(k−1), c_k] the smaller end less the largest change
    of the THD over that cell and its two neighbours (the form is smooth: within a
    cell it moves no further than between neighbouring points), the least of these
    over the cells up to c_k, times 1 − THD_MARGIN."""
    t = logistic_thd_pct(np.full(_C_TABLE.size, a), _C_TABLE)
    d = np.abs(np.diff(t))
    step = np.maximum(np.maximum(d, np.r_[d[1:], d[-1]]), np.r_[d[0], d[:-1]])
    cell = np.minimum(t[:-1], t[1:]) - step
    return (1.0 - THD_MARGIN) * np.r_[t[0], np.minimum.accumulate(cell)]


def least_logistic_thd_pct(a, c_hi) -> np.ndarray:
    """A lower bound (%) of the logistic THD at drive ``a`` over every c in
    [0, c_hi] (0 beyond the table's last point, C_TABLE_TOP)."""
    a, c_hi = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(c_hi, dtype=float))
    out = np.zeros(a.shape)
    k = np.searchsorted(_C_TABLE, c_hi, side="left")      # first grid point ≥ c_hi
    inside = (k < _C_TABLE.size) & (c_hi >= 0)
    for av in np.unique(a[inside]):
        m = inside & (a == av)
        out[m] = _least_thd_table(float(av))[k[m]]
    return np.maximum(out, 0.0)


def emitter_driven_thd_floor(input_vpk, vt, ic_hi, rl_hi, vcb_lo, vaf, source_ohm,
                             vce_min) -> np.ndarray:
    """A lower bound (%) of the engine's THD at ``input_vpk`` for every stage whose
    base is held, whose emitter is driven from ``source_ohm`` = 0, and which stays
    forward-active over the cycle (see :func:`cannot_clip`), with quiescent
    I_C0 ≤ ic_hi, R' = R_C‖R_L ≤ rl_hi and V_CB0 ≥ vcb_lo: the least logistic THD
    over every compression c ≤ c_hi = ic_hi·rl_hi/(V_AF + vcb_lo) (so it holds
    whether or not the THD falls with c), less THD_MARGIN and the grid's slack, less
    the share the base–collector terms may take where the cycle's least V_CE
    (``vce_min``, e.g. V_CE0 less the drop of :func:`cannot_clip`) comes near
    saturation: they are at most e^{−V_CE/V_T} of the junction's current, up to
    I_C0·e^{a} over the cycle, against a fundamental of about I_C0·a/2, so
    BC_SHARE·e^{a − V_CE,min/V_T}/a of the fundamental (in %) is taken off.
    0 (no claim) for a source of any other resistance."""
    a = float(input_vpk) / np.asarray(vt, dtype=float)
    c_hi = early_compression(ic_hi, rl_hi, vcb_lo, vaf)
    a, c_hi = np.broadcast_arrays(a, c_hi)
    if source_ohm != 0:
        return np.zeros(a.shape)
    with np.errstate(over="ignore"):
        near = BC_SHARE * np.exp(a - np.asarray(vce_min, dtype=float) / np.asarray(vt, dtype=float)) / a
        return np.maximum(least_logistic_thd_pct(a, c_hi) - 100.0 * near, 0.0)
