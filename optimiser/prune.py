"""Fast bounds the search prunes with (pure array functions, no stock, no I/O).

Nothing here is a reported figure: the engine (:mod:`optimiser.evaluate`)
confirms every design.  These functions only have to be *safe*: each bound
below is documented in docs/search.md with the argument why it cannot discard
a design the engine would accept.

Units: volt, ampere, ohm, siemens; temperatures in °C.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import wrightomega

from . import score as weights
from . import stages
from .device import DeviceModel, scaled, thermal_voltage
from .stages.base import base_held

__all__ = ["wright_omega", "bias_current", "early_bounds", "early_factor_max", "midband_estimate", "junction_floor",
           "emitter_hd2_floor", "gain_headroom_floor", "common_base_hd2_floor",
           "follower_gain_floor", "ce_input_divider_max", "ce_gain_per_load"]


def early_bounds(supply_v: float, model: DeviceModel) -> tuple[float, float]:
    """Range of the Early factor ``q = 1 + V_CB/V_AF`` over any forward-active point.

    V_CB lies between ``vce_sat − 1 V`` (V_BE below 1 V) and ``supply_v``.
    """
    if not np.isfinite(model.vaf):
        return 1.0, 1.0
    return 1.0 + (model.vce_sat - 1.0) / model.vaf, 1.0 + supply_v / model.vaf


def early_factor_max(supply_v: float, ic_lo, re_lo, model: DeviceModel, q_hi: float,
                     ve_lo=None):
    """Largest Early factor of a stage whose I_C ≥ ``ic_lo`` and DC emitter
    resistance ≥ ``re_lo`` (at 25 °C, as :func:`bias_current`); with ``ve_lo``, a
    lower bound of its emitter voltage taken instead of ``ic_lo``·``re_lo``.

    The collector is at most at the supply, so ``V_CB ≤ V − V_B`` with
    ``V_B = V_BE + I_E·R_E ≥ V_BE + I_C·R_E``, and ``V_BE ≥ V_T·ln(x/I_S)``
    with ``x ≥ (I_C − I_S)/q_hi`` (``I_C ≤ q·x + I_S`` in the model of
    docs/model.md).  ``q_hi`` is the factor of :func:`early_bounds`, which the
    result never exceeds.  A tighter top of the collector-current bracket (B1)
    for nodes whose emitter already takes a part of the supply.
    """
    if not np.isfinite(model.vaf):
        return np.ones_like(np.asarray(ic_lo, dtype=float))
    is_t, _ = scaled(model, 25.0, None)
    ic_lo = np.asarray(ic_lo, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        vbe = thermal_voltage(25.0) * np.log(np.maximum(ic_lo - is_t, 0.0) / (q_hi * is_t))
    vbe = np.clip(np.nan_to_num(vbe, nan=0.0, neginf=0.0), 0.0, None)
    ve = ic_lo * np.asarray(re_lo, dtype=float) if ve_lo is None else np.asarray(ve_lo, dtype=float)
    q = 1.0 + (supply_v - vbe - ve) / model.vaf
    return np.minimum(q, q_hi)


#: Above this argument :func:`wright_omega` iterates from the asymptotic start.
OMEGA_ITERATE_ABOVE = 8.0


def wright_omega(z):
    """The Wright omega function ω(z), the w with w + ln w = z, for real ``z``.

    Above :data:`OMEGA_ITERATE_ABOVE` two Newton steps
    ``w ← w·(1 + z − ln w)/(1 + w)`` from ``z − ln z + ln z/z`` (relative error
    below 1e-15 there, checked against scipy's ``wrightomega``, which this is about
    1.7 times faster than); scipy's ``wrightomega`` below it and where ``z`` is not
    finite.
    """
    z = np.asarray(z, dtype=float)
    shape = z.shape
    z = z.ravel()
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # (in place: on the search's arrays the temporaries cost more than the logs)
        zc = np.clip(z, OMEGA_ITERATE_ABOVE, 1e300)
        t = np.log(zc)
        w = t / zc
        w += zc
        w -= t
        for _ in range(2):          # w ← w·(1 + z − ln w)/(1 + w)
            np.log(w, out=t)
            np.subtract(zc, t, out=t)
            t += 1.0
            t *= w
            w += 1.0
            np.divide(t, w, out=w)
    low = ~((z > OMEGA_ITERATE_ABOVE) & np.isfinite(z))
    if low.any():
        w[low] = np.real(wrightomega(z[low]))
    return w.reshape(shape)


def bias_current(v_th, r_th, r_e, model: DeviceModel, temp_c=25.0, beta=None, q=1.0):
    """Collector current of the divider-biased transistor for a fixed Early factor ``q``.

    Solves ``V_TH = V_BE + x·(R_TH/β + R_E·(q + 1/β))`` with
    ``x = I_S·e^{V_BE/V_T}`` (so ``I_B = x/β`` and ``I_C = q·x``) in closed form
    by the Lambert W function.  The reverse (base–collector) diode terms are
    left out: they matter only within a few tenths of a volt of saturation.
    ``I_C`` grows with ``q`` (docs/search.md, bound B1), so the two ends of
    :func:`early_bounds` bracket the collector current of the full model.

    Returns
    -------
    ic : ndarray
        Collector current, A (0 where V_TH ≤ 0).
    """
    is_t, beta_t = scaled(model, temp_c, beta)
    vt = thermal_voltage(temp_c)
    v_th, r_th, r_e, q = (np.asarray(a, dtype=float) for a in (v_th, r_th, r_e, q))
    shape = np.broadcast_shapes(v_th.shape, r_th.shape, r_e.shape, q.shape, np.shape(is_t),
                                np.shape(beta_t), np.shape(vt))
    # (in place where it can be: this runs on every node of the search)
    reff = np.empty(shape)
    np.multiply(r_e, q + 1.0 / beta_t, out=reff)
    reff += r_th / beta_t
    np.maximum(reff, 1e-9, out=reff)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        z = np.multiply(reff, is_t, out=np.empty(shape))
        z /= vt
        np.log(z, out=z)
        z += v_th / vt
        x = wright_omega(z)
        np.divide(vt, reff, out=reff)
        x *= reff
    x[~np.isfinite(x)] = 0.0
    np.maximum(x, 0.0, out=x)
    x *= q
    return x


#: Node numbers of :func:`midband_estimate`'s three nodes.
_NODES = {"base": 0, "emitter": 1, "collector": 2}
_TERMINALS: dict[str, tuple[int, int, bool]] = {}


def _terminals(topology: str) -> tuple[int, int, bool]:
    """(input node, output node, base held at AC ground) of ``topology``, from its
    module's ``INPUT``, ``OUTPUT`` and ``WIRING`` (read once)."""
    t = _TERMINALS.get(topology)
    if t is None:
        mod = stages.module(topology)
        t = _TERMINALS[topology] = (_NODES[mod.INPUT], _NODES[mod.OUTPUT], base_held(mod))
    return t


def midband_estimate(topology: str, *, r1, r2, rc, re, source_ohm, load_ohm, mid_hz, ss):
    """Gain |v_load/v_emf| and junction drive |v_be/v_emf| with every capacitor shorted.

    The same transistor stamps as :mod:`optimiser.ac` (``y_be = g_π + jωC_π``,
    ``y_bc = g_μ + jω(C_tx + C_μ)``, ``y_ce = g_m``, ``y_cc = g_x − jωC_μ``) at
    ``mid_hz`` on three nodes (base, emitter, collector), with the coupling and
    bypass capacitors as shorts: the engine's midband figures of the stage
    with capacitors shorted, to rounding.  ``re`` is the unbypassed emitter
    resistance (0: emitter grounded); ``rc`` = 0 ties the collector to the
    supply; ``load_ohm`` None is an open load.  ``ss`` is
    :func:`optimiser.ac.small_signal` at the operating point.  The topology
    (a name of :data:`optimiser.stages.NAMES`) gives the terminals: its
    ``INPUT``, ``OUTPUT`` and whether a capacitor holds its base.

    Returns
    -------
    gain, drive : ndarray (V/V)
    """
    big = 1e12
    r1, r2, rc, re = np.broadcast_arrays(*[np.asarray(a, dtype=float) for a in (r1, r2, rc, re)])
    shape = r1.shape
    w = 2.0 * np.pi * float(mid_hz)
    gl = 0.0 if not load_ohm else 1.0 / float(load_ohm)
    rs = float(source_ohm or 0.0)
    gs = 1.0 / rs if rs > 0 else big
    with np.errstate(divide="ignore"):
        grc = np.where(rc > 0, 1.0 / np.where(rc > 0, rc, 1.0), big)
        gre = np.where(re > 0, 1.0 / np.where(re > 0, re, 1.0), big)
        gbias = 1.0 / r1 + 1.0 / r2
    s = {k: np.broadcast_to(np.asarray(ss[k], dtype=float), shape)
         for k in ("gpi", "cpi", "gmu_dc", "ctx", "cmu", "gm", "gx")}
    y_be = s["gpi"] + 1j * w * s["cpi"]
    y_bc = s["gmu_dc"] + 1j * w * (s["ctx"] + s["cmu"])
    y_ce = s["gm"] + 0j
    y_cc = s["gx"] - 1j * w * s["cmu"]
    Y = np.zeros(shape + (3, 3), dtype=complex)
    J = np.zeros(shape + (3,), dtype=complex)
    B, E, C = 0, 1, 2
    Y[..., B, B] += y_be + y_bc
    Y[..., B, E] -= y_be
    Y[..., B, C] -= y_bc
    Y[..., C, B] += y_ce + y_cc
    Y[..., C, E] -= y_ce
    Y[..., C, C] -= y_cc
    Y[..., E, B] -= y_be + y_bc + y_ce + y_cc
    Y[..., E, E] += y_be + y_ce
    Y[..., E, C] += y_bc + y_cc
    # the passive stamps by the topology's terminals: the source drives INPUT, the
    # load hangs from OUTPUT, a base held at AC ground (a capacitor to ground) is a
    # short; the divider loads the base otherwise, RE the emitter, RC the collector
    inp, out, held = _terminals(topology)
    if held:
        yb = big
    else:
        yb = gbias + gs if inp == B else gbias
    ye = gre + gs if inp == E else gre
    if out == E:
        ye = ye + gl
    yc = grc + gl if out == C else grc
    Y[..., B, B] += yb
    Y[..., E, E] += ye
    Y[..., C, C] += yc
    J[..., inp] = gs
    v = _solve3(Y, J)
    return np.abs(v[..., out]), np.abs(v[..., B] - v[..., E])


def _solve3(Y, J):
    """Solve stacked 3×3 systems by Cramer's rule (much faster than LAPACK per tiny matrix)."""
    a, b, c = Y[..., 0, 0], Y[..., 0, 1], Y[..., 0, 2]
    d, e, f = Y[..., 1, 0], Y[..., 1, 1], Y[..., 1, 2]
    g, h, i = Y[..., 2, 0], Y[..., 2, 1], Y[..., 2, 2]
    A = e * i - f * h
    Bc = -(d * i - f * g)
    C = d * h - e * g
    det = a * A + b * Bc + c * C
    j0, j1, j2 = J[..., 0], J[..., 1], J[..., 2]
    x0 = (j0 * A - b * (j1 * i - f * j2) + c * (j1 * h - e * j2)) / det
    x1 = (a * (j1 * i - f * j2) - j0 * (d * i - f * g) + c * (d * j2 - j1 * g)) / det
    x2 = (a * (e * j2 - j1 * h) - b * (d * j2 - j1 * g) + j0 * (d * h - e * g)) / det
    return np.stack([x0, x1, x2], axis=-1)


#: Relative margin of :func:`junction_floor`: on 8·10^4 random ce and 6·10^4 cb
#: stages the bound without margin reached at most 0.99999 of the engine's HD2
#: (equality is the limit without feedback); tests/optimiser/test_search.py.
JUNCTION_FLOOR_MARGIN = 1.01
#: Newton steps on the cubic of :func:`junction_floor`'s stationary point (from an
#: upper bound of its root; the tangent there keeps the result a lower bound anyway;
#: on random stages four steps leave it within 1e-10 of eight, three within 1e-5).
JUNCTION_FLOOR_NEWTON = 4


def _gain_distortion_min(c, g_lo_db, target_db, tol_db):
    """min over g ≥ g_lo of |target − g|/tol + c·10^(g/10) (g in dB, c ≥ 0).

    Below the target the function is convex in g with its stationary point
    where c·10^(g/10) = K = 10/(tol·ln 10); above the target it only grows.
    """
    c = np.asarray(c, dtype=float)
    tol = max(float(tol_db), 1e-3)
    t = float(target_db)
    lo = min(float(g_lo_db), t)
    K = 10.0 / (tol * np.log(10.0))
    u_t, u_lo = 10.0 ** (t / 10.0), 10.0 ** (lo / 10.0)
    with np.errstate(divide="ignore"):
        mid = (t - 10.0 * np.log10(K / np.clip(c, K / u_t, K / u_lo))) / tol + K
    out = np.where(c <= K / u_t, c * u_t, mid)
    out = np.where(c >= K / u_lo, (t - lo) / tol + c * u_lo, out)
    if float(g_lo_db) > t:               # the whole window lies above the target
        g = float(g_lo_db)
        out = (g - t) / tol + c * 10.0 ** (g / 10.0)
    return out


def junction_floor(*, ic_lo, ic_hi, ve_lo, supply_v, load_ohm, input_vpk, gain_lo_db,
                   target_db, tol_db, vce_sat, rc=None, k_in=None):
    """Lower bound of the score's gain + distortion + headroom terms of a ce or cb stage.

    For a common-emitter stage whose midband gain with the capacitors shorted
    is G, the junction drive is v̂_be = v̂_in·G/(g_m·Z_c') with Z_c' ≤ R_C‖R_L,
    and the local feedback obeys 1 + g_m·R_E ≤ k_in·g_m·Z_c'/G (k_in ≤ 1), so
    the score's HD2 = 25 %·(v̂_be/V_T)/(1 + g_m·R_E) is at least
    ``25 %·v̂_in·G²·V_T/(I_C·(R_C‖R_L))²`` — whatever split of the emitter
    resistance gives that gain.  The same holds for a common-base stage, whose
    feedback 1 + g_m·(R_S‖R_E) is at most 1 + R_S/r_e ≈ g_m·Z_c'/G.  A larger
    I_C·R_C lowers it but eats the headroom V_CE = V − V_E − I_C·R_C.  This
    function takes the least of the three terms together over every gain
    G ≥ ``gain_lo_db`` and every collector drop y = I_C·R_C the supply allows (or
    the given ``rc``), with I_C in [ic_lo, ic_hi] and V_E ≥ ``ve_lo``
    (docs/search.md, bound B12).

    Over the gain the least is :func:`_gain_distortion_min` of
    c(y) = k·(1/y + 1/a)² (a = I_C,hi·R_L), f(c); F(y) = f(c(y)) + headroom(y) is
    convex in y (f' = u*(c) = clip(K/c, u_lo, u_t) falls with c, and c is
    log-convex), so its least value is where F' = 0: in closed form where u* = K/c,
    y² + a·y = 2K·want·a, else the root of the cubic s²(s + 1/a) = 1/(2u·k·want),
    s = 1/y, with u fixed at u_t or u_lo (Newton from above).  The result is
    F(y_a) + F'(y_a)·(y − y_a) at the worse end of the range, y_a that point
    clipped to it — the tangent of a convex function lies below it, so it is a
    lower bound even where the root is not exact.

    Arrays broadcast together; volts, amperes, ohms, dB.  Returns the bound
    (inf where no collector resistor leaves the transistor out of saturation).
    ``k_in`` (ce only) is an upper bound of the input divider R_in/(R_in + R_S),
    e.g. R_TH/(R_TH + R_S): the feedback relation then reads
    1 + g_m·R_E ≤ k_in·g_m·Z_c'/G, and the distortion floor grows by 1/k_in.
    """
    V = float(supply_v)
    ic_lo, ic_hi, ve_lo = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                                for a in (ic_lo, ic_hi, ve_lo)))
    want = weights.HEADROOM_FRACTION * V
    k = 25.0 * float(input_vpk) * thermal_voltage(25.0) / JUNCTION_FLOOR_MARGIN \
        / weights.THD_UNIT_PCT
    if k_in is not None:
        k = k / np.broadcast_to(np.clip(np.asarray(k_in, dtype=float), 1e-12, 1.0), ic_lo.shape)
    a = ic_hi * float(load_ohm) if load_ohm else None

    def coef(y):
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            x = y if a is None else y * a / (y + a)
            return np.where(x > 0, k / np.where(x > 0, x, 1.0) ** 2, np.inf)

    def f(c):
        out = np.full(c.shape, np.inf)
        fin = np.isfinite(c)
        out[fin] = _gain_distortion_min(c[fin], gain_lo_db, target_db, tol_db)
        return out

    y_max = V - ve_lo - float(vce_sat)
    if rc is not None:
        rc = np.broadcast_to(np.asarray(rc, dtype=float), ic_lo.shape)
        return np.where(ic_lo * rc <= y_max, f(coef(ic_hi * rc)) + np.maximum(
            0.0, 1.0 - (V - ic_lo * rc - ve_lo) / want), np.inf)
    # f's slope u*(c) = clip(K/c, u_lo, u_t) (:func:`_gain_distortion_min`)
    tol = max(float(tol_db), 1e-3)
    t = float(target_db)
    K = 10.0 / (tol * np.log(10.0))
    u_lo, u_t = 10.0 ** (min(float(gain_lo_db), t) / 10.0), 10.0 ** (t / 10.0)
    if float(gain_lo_db) > t:           # the whole window above the target: f linear
        u_lo = u_t = 10.0 ** (float(gain_lo_db) / 10.0)
    y_head = V - want - ve_lo               # the drop above which headroom costs
    y0 = np.clip(y_head, 0.0, np.maximum(y_max, 0.0))     # below it F only falls
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # where F' = 0 with u* = K/c: y² + a·y = 2K·want·a (y = 2K·want without a load)
        ym = 2.0 * K * want if a is None else \
            4.0 * K * want * a / (a + np.sqrt(a * a + 8.0 * K * want * a))
        ym = np.broadcast_to(ym, ic_lo.shape)
        cm = coef(ym)
        middle = (cm >= K / u_t) & (cm <= K / u_lo)
        # elsewhere u* is u_t (small c, large y) or u_lo: s²(s + b) = r, s = 1/y
        u = np.where(cm < K / u_t, u_t, u_lo)
        r = 1.0 / (2.0 * u * k * want)
        s = np.cbrt(r)
        if a is not None:
            b = 1.0 / a
            s = np.minimum(s, np.sqrt(r * a))       # both above the root
        else:
            b = 0.0
        for _ in range(JUNCTION_FLOOR_NEWTON if a is not None else 0):
            s = s - (s * s * (s + b) - r) / (s * (3.0 * s + 2.0 * b))    # from above
        ya = np.clip(np.where(middle, ym, 1.0 / s), y0, np.maximum(y_max, 0.0))
        ca = coef(ya)
        fa = f(ca) + np.maximum(ya - y_head, 0.0) / want
        slope = np.clip(K / ca, u_lo, u_t)
        inv = 1.0 / ya if a is None else 1.0 / ya + 1.0 / a
        dfa = 1.0 / want - slope * 2.0 * k * inv / (ya * ya)
        lb = fa + np.minimum(0.0, np.minimum(dfa * (y0 - ya), dfa * (y_max - ya)))
        lb = np.where(np.isnan(lb), -np.inf, lb)
    return np.where(y_max > 0, np.maximum(lb, 0.0), np.inf)


#: Relative margin of :func:`emitter_hd2_floor` and :func:`common_base_hd2_floor`
#: (tests/optimiser/test_search.py measures the bounds without it against the engine's
#: HD2: never above it).
EMITTER_HD2_MARGIN = 1.01


def emitter_hd2_floor(*, ic_hi, r_th, re_hi, z_max, source_ohm, input_vpk, model: DeviceModel,
                      q_lo: float, q_hi: float, mid_hz: float):
    """Lower bound of the score's HD2 term (%) of a common-emitter stage with
    unbypassed emitter resistance at most ``re_hi`` and I_C at most ``ic_hi``.

    The score's HD2 is 25 %·v̂_in·|v_be/v_emf|/V_T/(1 + g_m·RE).  With the
    collector AC-grounded the emitter carries (g_m + 1/Z_π)·v_be through
    RE‖r_o; a collector load only weakens that feedback, so
    d = |v_be/v_b| ≥ d_lo = 1/(1 + g_m·RE·(1 + (1 + ωτ)/β)) with Z_π = r_π/(1 + jωτ),
    τ = r_π·C_π = β·TF (β = BF·q: g_m·r_π), q in [``q_lo``, ``q_hi``].  At the base,
    G_S·|v_emf| ≤ |v_b|·(G_S + 1/R_TH + ωC_μ) + |v_be|·((1 + ωτ)/r_π + ωC_μ·g_m·Z')
    (the base current is v_be/Z_π; C_μ carries at most ωC_μ·(|v_b| + g_m·Z'·|v_be|),
    Z' ≤ ``z_max`` bounding the collector load), so
    |v_be/v_emf| ≥ d·G_S/(G_S + 1/R_TH + ωC_μ + d·((1 + ωτ)/r_π + ωC_μ·g_m·Z')),
    which grows with d and so is at least its value at d_lo (0.97 of the engine's
    HD2 on stages like the E96 benchmark's best).
    g_m = I_C/V_T ≤ ``ic_hi``/V_T and r_π ≥ BF·q_lo·V_T/ic_hi.
    With the relative margin :data:`EMITTER_HD2_MARGIN`.

    Arrays broadcast together (A, ohm); returns % (the score's distortion
    term).
    """
    vt = thermal_voltage(25.0)
    ic_hi, r_th, re_hi, z_max = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (ic_hi, r_th, re_hi, z_max)))
    gm = ic_hi / vt
    beta_lo = float(model.beta) * float(q_lo)
    w = 2.0 * np.pi * float(mid_hz)
    wtau = w * float(model.beta) * float(q_hi) * float(model.tf)
    with np.errstate(divide="ignore", invalid="ignore"):
        g_pi = gm / beta_lo
        rs = float(source_ohm or 0.0)
        loop = gm * re_hi
        d = 1.0 / (1.0 + loop * (1.0 + (1.0 + wtau) / beta_lo))
        if rs > 0:
            gs = 1.0 / rs
            y_in = 1.0 / r_th + w * float(model.cjc) + d * (
                (1.0 + wtau) * g_pi + w * float(model.cjc) * gm * z_max)
            drive = d * gs / (gs + y_in)
        else:
            drive = d
        h = 25.0 * float(input_vpk) * drive / vt / (1.0 + loop) / EMITTER_HD2_MARGIN
    return np.nan_to_num(h, nan=0.0, posinf=0.0)


def gain_headroom_floor(*, z_per_gain, ic_lo, ve_lo, supply_v, vce_sat, load_ohm,
                        gain_lo_db, target_db, tol_db):
    """Lower bound of the score's gain + headroom terms of a ce or cb stage (B15).

    A midband gain G (capacitors shorted) needs a collector load Z' = RC‖R_L of at
    least X = G·``z_per_gain``: for ce (V_T/I_C,hi + RE_lo)/(k_in·margin) (bound B6 of
    docs/search.md), for cb (V_T/I_C,hi·(1 + R_S/RE_hi) + R_S)/margin (the source
    against the emitter node).  So the collector drop is y ≥ I_C,lo·RC(G), and the
    quiescent V_CE ≤ V − ``ve_lo`` − y: the headroom term grows with G while the
    gain term falls towards the target.  In the gain g in dB the sum
    H(g) = max(target − g − 10⁻³ dB, 0)/tol + max(y(g) − y_0, 0)/want is convex
    (y = I_C,lo·R_L·X/(R_L − X) with X = zper·10^(g/20) is convex in g), so its
    least value on [``gain_lo_db``, max(gain_lo_db, target)] is taken where
    dy/dg = want/tol — X_s = 2Q·R_L/(2Q + R_L + √(R_L² + 4Q·R_L)),
    Q = 20·want/(tol·ln 10·I_C,lo) (X_s = Q without a load) — or where the
    headroom starts to cost, clipped to the range (above the target both terms
    grow).  ``target_db`` None: no gain term, the least gain.  inf where no gain
    in the window leaves the transistor out of saturation (or needs Z' ≥ R_L).

    Arrays broadcast together (ohm, A, V); dB.
    """

    zper, ic_lo, ve_lo = np.broadcast_arrays(
        *(np.asarray(x, dtype=float) for x in (z_per_gain, ic_lo, ve_lo)))
    V = float(supply_v)
    lo_db = float(gain_lo_db)
    tol = max(float(tol_db), 1e-3)
    want = weights.HEADROOM_FRACTION * V
    room = V - ve_lo - float(vce_sat)       # the largest drop: V_CE at vce_sat
    y0 = V - ve_lo - want                   # the drop above which headroom costs
    rl = float(load_ohm) if load_ohm else None
    # the gain term is 0 from the target (less the 10^-3 dB slack of the score's G∞
    # against the engine) on, and the headroom term only grows with the gain
    top_db = lo_db if target_db is None else max(lo_db, float(target_db) - 1e-3)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # load X (ohm) at the least gain, at the top of the range, where the drop
        # reaches y_0 and the room, and where H is stationary
        x_lo = zper * 10.0 ** (lo_db / 20.0)
        x_top = zper * 10.0 ** (top_db / 20.0)
        if rl is None:
            x0, x_room = y0 / ic_lo, room / ic_lo
        else:
            x0 = y0 * rl / (ic_lo * rl + y0)
            x_room = room * rl / (ic_lo * rl + room)
        x = np.maximum(x0, x_lo)
        if target_db is not None:
            q = 20.0 * want / (tol * np.log(10.0) * ic_lo)
            x_s = q if rl is None else 2.0 * q * rl / (2.0 * q + rl + np.sqrt(rl * rl + 4.0 * q * rl))
            x = np.maximum(x, x_s)
        x = np.minimum(x, np.minimum(x_top, x_room))
        y = ic_lo * x if rl is None else ic_lo * rl * x / (rl - x)
        head = np.maximum(y - y0, 0.0) / want
        gain = 0.0
        if target_db is not None:
            gain = np.maximum(float(target_db) - 20.0 * np.log10(x / zper) - 1e-3, 0.0) / tol
        out = np.maximum(gain + head - 1e-12, 0.0)
        bad = ~((x_lo <= x_room) & (room > 0) & np.isfinite(x_lo) & (x_lo > 0))
    # (no current, no drop: only the gain term, 0 at the target)
    return np.where(ic_lo > 0, np.where(bad, np.inf, out), np.where(room > 0, 0.0, np.inf))


def common_base_hd2_floor(*, ic_hi, re_lo, re_hi, source_ohm, input_vpk, model: DeviceModel,
                          q_lo: float, q_hi: float, mid_hz: float):
    """Lower bound of the score's HD2 term (%) of a common-base stage with RE in
    [``re_lo``, ``re_hi``] and I_C at most ``ic_hi`` (bound B16 of docs/search.md).

    The score's HD2 is 25 %·v̂_in·|v_be/v_emf|/V_T/(1 + g_m·(R_S‖RE)).  With the
    base grounded the emitter node takes the source's G_S against
    1/RE + g_m + 1/Z_π (the collector, through r_o, only adds to the drive), so
    |v_be/v_emf| ≥ G_S/(G_S + 1/RE + g_m + g_π·(1 + ωτ)), τ = β·TF; with
    g_m ≤ ``ic_hi``/V_T, g_π = g_m/(BF·q), q in [``q_lo``, ``q_hi``]; the smallest
    RE gives the least drive and the largest the most feedback.  With the
    relative margin :data:`EMITTER_HD2_MARGIN`.  Arrays broadcast (A, ohm).
    """
    vt = thermal_voltage(25.0)
    ic_hi, re_lo, re_hi = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (ic_hi, re_lo, re_hi)))
    gm = ic_hi / vt
    wtau = 2.0 * np.pi * float(mid_hz) * float(model.beta) * float(q_hi) * float(model.tf)
    rs = float(source_ohm or 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        y_e = 1.0 / re_lo + gm * (1.0 + (1.0 + wtau) / (float(model.beta) * float(q_lo)))
        if rs > 0:
            drive = (1.0 / rs) / (1.0 / rs + y_e)
            rdeg = rs * re_hi / (rs + re_hi)
        else:
            drive, rdeg = np.ones_like(gm), np.zeros_like(gm)
        h = 25.0 * float(input_vpk) * drive / vt / (1.0 + gm * rdeg) / EMITTER_HD2_MARGIN
    return np.nan_to_num(h, nan=0.0, posinf=0.0)


def follower_gain_floor(*, ic_lo, ic_hi, r_th, r_out, source_ohm, model: DeviceModel,
                        q_lo: float, mid_hz: float):
    """Lower bound of an emitter follower's midband gain |v_load/v_emf| (B17).

    G ≥ k_in·R'/(V_T/I_C,lo + R') with R' ≤ ``r_out`` (= RE‖R_L at its least),
    k_in = R_in/(R_in + R_S) and R_in ≥ R_TH‖(BF·q_lo·R'); the input capacitance
    C_μ + C_π (C_π ≤ TF·I_C,hi/V_T) against R_S divides it by at most
    1 + ωR_S(C_μ + C_π) at ``mid_hz``.  No margin here (the caller divides).
    Arrays broadcast (A, ohm).
    """
    vt = thermal_voltage(25.0)
    b_lo = float(model.beta) * float(q_lo)
    rs = float(source_ohm or 0.0)
    w = 2.0 * np.pi * float(mid_hz)
    ic_lo, ic_hi, r_th, r_out = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (ic_lo, ic_hi, r_th, r_out)))
    with np.errstate(divide="ignore", invalid="ignore"):
        rin = r_th * b_lo * r_out / (r_th + b_lo * r_out)
        g = rin / (rin + rs) * r_out / (vt / ic_lo + r_out) / (
            1.0 + w * rs * (float(model.cjc) + float(model.tf) * ic_hi / vt))
    return np.nan_to_num(g, nan=0.0)


def ce_input_divider_max(*, ic_lo, r_th, re_hi, source_ohm, model: DeviceModel, q_hi: float):
    """Upper bound of a ce stage's input divider R_in/(R_in + R_S): R_in ≤
    R_TH‖(r_π,max + (β_hi + 1)·RE_hi), r_π,max = β_hi·V_T/I_C,lo, β_hi = BF·q_hi."""
    vt = thermal_voltage(25.0)
    b_hi = float(model.beta) * float(q_hi)
    ic_lo, r_th, re_hi = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (ic_lo, r_th, re_hi)))
    with np.errstate(divide="ignore", invalid="ignore"):
        zb = b_hi * vt / ic_lo + (b_hi + 1.0) * re_hi
        rin = np.where(np.isfinite(zb), r_th * zb / (r_th + zb), r_th)
        return rin / (rin + float(source_ohm or 0.0))


def ce_gain_per_drop(*, ic_lo, r_th, re_lo, re_hi, source_ohm, model: DeviceModel,
                     q_hi: float, mid_hz: float):
    """Upper bound of a ce stage's midband gain per volt of I_C·Z' (Z' = RC‖R_L).

    Claim: over every stage with I_C ≥ ``ic_lo``, unbypassed RE in [``re_lo``,
    ``re_hi``], G ≤ I_C·Z'·k_up·(1/(V_T + I_C,lo·RE_lo·(1 + 1/β_hi)) + ωC_μ/I_C,lo).
    It is :func:`ce_gain_per_load`'s ceiling G ≤ k_up·Z'·(g_m/(1 + g_m·RE·c) + ωC_μ),
    c = 1 + 1/β_hi, written per volt of I_C·Z' with g_m = I_C/V_T:
    G ≤ k_up·I_C·Z'·(1/(V_T + I_C·RE·c) + ωC_μ/I_C), and both parts fall as I_C
    grows, so they are largest at I_C,lo.  With I_C·Z' = y‖(I_C·R_L) ≤
    y‖(I_C,hi·R_L), y = I_C·RC the collector drop, it bounds the gain by the drop the
    headroom leaves, where the per-ohm form pays the whole width I_C,hi/I_C,lo of the
    current's bracket (bound B24 of docs/search.md).  k_up is
    :func:`ce_input_divider_max` at ``re_hi``.  No margin here.
    """
    k = ce_input_divider_max(ic_lo=ic_lo, r_th=r_th, re_hi=re_hi, source_ohm=source_ohm,
                             model=model, q_hi=q_hi)
    ic_lo = np.asarray(ic_lo, dtype=float)
    c = 1.0 + 1.0 / (float(model.beta) * float(q_hi))
    with np.errstate(divide="ignore", invalid="ignore"):
        per = k * (1.0 / (thermal_voltage(25.0) + ic_lo * np.asarray(re_lo, dtype=float) * c)
                   + 2.0 * np.pi * float(mid_hz) * float(model.cjc) / ic_lo)
    return np.nan_to_num(per, nan=0.0)


def _swing_coefficients(*, ic_lo, r_th, re_lo, re_hi, source_ohm, model: DeviceModel,
                        q_hi: float, mid_hz: float, supply_v: float):
    """(k, A, b, e) of :func:`ce_gain_at_swing`: G ≤ k·(Y/(A + b·Y) + e·Y)."""
    k = ce_input_divider_max(ic_lo=ic_lo, r_th=r_th, re_hi=re_hi, source_ohm=source_ohm,
                             model=model, q_hi=q_hi)
    ic_lo = np.asarray(ic_lo, dtype=float)
    c = 1.0 + 1.0 / (float(model.beta) * float(q_hi))
    vt = thermal_voltage(25.0)
    A = vt + ic_lo * np.asarray(re_lo, dtype=float) * c
    b = vt / (float(model.vaf) + float(supply_v)) if math.isfinite(model.vaf) else 0.0
    with np.errstate(divide="ignore"):
        e = 2.0 * np.pi * float(mid_hz) * float(model.cjc) / ic_lo
    return np.nan_to_num(k, nan=0.0), A, b, e


def ce_gain_at_swing(*, swing, ic_lo, r_th, re_lo, re_hi, source_ohm, model: DeviceModel,
                     q_hi: float, mid_hz: float, supply_v: float):
    """Upper bound of a ce stage's midband gain when I_C·Z' ≤ ``swing`` (Z' = RC‖R_L).

    Claim: over every stage with I_C ≥ ``ic_lo``, unbypassed RE in [``re_lo``,
    ``re_hi``] and its collector at most at the supply, with Y = I_C·Z',
    G ≤ k_up·(Y/(V_T·(1 + Y/(V_AF + V)) + I_C,lo·RE_lo·c) + ωC_μ·Y/I_C,lo),
    c = 1 + 1/β_hi, k_up :func:`ce_input_divider_max` at ``re_hi``; the right side
    grows with Y, so ``swing`` ≥ Y bounds it.

    Why: at low frequency the collector's current into the device is
    i_c = α·v_be with α = (g_m − RE/(r_π·r_o))/(1 + (Z' + RE)/r_o) ≤
    g_m/(1 + Z'/r_o) (nodal equations of the hybrid-π with r_o between collector and
    emitter), and the source sees v_s' = v_be·(1 + (RE + R_b)/r_π + RE·α), so
    G ≤ k·Z'·α/(1 + α·RE·c) — :func:`ce_gain_per_load`'s degenerated
    transconductance with g_m replaced by α.  With g_m = I_C/V_T the degenerated
    part is Y/(V_T + V_T·Z'/r_o + I_C·RE·c); the device law of docs/model.md gives
    1/r_o ≥ (I_C − I_S)/(V_AF + V_CB) and V_CB ≤ V, so V_T·Z'/r_o ≥
    V_T·Y/(V_AF + V) (less a part I_S/I_C, below 10⁻⁹ at the currents searched,
    which the search's margin covers); the RE term is least at I_C,lo.  The
    feed-forward through C_μ at ``mid_hz`` adds at most ωC_μ·Z' ≤ ωC_μ·Y/I_C,lo
    (as in :func:`ce_gain_per_load`).  Against the per-ohm form at I_C,hi it no
    longer pays the width I_C,hi/I_C,lo of the current's bracket nor the output
    conductance (bound B24 of docs/search.md).  No margin here.
    """
    k, A, b, e = _swing_coefficients(ic_lo=ic_lo, r_th=r_th, re_lo=re_lo, re_hi=re_hi,
                                     source_ohm=source_ohm, model=model, q_hi=q_hi,
                                     mid_hz=mid_hz, supply_v=supply_v)
    y = np.asarray(swing, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        g = k * (y / (A + b * y) + e * y)
    return np.where(y > 0, np.nan_to_num(g, nan=np.inf), 0.0)


def ce_swing_needed(*, gain, ic_lo, r_th, re_lo, re_hi, source_ohm, model: DeviceModel,
                    q_hi: float, mid_hz: float, supply_v: float):
    """Least I_C·Z' a ce stage needs for a midband gain ``gain``: the inverse of
    :func:`ce_gain_at_swing` in its swing (which grows with it), so every stage of
    that gain has I_C·Z' at least this (inf where no swing reaches it).  The
    positive root of e·b·Y² + (1 + e·A − g·b)·Y − g·A = 0, g = gain/k_up."""
    k, A, b, e = _swing_coefficients(ic_lo=ic_lo, r_th=r_th, re_lo=re_lo, re_hi=re_hi,
                                     source_ohm=source_ohm, model=model, q_hi=q_hi,
                                     mid_hz=mid_hz, supply_v=supply_v)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        g = np.asarray(gain, dtype=float) / k
        qa, qb, qc = e * b, 1.0 + e * A - g * b, -g * A
        disc = np.sqrt(qb * qb - 4.0 * qa * qc)
        # the root −2c/(b + √disc) is the stable form of the positive root (a ≥ 0)
        y = np.where(qb + disc > 0, -2.0 * qc / (qb + disc), np.inf)
    return np.nan_to_num(y, nan=np.inf)


def ce_gain_per_load(*, ic_lo, ic_hi, r_th, re_lo, re_hi, source_ohm, model: DeviceModel,
                     q_hi: float, mid_hz: float):
    """Upper bound of a ce stage's midband gain per ohm of collector load Z' = RC‖R_L.

    G ≤ k_up·Z'·(g_m/(1 + g_m·RE·(1 + 1/β_hi)) + ωC_μ): the junction's
    transconductance degenerated by the unbypassed RE (RE ≥ ``re_lo``,
    g_m ≤ I_C,hi/V_T), plus the feed-forward through C_μ at ``mid_hz`` that carries
    the gain of heavily degenerated stages at high frequencies; k_up is
    :func:`ce_input_divider_max` at ``re_hi``.  No margin here.  Measured against
    the engine on random stages at 1 kHz–1 MHz (tests/optimiser/test_search.py):
    at most 0.9994 of it.
    """
    k = ce_input_divider_max(ic_lo=ic_lo, r_th=r_th, re_hi=re_hi, source_ohm=source_ohm,
                             model=model, q_hi=q_hi)
    gm = np.asarray(ic_hi, dtype=float) / thermal_voltage(25.0)
    b_hi = float(model.beta) * float(q_hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        per = k * (gm / (1.0 + gm * np.asarray(re_lo, dtype=float) * (1.0 + 1.0 / b_hi))
                   + 2.0 * np.pi * float(mid_hz) * float(model.cjc))
    return np.nan_to_num(per, nan=0.0)
