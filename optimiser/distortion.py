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
           "IC_FLOOR", "waveform_of", "thd_of", "thd_of_wave", "swing_of", "thd_at_input",
           "thd_active_of", "forward_active"]

N_POINTS = 256
HARMONICS = range(2, 10)
#: The cut-off edge of the swing: I_C falls below this share of its quiescent value.
IC_FLOOR = 0.01
#: The swing limit's bracketing grid: this many amplitudes, geometric from
#: _GRID_FLOOR·supply_v to supply_v (neighbours 1.34× apart), then this many halvings
#: of the bracket (below 1e-9 of the limit).
_GRID = 48
_GRID_FLOOR = 1e-6
_GRID_BLOCK = 8
_BISECT = 30


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
    # Node voltages from the emitter and the junction voltages, and I_C from the
    # collector branch where it has a resistance.  Where an ideal source drives a
    # junction hard (base and emitter both held without resistance), I_C from the
    # junction law is the difference of two exponentials many orders above it and keeps
    # no digit, while V_BE and V_BC stay exact; the emitter is then held (r_e = 0), and
    # elsewhere r_e bounds the currents.  Equal to the other forms at the solution.
    VE = ve + (ic + ib) * re
    VB = VE + vbe
    VC = VE + (vbe - vbc)
    with np.errstate(divide="ignore", invalid="ignore"):
        ic = np.where(rc > 0, (vc - VC) / np.where(rc > 0, rc, 1.0), ic)
    return load(VB, VE, VC), vbe - vbc, ic


def waveform_of(transfer_fn, amplitude, n: int, points: int = N_POINTS):
    """One period of a sine EMF of ``amplitude`` (V, scalar or (n,)) through
    ``transfer_fn(emf (n, k)) -> v_load (n, k)``: (phase_emf, v_load), each (n, points)."""
    a = np.broadcast_to(np.asarray(amplitude, dtype=float), (n,))[:, None]
    k = np.arange(points)
    emf = a * np.sin(2.0 * np.pi * k / points)[None, :]
    if points % 4 == 0:
        # a sampled sine takes each value twice: solve the points/2 + 1 distinct ones
        q = points // 4
        j = np.where(k <= q, k, np.where(k <= 3 * q, 2 * q - k, k - points))
        distinct = a * np.sin(2.0 * np.pi * np.arange(-q, q + 1) / points)[None, :]
        return emf, transfer_fn(distinct)[:, j + q]
    return emf, transfer_fn(emf)


def waveform(request, batch, model, op, amplitude=None, points: int = N_POINTS):
    """v_load over one period of a sine EMF of ``amplitude`` (default input_vpk).

    Returns (phase_emf (n, points), v_load (n, points)).
    """
    a = request.input_vpk if amplitude is None else amplitude
    return waveform_of(lambda e: transfer(request, batch, model, op, e)[0], a, batch.n, points)


def thd_of_wave(v) -> np.ndarray:
    """THD (%) over harmonics 2–9 of sampled periods ``v`` (n, points)."""
    X = np.fft.rfft(v, axis=1)
    fund = np.abs(X[:, 1])
    harm = np.sqrt(np.sum(np.abs(X[:, list(HARMONICS)]) ** 2, axis=1))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(fund > 0, 100.0 * harm / fund, np.nan)


def thd_of(transfer_fn, amplitude, n: int) -> np.ndarray:
    """THD (%) of v_load for a sine EMF of ``amplitude`` through ``transfer_fn``; (n,)."""
    return thd_of_wave(waveform_of(transfer_fn, amplitude, n)[1])


def thd_pct(request, batch, model, op) -> np.ndarray:
    """THD of v_load over harmonics 2–9, in %, for the EMF amplitude input_vpk; (n,)."""
    _, v = waveform(request, batch, model, op)
    return thd_of_wave(v)


def forward_active(vce, ic, ic0, vce_sat) -> np.ndarray:
    """The forward-active test of the swing and of the THD's validity: V_CE ≥ vce_sat
    and I_C ≥ IC_FLOOR of the quiescent ``ic0`` (broadcast against ``ic``)."""
    return (vce >= vce_sat) & (ic >= IC_FLOOR * ic0)


def thd_active_of(state, amplitude, n: int):
    """THD (%) of v_load for a sine EMF of ``amplitude`` through ``state(emf (n, k)) ->
    (v_load, forward_active)``, and whether every sample point of that period is
    forward-active; each (n,).

    The quasi-static transfer is the forward model's: past the forward-active edge
    (saturation, cut-off) it no longer describes the circuit, so a THD computed from a
    period that leaves the region is not the circuit's THD (docs/model.md).
    """
    seen = {}

    def fn(emf):
        v, ok = state(emf)
        seen["ok"] = ok.all(axis=1)
        return v

    _, v = waveform_of(fn, amplitude, n)
    return thd_of_wave(v), seen["ok"]


def thd_at_input(request, batch, model, op):
    """:func:`thd_pct` and whether the stage stays forward-active over the whole period
    of input_vpk (:func:`thd_active_of`); each (n,)."""
    ic0 = np.asarray(op.ic)[:, None]

    def state(emf):
        v, vce, ic = transfer(request, batch, model, op, emf)
        return v, forward_active(vce, ic, ic0, model.vce_sat)

    return thd_active_of(state, request.input_vpk, batch.n)


def swing_vpk(request, batch, model, op):
    """Largest symmetric load swing in the forward-active region, V peak; (n,).

    The swing limit is the largest EMF amplitude ``a`` for which the transistor
    is forward-active (V_CE ≥ vce_sat and I_C ≥ IC_FLOOR of its quiescent
    value) at every EMF of the period, i.e. over the whole interval [−a, a].
    On each sign of the EMF the first failure going out from 0 is bracketed on
    a geometric grid of amplitudes up to supply_v (solved in blocks going
    outward, each batched over the designs not yet failed on both signs), then
    bisected inside its bracket.  Beyond that first failure the forward-active
    test may pass again (behind an ideal source a junction can be driven past
    the exponent where the device law continues linearly, ``EXP_LIMIT``, and
    V_CE rises there), so neither the grid nor the bisection ever looks past
    the bracket.  At the limit the swing is the smaller of the positive and
    negative peaks of v_load over the period (the load peaks at ±a and at the
    grid amplitudes inside).  NaN when no EMF up to supply_v reaches a limit.

    Returns (swing_vpk, emf_limit_vpk).
    """
    n = batch.n
    ic0 = np.asarray(op.ic)[:, None]

    def state(emf, rows=None):
        b, o = (batch, op) if rows is None else (batch.take(rows), op.take(rows))
        v, vce, ic = transfer(request, b, model, o, emf)
        return v, forward_active(vce, ic, ic0 if rows is None else ic0[rows], model.vce_sat)

    return swing_of(state, n, request.supply_v)


def swing_of(state, n: int, supply_v: float):
    """The swing search of :func:`swing_vpk` over ``state(emf (r, k), rows) -> (v_load,
    forward_active)`` (``rows``: the designs of ``emf``'s rows, ``None`` for all ``n``).

    Returns (swing_vpk, emf_limit_vpk), each (n,).
    """
    top = float(supply_v)
    grid = top * np.geomspace(_GRID_FLOOR, 1.0, _GRID)            # (k,)
    signed = np.concatenate([grid, -grid])                          # (2k,): + then −
    v_grid = np.full((n, 2 * _GRID), np.nan)
    bad = np.ones((n, 2, _GRID), dtype=bool)
    # march out in blocks of amplitudes, for the designs that have not yet failed on
    # both sides (the hard-driven points past a failure are the costly ones to solve)
    todo = np.arange(n)
    for s in range(0, _GRID, _GRID_BLOCK):
        cols = np.r_[s:min(s + _GRID_BLOCK, _GRID)]
        cols2 = np.concatenate([cols, cols + _GRID])
        v, good = state(np.broadcast_to(signed[cols2], (todo.size, cols2.size)),
                        None if todo.size == n else todo)
        v_grid[todo[:, None], cols2[None, :]] = v
        # (rows, cols) advanced indices around the sign slice give shape (rows, cols, 2)
        bad[todo[:, None], :, cols[None, :]] = ~good.reshape(-1, 2, cols.size).transpose(0, 2, 1)
        todo = todo[~bad[todo, :, :cols[-1] + 1].any(axis=2).all(axis=1)]
        if todo.size == 0:
            break
    reached = bad.any(axis=2)                                       # (n, 2): + and − EMF
    first = np.argmax(bad, axis=2)                                  # first failing amplitude
    hi = np.where(reached, grid[first], top)
    lo = np.where(reached & (first > 0), grid[np.maximum(first - 1, 0)], 0.0)
    sign = np.array([1.0, -1.0])[None, :]
    for _ in range(_BISECT):
        mid = 0.5 * (lo + hi)
        _, good = state(mid * sign)
        lo = np.where(good, mid, lo)
        hi = np.where(good, hi, mid)
    a = np.min(np.where(reached, lo, np.inf), axis=1)
    finite = np.isfinite(a)
    a_eval = np.where(finite, a, 0.0)[:, None]
    v_end, _ = state(a_eval * sign)
    inside = np.abs(signed)[None, :] < a_eval
    top_v = np.maximum(np.max(v_end, axis=1), np.max(np.where(inside, v_grid, -np.inf), axis=1))
    low_v = np.minimum(np.min(v_end, axis=1), np.min(np.where(inside, v_grid, np.inf), axis=1))
    pos = np.maximum(top_v, 0.0)
    neg = np.maximum(-low_v, 0.0)
    swing = np.where(finite, np.minimum(pos, neg), np.nan)
    return swing, np.where(finite, a, np.nan)
