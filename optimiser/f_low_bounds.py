"""Lower bounds of the lower band edge f_low from the coupling capacitors in stock.

Pure functions over numpy arrays; the search (:mod:`optimiser.search`) takes them
at the highest level of its tree where the resistance each capacitor sees is
bounded: the (R1, R2) pairs, the emitter options, the bias nodes and the
collector candidates.

The lemma (a first-order coupling section)
------------------------------------------
Let a capacitor C be in series with a loop whose resistance is R (real), so that the
transfer carries the factor ``T(f) = 1/(1 − j·f_c/f)``, ``f_c = 1/(2πRC)``, and let
the rest of the transfer, ``A(f)``, obey ``|A(f)| ≤ K·|A(mid)|`` for f below
mid_hz.  The engine's f_low is where ``|H| = |H(mid)|·ρ``, ρ = 10^(−EDGE_DB/20),
found from the last point of its grid below mid_hz where |H| is under that line.
Then for every f below

    f_b = mid·a·s / sqrt(1 + s² − a²),   s = f_c/mid,  a = ρ/K,

|H(f)|/|H(mid)| ≤ K·|T(f)|/|T(mid)| < ρ (|T(f)|² = x²/(1 + x²), x = f/f_c, rises
with f; solving K·T(x) = ρ·T(mid/f_c) for x gives f_b), so every grid point at or
below f_b is under the line and the root the engine refines lies above f_b:
**f_low ≥ f_b** (when f_b is above the grid's first point, 1 mHz).  f_b grows with
f_c, so it falls as R or C grows: the largest C in stock and the largest R a node
allows give a floor for every design beneath the node.

Why the stages fit the lemma, and what is assumed:

* C_IN: the source EMF drives R_S + 1/(jωC_IN) into the input node, whose
  impedance Z_in does not depend on C_IN; so H = Z_in/(Z_in + R_S + 1/(jωC_IN))·A
  with A = v_load/v_in independent of C_IN.  C_OUT: v_load = v_oc·R_L/(R_L + Z_out
  + 1/(jωC_OUT)) with v_oc and Z_out independent of C_OUT.  Each is the first-order
  factor above with R = R_S + Z_in or R = R_L + Z_out, provided Z_in, Z_out are
  real at the frequencies concerned (they are resistive networks there: the
  transistor's own capacitances are picofarads).
* The node bounds: a resistor R_g from a node to AC ground in parallel with any
  impedance Z of non-negative real part has |R_g‖Z| ≤ R_g, because
  |R_g + Z| ≥ |Z|.  So Z_in ≤ R_TH (ce and cc: the divider at the base),
  Z_in ≤ RE + RE_BYP (cb: the emitter resistance), Z_out ≤ RC (ce, cb) and
  Z_out ≤ RE + RE_BYP (cc).
* The other capacitors: by the search's assumption A1 (docs/search.md: a larger
  coupling or bypass capacitor never raises f_low) the edge of the whole stage is
  at least that of the stage with every other capacitor shorted, where A(f) is
  flat below mid_hz but for the transistor's capacitances.  K bounds what those
  (and anything else) may do: the engine rejects as invalid a stage whose gain
  rises more than FLAT_PASSBAND_DB above its mid_hz value inside the passband,
  so K = 10^(FLAT_PASSBAND_DB/20) is taken.

This is proven for the first-order section and rests on A1 for the reduction to
one capacitor; it is checked against the engine's f_low on random stages in
tests/optimiser/test_prune_f_low.py (never above it).

The bypass capacitor (a shelf)
------------------------------
With C_BYP open a ce stage does not lose its gain: it falls to the gain G_open of
the stage whose whole emitter resistance RE + RE_BYP is unbypassed, so C_BYP alone
gives no floor (a tiny C_BYP makes a valid stage with no edge from it).  A floor
needs the gain target: the engine's gain at mid_hz is at least the window's bottom
G_lo.  The capacitor Z = RE_BYP/(1 + jωC·RE_BYP) sits between the node x and
ground; by the extra element theorem H = H_∞/(1 + Z/R_A) with R_A the resistance
the node sees (the null-output impedance is infinite: no collector current, no
emitter current), so with u = ωC·RE_BYP and k = 1 + RE_BYP/R_A (H_open = H_∞/k)

    |H|² = |H_open|²·k²(1 + u²)/(k² + u²) ≤ |H_open|²·(1 + u²)      (k ≥ 1).

So where G_open·sqrt(1 + u²) < ρ·G_lo at f = f_low_max, every f up to it is below
the engine's line and f_low > f_low_max.  G_open ≤ per_z·Z' (the search's gain
ceiling per ohm of collector load, bound B6/B15, taken with RE + RE_BYP
unbypassed), so a node needs Z' = RC‖R_L ≥ ρ·G_lo/(per_z·sqrt(1 + u²))
(:func:`bypass_load_needed`).  By A1 the other capacitors, shorted, only raise the
gain at mid_hz and lower f_low.  The infinite null-output impedance neglects the
base–collector junction's own conduction: against the engine's nodal response
(random stages, 0.1 Hz to mid_hz) |H|/(|H_open|·sqrt(1 + u²)) reached 1.00097, on
stages within half a volt of saturation, so the bound is taken with
:data:`BYPASS_SHELF_MARGIN`.  C_B of a common-base stage (also a shelf) is not
bounded.
"""

from __future__ import annotations

import math

import numpy as np

from .ac import EDGE_DB, F_MIN_HZ
from .evaluate import FLAT_PASSBAND_DB

__all__ = [
    "BYPASS_SHELF_MARGIN",
    "edge_floor_hz",
    "loop_resistance_needed",
    "largest_capacitance",
    "input_loop_max",
    "output_loop_max",
    "f_low_floor",
    "bypass_load_needed",
    "cb_emitter_impedance_max",
    "CB_EMITTER_MARGIN",
    "drawer_f_low_floor",
    "capacitance_needed",
]


#: Margin of the shelf lemma (measured at most 1.00097 of it against the engine).
BYPASS_SHELF_MARGIN = 1.01


#: Margin of the common-base emitter impedance bound (measured against the engine:
#: at most 1.0074 of it unmargined, near saturation with a 50 kΩ collector load).
CB_EMITTER_MARGIN = 1.03


def _edge_factor(slack_db: float) -> float:
    """a = ρ/K of the lemma: ρ = 10^(−EDGE_DB/20), K = 10^(slack_db/20)."""
    return 10.0 ** (-(EDGE_DB + slack_db) / 20.0)


def edge_floor_hz(c_max, r_max, mid_hz: float, slack_db: float = FLAT_PASSBAND_DB):
    """Over every stage whose coupling capacitor is at most ``c_max`` (F) in a loop
    of resistance at most ``r_max`` (ohm): f_low ≥ the value returned (Hz).

    The lemma of the module: f_b = mid·a·s/sqrt(1 + s² − a²), s = f_c/mid,
    f_c = 1/(2π·r_max·c_max).  0 where ``c_max`` or ``r_max`` is infinite; below the
    engine's first grid point (1 mHz) the floor claims nothing and is 0.
    """
    c = np.asarray(c_max, dtype=float)
    r = np.asarray(r_max, dtype=float)
    a = _edge_factor(slack_db)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        s = 1.0 / (2.0 * math.pi * r * c * mid_hz)      # f_c/mid; inf where r·c = 0
        fin = np.isfinite(s)
        sf = np.where(fin, s, 0.0)
        fb = np.where(fin, mid_hz * a * sf / np.sqrt(1.0 + sf * sf - a * a), mid_hz * a)
    return np.where(fb > F_MIN_HZ, fb, 0.0)


def loop_resistance_needed(f_low_max: float, c_max: float, mid_hz: float,
                           slack_db: float = FLAT_PASSBAND_DB) -> float:
    """The least loop resistance (ohm) a coupling capacitor of at most ``c_max`` needs
    for :func:`edge_floor_hz` to stay at or below ``f_low_max``: a node whose largest
    loop resistance is below it holds no design with f_low ≤ f_low_max.

    Inverse of the floor (which falls as R grows): s = F·sqrt((1 − a²)/(mid²a² − F²)),
    R = 1/(2π·s·mid·c_max), with F = max(f_low_max, 1 mHz) (below the engine's
    first grid point nothing is claimed); 0 when F ≥ mid·a (no R is excluded).
    """
    if not (c_max > 0) or not math.isfinite(c_max):
        return 0.0
    a = _edge_factor(slack_db)
    F = max(float(f_low_max), F_MIN_HZ)
    den = (mid_hz * a) ** 2 - F * F
    if den <= 0:
        return 0.0
    s = F * math.sqrt((1.0 - a * a) / den)
    return 1.0 / (2.0 * math.pi * s * mid_hz * c_max)


def largest_capacitance(values, pieces_ok=None) -> float:
    """The largest capacitance a role can take from ``values`` (F), counting only
    the values whose stock gives enough pieces for the builds (``pieces_ok``, a mask;
    the search's capacitor options already hold only such values).  0 if none.
    Capacitors are never joined, so no pair can exceed the largest single value."""
    v = np.asarray(values, dtype=float)
    if pieces_ok is not None:
        v = v[np.asarray(pieces_ok, dtype=bool)]
    v = v[np.isfinite(v) & (v > 0)]
    return float(v.max()) if v.size else 0.0


#: The transistor terminals a source or a load can meet (a topology's INPUT, OUTPUT).
TERMINALS = ("base", "emitter", "collector")


def input_loop_max(input_at: str, source_ohm: float, rth=None, re_total=None):
    """The largest resistance C_IN can see, by the terminal the source drives (the
    topology's ``INPUT``): R_S + R_TH at the base (ce, cc: Z_in ≤ R1‖R2) or
    R_S + RE + RE_BYP at the emitter (cb: Z_in ≤ the emitter resistance).
    Arrays broadcast."""
    if input_at not in TERMINALS:
        raise ValueError(f"input_at is a terminal ({', '.join(TERMINALS)}), not {input_at!r}")
    rs = float(source_ohm or 0.0)
    if input_at == "emitter":
        return rs + np.asarray(re_total, dtype=float)
    return rs + np.asarray(rth, dtype=float)


def output_loop_max(output_at: str, load_ohm: float | None, rc=None, re_total=None):
    """The largest resistance C_OUT can see, by the terminal the load hangs from
    (the topology's ``OUTPUT``): R_L + RC at the collector (ce, cb: Z_out ≤ RC) or
    R_L + RE + RE_BYP at the emitter (cc: Z_out ≤ the emitter resistance); inf
    without a load (no load branch, so no C_OUT edge)."""
    if output_at not in TERMINALS:
        raise ValueError(f"output_at is a terminal ({', '.join(TERMINALS)}), not {output_at!r}")
    if load_ohm is None:
        shape = np.shape(rc if output_at != "emitter" else re_total)
        return np.full(shape, np.inf)
    x = re_total if output_at == "emitter" else rc
    return float(load_ohm) + np.asarray(x, dtype=float)


def f_low_floor(input_at: str, output_at: str, c_in_max: float, c_out_max: float,
                mid_hz: float, source_ohm: float, load_ohm: float | None, rth, rc, re_total,
                slack_db: float = FLAT_PASSBAND_DB):
    """Over stages with these resistors (arrays) and capacitors up to the maxima:
    f_low ≥ the larger of the C_IN and C_OUT floors (Hz; by A1 each capacitor's
    floor with the others shorted is a floor of the whole stage).  ``input_at``,
    ``output_at``: the topology's ``INPUT`` and ``OUTPUT`` terminals."""
    fin = edge_floor_hz(c_in_max, input_loop_max(input_at, source_ohm, rth, re_total),
                        mid_hz, slack_db)
    fout = edge_floor_hz(c_out_max, output_loop_max(output_at, load_ohm, rc, re_total),
                         mid_hz, slack_db)
    return np.maximum(fin, fout)


def bypass_load_needed(gain_lo, per_z, c_max: float, r_byp, f_low_max: float):
    """The least collector load Z' = RC‖R_L (ohm) a ce stage with a bypassed
    RE_BYP needs for f_low ≤ ``f_low_max`` and a mid_hz gain ≥ ``gain_lo`` when its
    gain with C_BYP open is at most ``per_z``·Z' and C_BYP ≤ ``c_max``: below it,
    over this node, f_low > f_low_max (the shelf lemma of the module).

    ρ·G_lo/(per_z·sqrt(1 + u²)·margin), u = 2π·f·c_max·RE_BYP, f = max(f_low_max, 1 mHz);
    0 where there is no bypass resistor or no capacitor.
    """
    r = np.asarray(r_byp, dtype=float)
    f = max(float(f_low_max), F_MIN_HZ)
    u = 2.0 * math.pi * f * float(c_max) * r
    rho = 10.0 ** (-EDGE_DB / 20.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = rho * np.asarray(gain_lo, dtype=float) / (np.asarray(per_z, dtype=float)
                                                      * np.sqrt(1.0 + u * u)
                                                      * BYPASS_SHELF_MARGIN)
    z = np.nan_to_num(z, nan=0.0, posinf=np.inf)
    return np.where((r > 0) & (c_max > 0), z, 0.0)


def cb_emitter_impedance_max(ic_lo, ic_hi, z_load_max, vaf: float, vt: float):
    """Over common-base stages with I_C in [``ic_lo``, ``ic_hi``] and a collector
    load RC‖R_L ≤ ``z_load_max``: the impedance looking into the emitter (base at AC
    ground, C_B shorted) is at most the value returned (ohm).

    With the base grounded, a test voltage v_e at the emitter draws
    (g_m + 1/r_o)/(1 + Z'/r_o) + 1/r_π (collector current through the load and
    r_o, plus the base current), so Z_e ≤ (1 + Z'/r_o)/g_m with g_m = I_C/V_T ≥
    I_C,lo/V_T and r_o ≥ (V_AF − 1 V)/I_C,hi; times :data:`CB_EMITTER_MARGIN` for the
    junction terms left out.  C_IN of a cb stage then sees at most
    R_S + RE‖Z_e (by A1 with C_B and C_OUT shorted).
    """
    ic_lo = np.asarray(ic_lo, dtype=float)
    ro = (vaf - 1.0) / np.asarray(ic_hi, dtype=float) if math.isfinite(vaf) else np.inf
    with np.errstate(divide="ignore", invalid="ignore"):
        z = vt / ic_lo * (1.0 + np.asarray(z_load_max, dtype=float) / ro) * CB_EMITTER_MARGIN
    return np.where(ic_lo > 0, np.nan_to_num(z, nan=np.inf), np.inf)


def drawer_f_low_floor(input_at: str, output_at: str, c_max: float, r_max: float,
                       emitter_roles: int,
                       mid_hz: float, source_ohm: float, load_ohm: float | None,
                       slack_db: float = FLAT_PASSBAND_DB) -> dict:
    """Over every stage driven at ``input_at`` and loaded at ``output_at`` (the
    topology's ``INPUT`` and ``OUTPUT`` terminals) whose resistors are at most ``r_max`` (ohm;
    twice the largest stocked value where two may be joined in series) and whose
    capacitors are at most ``c_max`` (F): f_low ≥ ``floor_hz``.

    The node bounds of the module at their largest: R1‖R2 ≤ r_max/2 (ce, cc),
    an emitter total of ``emitter_roles`` resistors ≤ emitter_roles·r_max
    (RE + RE_BYP: cb's input, cc's output), RC ≤ r_max (ce, cb output).  Each
    design's f_low is at least its C_IN floor and at least its C_OUT floor, and
    each of those falls as its loop resistance grows (:func:`edge_floor_hz`), so the
    floors at the largest loops bound every design.  Returns ``{"floor_hz",
    "input_loop_ohm", "output_loop_ohm", "input_floor_hz", "output_floor_hz"}``
    (an infinite output loop without a load).
    """
    re_tot = emitter_roles * r_max
    rin = float(input_loop_max(input_at, source_ohm, rth=r_max / 2.0, re_total=re_tot))
    rout = float(output_loop_max(output_at, load_ohm, rc=r_max, re_total=re_tot))
    fin = float(edge_floor_hz(c_max, rin, mid_hz, slack_db)) if c_max > 0 else 0.0
    fout = float(edge_floor_hz(c_max, rout, mid_hz, slack_db)) if c_max > 0 else 0.0
    return {"floor_hz": max(fin, fout), "input_loop_ohm": rin, "output_loop_ohm": rout,
            "input_floor_hz": fin, "output_floor_hz": fout}


def capacitance_needed(f_low_max: float, loop_ohm: float, mid_hz: float,
                       slack_db: float = FLAT_PASSBAND_DB) -> float:
    """The least coupling capacitance (F) for which :func:`edge_floor_hz` in a loop
    of at most ``loop_ohm`` stays at or below ``f_low_max``: a smaller capacitor in
    that loop cannot reach f_low_max (a necessary value, not a sufficient one).
    The floor depends on R·C only, so this is :func:`loop_resistance_needed` for
    1 F divided by the loop; 0 where nothing is excluded, inf without a loop."""
    if not (loop_ohm > 0) or not math.isfinite(loop_ohm):
        return 0.0 if not math.isfinite(loop_ohm) else math.inf
    return loop_resistance_needed(f_low_max, 1.0, mid_hz, slack_db) / loop_ohm
