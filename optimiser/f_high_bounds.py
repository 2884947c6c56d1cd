"""Ceiling of the upper band edge from the transistor's collector–base capacitance
and the collector's conductance (docs/search.md, B23).

A stage with its output at the collector (ce, cb) carries, at the collector node,
the conductance G = 1/R_C + 1/R_L + g_o and the capacitance C_μ to the base.
Its load voltage is the collector's current injection over the node's admittance,
|H(ω)| = |I(ω)|/|G + jωC_μ| — where the injection is the transconductance's
(which emitter feedback, C_π and the Miller loading of the base only lower from
its mid_hz value) plus the feed-forward through C_μ, at most ωC_μ per volt of
EMF (the base voltage is at most the EMF: the input has a non-negative real
part).  So with A = H_mid·|G + jω_mid·C_μ| + ω_mid·C_μ,

    |H(ω)| ≤ (A + ωC_μ)/|G + jωC_μ|,

and the −3.01 dB line H_mid/√2 is crossed by x = ωC_μ at most the larger root
of (A + x)² = (H_mid²/2)(G² + x²) — a ceiling of the engine's f_high wherever
H_mid > √2 (below that the feed-forward alone can hold the response up).  A
forward-biased base–collector junction adds conductance the bound does not
hold, so it is claimed only for stages whose V_CE is at least F_HIGH_VCE_MIN.

Pure functions over numpy arrays; no I/O.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["F_HIGH_VCE_MIN", "F_HIGH_MARGIN", "f_high_ceiling", "collector_conductance_max"]

#: The bound is claimed only where V_CE is at least this (V): against the engine a
#: stage at V_CE = 0.28 V (base–collector junction forward) reached 1.0064 of it.
F_HIGH_VCE_MIN = 0.4
#: The ceiling is widened by this (measured against the engine on random ce and cb
#: stages with V_CE ≥ F_HIGH_VCE_MIN: at most 0.9947 of it without the margin).
F_HIGH_MARGIN = 1.01


def collector_conductance_max(rc, load_ohm, ic, vaf):
    """Largest conductance at the collector node (S): 1/R_C + 1/R_L + g_o with
    g_o ≤ I_C/(V_AF − 1 V) (V_CB ≥ −1 V in forward-active operation)."""
    g = 1.0 / np.asarray(rc, dtype=float)
    if load_ohm:
        g = g + 1.0 / float(load_ohm)
    if math.isfinite(vaf):
        # (an Early voltage of 1 V or less leaves g_o unbounded: no ceiling then)
        g = g + (np.asarray(ic, dtype=float) / (float(vaf) - 1.0) if vaf > 1.0 else np.inf)
    return g


def f_high_ceiling(gain_mid, g_out, c_mu: float, mid_hz: float) -> np.ndarray:
    """Upper bound of the −3.01 dB upper band edge (Hz) of a stage whose gain
    magnitude at ``mid_hz`` is ``gain_mid`` (V/V) and whose collector node has a
    conductance of at most ``g_out`` (S) and the capacitance ``c_mu`` (F) to the
    base; with F_HIGH_MARGIN.  inf where ``gain_mid`` ≤ √2 or ``c_mu`` is 0.

    The bound grows with ``g_out`` and falls as ``gain_mid`` grows, so the least
    gain and the largest conductance a node allows bound every stage beneath it.
    """
    h = np.asarray(gain_mid, dtype=float)
    g = np.asarray(g_out, dtype=float)
    if not c_mu > 0:
        return np.full(np.broadcast(h, g).shape, np.inf)
    xm = 2.0 * math.pi * float(mid_hz) * float(c_mu)
    a = h * np.sqrt(g * g + xm * xm) + xm
    k = h * h / 2.0 - 1.0
    with np.errstate(invalid="ignore", divide="ignore"):
        x = (a + np.sqrt(a * a - k * (h * h / 2.0 * g * g - a * a))) / np.where(k > 0, k, 1.0)
    x = np.where((k > 0) & np.isfinite(g), x, np.inf)
    return x / (2.0 * math.pi * float(c_mu)) * F_HIGH_MARGIN
