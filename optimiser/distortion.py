"""Quasi-static midband large-signal figures: THD and output swing (docs/model.md).

At midband every capacitor is replaced by a DC source holding its operating-point
voltage and the device charges are ignored (TF = 0, CJC = 0), so the stage is a
memoryless map from the source EMF to the load voltage.  Each stage module
(:mod:`optimiser.stages`) turns that circuit into three terminal Thevenins,
and :func:`optimiser.dc.solve_terminals` solves it for all designs and all
phase points at once (arrays of shape (n, k)).
"""

from __future__ import annotations

import numpy as np

from .dc import OperatingPoint, solve_terminals
from .device import DeviceModel, junction_currents
from .stage import StageBatch
from .stages import module as stage_module

__all__ = ["N_POINTS", "HARMONICS", "transfer", "waveform", "thd_pct", "swing_vpk",
           "IC_FLOOR"]

N_POINTS = 256
HARMONICS = range(2, 10)
#: The cut-off edge of the swing: I_C falls below this share of its quiescent value.
IC_FLOOR = 0.01
_BISECT = 40


def transfer(request, batch: StageBatch, model: DeviceModel, op: OperatingPoint, emf):
    """Load voltage, V_CE and I_C for EMF values ``emf`` (V, shape (n, k)).

    ``op`` is the nominal operating point (25 °C, nominal β) whose voltages the
    capacitors hold.  Returns (v_load, vce, ic), each (n, k).
    """
    mod = stage_module(batch.topology)
    emf = np.asarray(emf, dtype=float)
    (vb, rb, ve, re, vc, rc), load = mod.quasi_static(
        batch, request.supply_v, request.source_ohm, request.load_ohm, op, emf)
    is_ = np.asarray(op.is_)[:, None]
    beta = np.asarray(op.beta)[:, None]
    vt = np.asarray(op.vt)[:, None]
    inv_vaf = 0.0 if not np.isfinite(model.vaf) else 1.0 / model.vaf
    vbe, vbc, _ = solve_terminals(vb, rb, ve, re, vc, rc, is_, beta, vt, inv_vaf)
    ic, ib, *_ = junction_currents(vbe, vbc, is_, beta, vt, inv_vaf)
    VB = vb - ib * rb
    VE = ve + (ic + ib) * re
    VC = vc - ic * rc
    return load(VB, VE, VC), vbe - vbc, ic


def waveform(request, batch, model, op, amplitude=None, points: int = N_POINTS):
    """v_load over one period of a sine EMF of ``amplitude`` (default input_vpk).

    Returns (phase_emf (n, points), v_load (n, points)).
    """
    a = request.input_vpk if amplitude is None else amplitude
    a = np.broadcast_to(np.asarray(a, dtype=float), (batch.n,))[:, None]
    k = np.arange(points)
    emf = a * np.sin(2.0 * np.pi * k / points)[None, :]
    if points % 4 == 0:
        # a sampled sine takes each value twice: solve the points/2 + 1 distinct ones
        q = points // 4
        j = np.where(k <= q, k, np.where(k <= 3 * q, 2 * q - k, k - points))
        distinct = a * np.sin(2.0 * np.pi * np.arange(-q, q + 1) / points)[None, :]
        v_d, _, _ = transfer(request, batch, model, op, distinct)
        return emf, v_d[:, j + q]
    v, _, _ = transfer(request, batch, model, op, emf)
    return emf, v


def thd_pct(request, batch, model, op) -> np.ndarray:
    """THD of v_load over harmonics 2–9, in %, for the EMF amplitude input_vpk; (n,)."""
    _, v = waveform(request, batch, model, op)
    X = np.fft.rfft(v, axis=1)
    fund = np.abs(X[:, 1])
    harm = np.sqrt(np.sum(np.abs(X[:, list(HARMONICS)]) ** 2, axis=1))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(fund > 0, 100.0 * harm / fund, np.nan)


def swing_vpk(request, batch, model, op):
    """Largest symmetric load swing in the forward-active region, V peak; (n,).

    The EMF amplitude is raised until, at either extreme of the period, V_CE
    falls below vce_sat or I_C below IC_FLOOR of its quiescent value
    (bisection on each sign of the EMF; the quasi-static map is monotone, so
    the extremes of the period are at ±amplitude).  At that amplitude the
    smaller of the positive and negative load peaks is the swing.  NaN when
    an EMF amplitude of supply_v does not reach the limits.

    Returns (swing_vpk, emf_limit_vpk).
    """
    n = batch.n
    ic0 = np.asarray(op.ic)[:, None]

    def ok(emf):
        _, vce, ic = transfer(request, batch, model, op, emf)
        return (vce >= model.vce_sat) & (ic >= IC_FLOOR * ic0)

    sign = np.array([1.0, -1.0])[None, :]
    top = np.full((n, 2), float(request.supply_v))
    fails_top = ~ok(top * sign)
    lo = np.zeros((n, 2))
    hi = top.copy()
    for _ in range(_BISECT):
        mid = 0.5 * (lo + hi)
        good = ok(mid * sign)
        lo = np.where(good, mid, lo)
        hi = np.where(good, hi, mid)
    limit = np.where(fails_top, lo, np.inf)
    a = np.min(limit, axis=1)
    finite = np.isfinite(a)
    a_eval = np.where(finite, a, 0.0)[:, None]
    v, _, _ = transfer(request, batch, model, op, a_eval * sign)
    pos = np.maximum(np.max(v, axis=1), 0.0)
    neg = np.maximum(-np.min(v, axis=1), 0.0)
    swing = np.where(finite, np.minimum(pos, neg), np.nan)
    return swing, np.where(finite, a, np.nan)
