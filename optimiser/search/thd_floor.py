"""The THD ceiling at the skeletons of a stage whose junction the source drives
directly (docs/search.md, B22): the floor of :mod:`optimiser.thd_bounds` for a stage
that stays forward-active over the cycle (one that leaves the region fails the THD
target outright), the engine's own THD for the rest.

The engine's THD (the quasi-static transfer of :mod:`optimiser.distortion`) depends
on the resistors, the transistor and the nominal operating point only: every
capacitor stands for a DC source at midband, whatever its value.  So a skeleton's
THD, computed with the capacitors shorted, is that of every design built on it.
"""

from __future__ import annotations

import numpy as np

from optimiser import distortion
from optimiser.device import thermal_voltage
from optimiser.stages import module
from optimiser.stages.base import DEGENERATED, base_held
from optimiser.thd_bounds import early_compression, emitter_driven_thd_floor, least_vce

__all__ = ["applies", "floor_proven", "floor_proven_range", "thd_keep", "SCREEN_AFTER",
           "screens", "screen_active", "engine_keep", "PEAK_MARGIN_V", "leaves_active_at_peaks"]

#: Margin (V, and the same share of the quiescent I_C) by which a peak of the period
#: must miss the forward-active edge before :func:`leaves_active_at_peaks` claims it:
#: the collector level solves the operating point with :func:`optimiser.dc.solve_bias`,
#: the engine with :func:`optimiser.dc.operating_point` (the same equations and
#: solver, equal to far fewer digits than this).
PEAK_MARGIN_V = 1e-6

#: THD misses the confirmation must have met (skeletons failing the THD target at
#: their first full evaluation, ``stats["pruned"]["thd_confirm"]``) before every later
#: skeleton of a ce search is checked with the engine's THD ahead of its quick
#: evaluation: where the THD ceiling is not what stops the skeletons, the check would
#: only add its cost.  Either way it is exact (the engine's own verdict).
SCREEN_AFTER = 10


def applies(request) -> bool:
    """A THD ceiling is set and the source drives the junction directly: the input at
    the emitter with the base held by a capacitor, from a source of 0 Ω."""
    mod = module(request.topology)
    return (request.thd_max_pct is not None and request.source_ohm == 0
            and mod.INPUT == "emitter" and base_held(mod))


def floor_proven(request, rc, op, model) -> np.ndarray:
    """True where the stages of collector resistors ``rc`` and nominal operating
    point ``op`` miss ``thd_max_pct`` (where :func:`applies`): a stage that leaves the
    forward-active region over the cycle fails the THD target
    (:func:`optimiser.evaluate.thd_rule`); one that stays in it has V_CE ≥ vce_sat and
    V_CE ≥ :func:`least_vce` over the cycle, so the floor holds for it."""
    v = request.input_vpk
    rc = np.asarray(rc, dtype=float)
    rl = rc if request.load_ohm is None else rc * request.load_ohm / (rc + request.load_ohm)
    ic, vce, vt = np.asarray(op.ic), np.asarray(op.vce), np.asarray(op.vt)
    vcb = vce - np.asarray(op.vbe)
    # the exact point's compression, less 1 % for the base–collector terms
    c_lo = 0.99 * early_compression(ic, rl, vcb, model.vaf)
    vce_min = np.maximum(least_vce(v, vt, ic, rl, vce, c_lo), model.vce_sat)
    floor = emitter_driven_thd_floor(v, vt, ic, rl, vcb, model.vaf, request.source_ohm, vce_min)
    return floor > request.thd_max_pct


def floor_proven_range(request, rc, re_total, ic_lo, ic_hi, model, beta) -> np.ndarray:
    """:func:`floor_proven` before the DC point is solved, from the node's I_C
    bracket [ic_lo, ic_hi] (B1): V_CE0 ≥ V − I_C·R_C − I_E·R_E with
    I_E ≤ I_C·(1 + 2/β) (the base current, with room for the base–collector
    diode's), V_CB0 ≥ that V_CE0 less 1 V (V_BE < 1 V, as B1 takes it), and
    V_CB0 ≤ V for the least compression."""
    v = request.input_vpk
    vt = thermal_voltage(25.0)          # the nominal operating point's
    rc, ic_hi = np.asarray(rc, dtype=float), np.asarray(ic_hi, dtype=float)
    rl = rc if request.load_ohm is None else rc * request.load_ohm / (rc + request.load_ohm)
    vce_lo = request.supply_v - ic_hi * rc - ic_hi * (1.0 + 2.0 / beta) * np.asarray(re_total)
    c_lo = early_compression(ic_lo, rl, request.supply_v, model.vaf)
    vce_min = np.maximum(least_vce(v, vt, ic_hi, rl, vce_lo, c_lo), model.vce_sat)
    floor = emitter_driven_thd_floor(v, vt, ic_hi, rl, vce_lo - 1.0, model.vaf,
                                     request.source_ohm, vce_min)
    return floor > request.thd_max_pct


def screens(request) -> bool:
    """A THD ceiling is set on a stage of the degenerated gain law (ce): the skeletons
    may be checked with the engine's THD before their quick evaluation
    (:func:`engine_keep`, once :func:`screen_active`)."""
    return (request.thd_max_pct is not None
            and module(request.topology).SEARCH.gain_law == DEGENERATED)


def screen_active(request, stats: dict) -> bool:
    """Whether the engine's THD check of the skeletons is in effect (:func:`screens`
    and :data:`SCREEN_AFTER` THD misses met by the confirmation)."""
    return screens(request) and stats["pruned"].get("thd_confirm", 0) >= SCREEN_AFTER


def engine_keep(request, batch, model, op, stats: dict) -> np.ndarray:
    """True for the stages of ``batch`` (nominal operating point ``op``) whose THD at
    input_vpk may meet ``thd_max_pct``: the engine's THD is at most the ceiling and the
    period stays forward-active, as :func:`optimiser.evaluate.thd_rule` judges (the
    quasi-static THD does not depend on the capacitors' values, so it is that of every
    design built on the skeleton); the others are counted in
    ``stats["pruned"]["thd_engine"]``."""
    thd, active = distortion.thd_at_input(request, batch, model, op)
    keep = (thd <= request.thd_max_pct) & active
    pr = stats["pruned"]
    pr["thd_engine"] = pr.get("thd_engine", 0) + int((~keep).sum())
    return keep


def leaves_active_at_peaks(request, batch, model, op) -> np.ndarray:
    """True where the period of input_vpk provably leaves the forward-active region, so
    that the THD target fails (:func:`optimiser.evaluate.thd_rule`): the engine's own
    transfer (:func:`optimiser.distortion.transfer`) at the two peaks of the EMF, ±v̂,
    which are samples of the engine's period (θ = 90° and 270°), fails
    :func:`optimiser.distortion.forward_active` by more than PEAK_MARGIN_V (V_CE below
    vce_sat, or I_C below IC_FLOOR of the quiescent current)."""
    v = float(request.input_vpk)
    emf = np.broadcast_to(np.array([v, -v]), (batch.n, 2))
    _, vce, ic = distortion.transfer(request, batch, model, op, emf)
    ic0 = np.asarray(op.ic)[:, None]
    low_v = vce < model.vce_sat - PEAK_MARGIN_V
    low_i = ic < (distortion.IC_FLOOR - PEAK_MARGIN_V) * ic0
    return (low_v | low_i).any(axis=1)


def thd_keep(request, sk, batch, model, op, stats: dict) -> np.ndarray:
    """True for the skeletons of ``sk`` (its ``batch`` and operating point ``op``)
    whose THD may meet ``thd_max_pct``: those the floor proves above it are dropped
    (``stats["pruned"]["thd_floor"]``), and of the rest those whose engine THD is
    above it or whose period leaves the forward-active region, as the THD target
    of :func:`optimiser.evaluate.thd_rule` judges (``stats["pruned"]["thd_engine"]``)."""
    keep = ~floor_proven(request, sk.RC, op, model)
    pr = stats["pruned"]
    pr["thd_floor"] = pr.get("thd_floor", 0) + int((~keep).sum())
    rest = np.flatnonzero(keep)
    if rest.size:
        keep[rest] = engine_keep(request, batch.take(rest), model, op.take(rest), stats)
    return keep
