"""DC operating point of divider-biased stages, vectorised over candidates.

Every large-signal problem of the engine reduces to one shape: the three
terminals of the transistor each see a Thevenin source to ground,

    base:      V_B = v_b − I_B·r_b
    emitter:   V_E = v_e + I_E·r_e
    collector: V_C = v_c − I_C·r_c

(any of the resistances may be 0).  The bias point uses v_b = V_TH,
r_b = R_TH, v_e = 0, r_e = RE + RE_BYP, v_c = V_CC, r_c = RC; the quasi-static
distortion sweep uses the same solver with the capacitors held at their DC
voltages.  :func:`solve_terminals` solves it for arrays of any (broadcast)
shape by Newton's method in (V_BE, V_BC) with SPICE-style junction limiting,
started from the exact solution of the forward-active loop without Early
effect.  Converged to 1e-10·V_T in both junction voltages (≈1e-10 relative in
the currents).
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np
from scipy.special import wrightomega

from .device import DeviceModel, junction_currents, scaled, thermal_voltage
from .stage import StageBatch

__all__ = [
    "OperatingPoint",
    "CUTOFF_A",
    "solve_terminals",
    "solve_bias",
    "operating_point",
    "thevenin",
    "forward_active_ic",
]

#: Below this collector current (A) a candidate is reported as cut off.
CUTOFF_A = 1e-7


@dataclass(frozen=True)
class OperatingPoint:
    """DC figures of ``n`` candidates; every array has the batch's shape.

    Currents in A, voltages in V (node voltages to ground), power in W.
    ``vx`` is the tap between RE and RE_BYP (= ``ve`` without RE, 0 without
    RE_BYP).  ``is_``, ``beta``, ``vt`` are the device values used (at the
    temperature of the solution); ``converged`` flags Newton convergence.
    """

    ic: np.ndarray
    ib: np.ndarray
    ie: np.ndarray
    vb: np.ndarray
    ve: np.ndarray
    vc: np.ndarray
    vbe: np.ndarray
    vce: np.ndarray
    pq: np.ndarray
    saturated: np.ndarray
    cutoff: np.ndarray
    vbc: np.ndarray
    vx: np.ndarray
    is_: np.ndarray
    beta: np.ndarray
    vt: np.ndarray
    converged: np.ndarray

    def take(self, idx) -> "OperatingPoint":
        return OperatingPoint(**{f.name: np.asarray(getattr(self, f.name))[idx]
                                 for f in fields(self)})


def thevenin(supply_v, r1, r2):
    """Thevenin voltage and resistance of the R1/R2 divider (V, ohm)."""
    r1 = np.asarray(r1, dtype=float)
    r2 = np.asarray(r2, dtype=float)
    s = r1 + r2
    with np.errstate(invalid="ignore", divide="ignore"):
        return supply_v * r2 / s, r1 * r2 / s


def _pnjlim(vnew, vold, vt, vcrit):
    """SPICE junction-voltage limiting (keeps Newton steps on exp() sane)."""
    big = (vnew > vcrit) & (np.abs(vnew - vold) > 2.0 * vt)
    if not big.any():
        return vnew
    vn, vo, t, vc = vnew[big], vold[big], vt[big], vcrit[big]
    with np.errstate(invalid="ignore", divide="ignore"):
        arg = 1.0 + (vn - vo) / t
        from_pos = np.where(arg > 0, vo + t * np.log(np.maximum(arg, 1e-300)), vc)
        from_neg = t * np.log(np.maximum(vn / t, 1e-300))
    out = vnew.copy()
    out[big] = np.where(vo > 0, from_pos, from_neg)
    return out


def _initial_vbe(vd, reff, is_, vt):
    """Forward-active loop without Early effect, in closed form.

    ``vd = u + I·reff`` with ``I = I_S·e^{u/V_T}`` gives
    ``I = (V_T/reff)·W(reff·I_S/V_T·e^{vd/V_T})`` (Lambert W, evaluated as the
    Wright omega function so that large arguments do not overflow).
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        z = np.log(reff * is_ / vt) + vd / vt
        cur = vt / reff * wrightomega(z)
        u = vt * np.log(cur / is_)
    return np.where((reff > 0) & np.isfinite(u), u, vd)


def _saturated_vbc(u, vb_th, rb, ve_th, re, vc_th, rc, is_, beta, vt, w_default):
    """Starting V_BC for a candidate that the forward-active guess puts in saturation.

    Takes V_CE ≈ 0.1 V and V_BE ≈ u, solves the linear terminal equations for
    (I_B, I_C), and inverts the Ebers–Moll currents (BR = 1) for V_BC.
    """
    vs = 0.1
    a11, a12, b1 = rb + re, re, vb_th - ve_th - u
    a21, a22, b2 = re, rc + re, vc_th - ve_th - vs
    det = a11 * a22 - a12 * a21
    with np.errstate(divide="ignore", invalid="ignore"):
        ib = (b1 * a22 - a12 * b2) / det
        ic = (a11 * b2 - a21 * b1) / det
        ebe = (ic + 2.0 * ib) / (is_ * (1.0 + 2.0 / beta))
        ebc = ib / is_ - ebe / beta
        w = vt * np.log(ebc)
        u_new = vt * np.log(ebe)
    good = np.isfinite(w) & (ebc > 0) & (w < u) & np.isfinite(u_new) & (u_new > w)
    return (np.where(good, u_new, u), np.where(good, w, np.minimum(w_default, u - vs)))


def solve_terminals(vb_th, rb, ve_th, re, vc_th, rc, is_, beta, vt, inv_vaf=0.0,
                    *, tol: float = 1e-10, max_iter: int = 200):
    """Solve the transistor between three Thevenin terminals (see module doc).

    Parameters
    ----------
    vb_th, rb, ve_th, re, vc_th, rc : array_like
        Thevenin voltages (V) and resistances (ohm, ≥ 0) at base, emitter and
        collector.  Everything broadcasts to one shape.
    is_, beta, vt : array_like
        Saturation current (A), forward gain, thermal voltage (V).
    inv_vaf : float or array_like
        1/V_AF (1/V); 0 for no Early effect.

    Returns
    -------
    vbe, vbc, converged : ndarray
        Junction voltages (V) and a per-element convergence flag.
    """
    args = np.broadcast_arrays(*[np.asarray(a, dtype=float) for a in
                                 (vb_th, rb, ve_th, re, vc_th, rc, is_, beta, vt, inv_vaf)])
    shape = args[0].shape
    flat = [a.ravel() for a in args]
    m = flat[0].size
    if m > _CHUNK:
        # cache-sized blocks: the Newton loop is memory-bound on large arrays
        u = np.empty(m)
        w = np.empty(m)
        c = np.empty(m, dtype=bool)
        for s in range(0, m, _CHUNK):
            part = [a[s:s + _CHUNK] for a in flat]
            u[s:s + _CHUNK], w[s:s + _CHUNK], c[s:s + _CHUNK] = _solve_flat(
                *part, tol=tol, max_iter=max_iter)
        return u.reshape(shape), w.reshape(shape), c.reshape(shape)
    u, w, c = _solve_flat(*flat, tol=tol, max_iter=max_iter)
    return u.reshape(shape), w.reshape(shape), c.reshape(shape)


_CHUNK = 65536


def _forward_1d(u, vb_th, rb, ve_th, re, vc_th, rc, is_, beta, vt, iva, tol, iters: int = 8):
    """Newton in V_BE alone with e^(V_BC/V_T) taken as 0 (forward-active).

    With that term gone the collector loop is linear in V_BC, so V_BC(V_BE) is
    explicit and the base loop is one equation in V_BE.  The neglected term is
    e^(−V_CE/V_T) relative, below 2e-12 for V_CE > 0.7 V, which is where the result
    is accepted (``ok``); the others go to the full two-variable Newton.
    """
    a = vc_th - ve_th
    sq = np.sqrt(tol)
    ok = np.zeros(u.shape, dtype=bool)
    w = u
    for _ in range(iters):
        e = is_ * np.exp(np.minimum(u / vt, 80.0))
        k = (rc + re) * e
        c = re * e / beta + rc * is_ - re * is_ / beta
        num = u - a + k + c
        den = 1.0 + k * iva
        w = num / den
        q = 1.0 - w * iva
        ib = (e - is_) / beta - is_
        ie = e * (q + 1.0 / beta) - is_ / beta
        f = vb_th - ve_th - u - ib * rb - ie * re
        de = e / vt
        dnum = 1.0 + (rc + re) * de + re * de / beta
        dden = iva * (rc + re) * de
        dw = (dnum * den - num * dden) / (den * den)
        dq = -iva * dw
        fp = -1.0 - rb * de / beta - re * (de * (q + 1.0 / beta) + e * dq)
        du = -f / fp
        u = u + du
        ok = np.abs(du) <= sq * vt
        if ok.all():
            break
    e = is_ * np.exp(np.minimum(u / vt, 80.0))
    k = (rc + re) * e
    c = re * e / beta + rc * is_ - re * is_ / beta
    w = (u - a + k + c) / (1.0 + k * iva)
    ok &= np.isfinite(u) & (u - w > 0.7)
    return u, w, ok


def _solve_flat(vb_th, rb, ve_th, re, vc_th, rc, is_, beta, vt, inv_vaf, *, tol, max_iter):
    m = vb_th.size

    reff = rb / beta + re * (1.0 + 1.0 / beta)
    u = _initial_vbe(vb_th - ve_th, reff, is_, vt)
    ic0 = is_ * np.expm1(np.minimum(u / vt, 80.0))
    vce0 = (vc_th - ic0 * rc) - (ve_th + ic0 * (1.0 + 1.0 / beta) * re)
    w = u - np.maximum(vce0, 0.3)
    sat = vce0 < 0.15
    if sat.any():
        u[sat], w[sat] = _saturated_vbc(u[sat], vb_th[sat], rb[sat], ve_th[sat], re[sat], vc_th[sat],
                                rc[sat], is_[sat], beta[sat], vt[sat], w[sat])
    vcrit = vt * np.log(vt / (np.sqrt(2.0) * is_))

    out_u = u.copy()
    out_w = w.copy()
    conv = np.zeros(m, dtype=bool)
    # forward-active fast path: exact while e^(V_BC/V_T) is negligible (V_CE > 0.7 V)
    fa = vce0 > 1.0
    if fa.any():
        sel = np.flatnonzero(fa)
        uf, wf, okf = _forward_1d(u[sel], vb_th[sel], rb[sel], ve_th[sel], re[sel],
                                  vc_th[sel], rc[sel], is_[sel], beta[sel], vt[sel],
                                  inv_vaf[sel], tol)
        out_u[sel] = uf
        out_w[sel] = wf
        conv[sel] = okf
        u[sel], w[sel] = uf, wf
    todo = ~conv
    if not todo.any():
        return out_u, out_w, conv
    idx = np.flatnonzero(todo)
    u, w = u[idx], w[idx]
    p = [a[idx] for a in (vb_th, rb, ve_th, re, vc_th, rc, is_, beta, vt, inv_vaf, vcrit)]
    dn = None
    sq_tol = np.sqrt(tol)
    for _ in range(max_iter):
        vbt, rbb, vet, ree, vct, rcc, iss, bb, vtt, iva, vcr = p
        ic, ib, dcu, dcw, dbu, dbw = junction_currents(u, w, iss, bb, vtt, iva)
        f1 = vbt - ib * rbb - vet - (ic + ib) * ree - u
        f2 = vbt - ib * rbb - vct + ic * rcc - w
        j11 = -dbu * rbb - (dcu + dbu) * ree - 1.0
        j12 = -dbw * rbb - (dcw + dbw) * ree
        j21 = -dbu * rbb + dcu * rcc
        j22 = -dbw * rbb + dcw * rcc - 1.0
        det = j11 * j22 - j12 * j21
        du = -(j22 * f1 - j12 * f2) / det
        dw = -(-j21 * f1 + j11 * f2) / det
        u_full, w_full = u + du, w + dw
        un = _pnjlim(u_full, u, vtt, vcr)
        wn = _pnjlim(w_full, w, vtt, vcr)
        # Newton converges quadratically: in the forward-active region (V_CE > 0.3 V) an
        # unlimited step below sqrt(tol)·V_T leaves an error of order tol·V_T once applied
        step = np.maximum(np.abs(du), np.abs(dw))
        quad = (step <= sq_tol * vtt) & (un == u_full) & (wn == w_full) & (un - wn > 0.3)
        done = ((step <= tol * vtt) | quad) & np.isfinite(un)
        u, w = un, wn
        dn = done if dn is None else (dn | done)
        n_done = int(np.count_nonzero(dn))
        if n_done == dn.size:
            break
        if n_done > 0.05 * dn.size:      # compact the working set once it pays
            out_u[idx[dn]] = u[dn]
            out_w[idx[dn]] = w[dn]
            conv[idx[dn]] = True
            keep = ~dn
            idx = idx[keep]
            u, w = u[keep], w[keep]
            p = [a[keep] for a in p]
            dn = None
    if idx.size:
        out_u[idx] = u
        out_w[idx] = w
        if dn is not None:
            conv[idx] = dn
    return out_u, out_w, conv


def _op_from(vbe, vbc, vb_th, rb, ve_th, re, vc_th, rc, is_, beta, vt, inv_vaf,
             vce_sat, conv, vx_fraction=None) -> OperatingPoint:
    ic, ib, *_ = junction_currents(vbe, vbc, is_, beta, vt, inv_vaf)
    ie = ic + ib
    vb = vb_th - ib * rb
    ve = ve_th + ie * re
    vc = vc_th - ic * rc
    vce = vbe - vbc
    pq = ic * vce + ib * vbe
    vx = ve * 0.0 if vx_fraction is None else ie * vx_fraction
    shape = np.broadcast(vbe, vb, vc).shape

    def b(a):
        a = np.asarray(a, dtype=float)
        # arrays of the right shape are used as they are; scalars become read-only views
        return a if a.shape == shape else np.broadcast_to(a, shape)

    vce_b = b(vce)
    ic_b = b(ic)
    return OperatingPoint(
        ic=ic_b, ib=b(ib), ie=b(ie), vb=b(vb), ve=b(ve), vc=b(vc), vbe=b(vbe), vce=vce_b,
        pq=b(pq), saturated=vce_b < vce_sat, cutoff=ic_b < CUTOFF_A, vbc=b(vbc), vx=b(vx),
        is_=b(is_), beta=b(beta), vt=b(vt), converged=np.broadcast_to(conv, shape),
    )


def solve_bias(v_th, r_th, re, rc, supply_v, model: DeviceModel, temp_c=25.0, beta=None,
               re_byp=None) -> OperatingPoint:
    """Bias point of divider-biased stages from raw arrays (fast pruning path).

    Parameters
    ----------
    v_th, r_th : array_like
        Thevenin voltage (V) and resistance (ohm) of the base divider.
    re, rc : array_like
        Total DC emitter resistance (RE + RE_BYP) and collector resistance (ohm;
        rc = 0 ties the collector to the supply).
    supply_v : float
        V_CC in volts.
    model : DeviceModel
    temp_c : float or array_like
        Temperature, °C (scales I_S and β per the model).
    beta : float or array_like, optional
        β at 25 °C replacing the model's nominal β (scaled to ``temp_c``).
    re_byp : array_like, optional
        Bypassed part of ``re``, to report the tap voltage ``vx``.

    Returns
    -------
    OperatingPoint
    """
    is_t, beta_t = scaled(model, temp_c, beta)
    vt = thermal_voltage(temp_c)
    inv_vaf = 0.0 if not np.isfinite(model.vaf) else 1.0 / model.vaf
    vbe, vbc, conv = solve_terminals(v_th, r_th, 0.0, re, supply_v, rc, is_t, beta_t, vt, inv_vaf)
    return _op_from(vbe, vbc, v_th, r_th, 0.0, re, supply_v, rc, is_t, beta_t, vt, inv_vaf,
                    model.vce_sat, conv, re_byp)


def operating_point(topology: str, supply_v: float, batch: StageBatch, model: DeviceModel,
                    temp_c=25.0, beta=None) -> OperatingPoint:
    """DC operating point of every candidate of ``batch`` (arrays of shape (n,)).

    The three topologies share the DC network (capacitors open): the R1/R2
    divider at the base, RE + RE_BYP from emitter to ground, RC from the
    supply to the collector (RC = 0: collector at the supply).
    ``temp_c`` and ``beta`` may be arrays broadcasting against (n,), e.g.
    shape (n, 4) with the batch's arrays taken as (n, 1) for the drift corners.
    """
    del topology  # the DC network is the same for ce, cb and cc
    v_th, r_th = thevenin(supply_v, batch.R1, batch.R2)
    re = batch.re_total
    rc = batch.RC
    byp = batch.RE_BYP
    tshape = np.broadcast(np.asarray(temp_c), np.asarray(beta if beta is not None else 0.0)).shape
    if len(tshape) == 2:
        v_th, r_th, re, rc, byp = (a[:, None] for a in (v_th, r_th, re, rc, byp))
    return solve_bias(v_th, r_th, re, rc, supply_v, model, temp_c, beta, re_byp=byp)


def forward_active_ic(v_th, r_th, re, model: DeviceModel, temp_c=25.0, beta=None, vcb=0.0):
    """Collector current of the base loop alone, in closed form, for fast pruning (A).

    Assumes the forward-active region with the collector–base voltage ``vcb``
    (V, default 0: the data-sheet condition) for the Early factor
    ``q = 1 + vcb/V_AF``: ``V_TH = I_B·R_TH + V_BE + I_E·R_E`` with
    ``I_C = q·I_S·e^{V_BE/V_T}``, ``I_B = I_S·e^{V_BE/V_T}/β`` solved by the Lambert W
    function.  No collector network is needed, so it ranks bias networks (R1, R2,
    R_E) before R_C is chosen; :func:`solve_bias` gives the exact figures.
    """
    is_t, beta_t = scaled(model, temp_c, beta)
    vt = thermal_voltage(temp_c)
    inv_vaf = 0.0 if not np.isfinite(model.vaf) else 1.0 / model.vaf
    q = 1.0 + np.asarray(vcb, dtype=float) * inv_vaf
    r_th = np.asarray(r_th, dtype=float)
    re = np.asarray(re, dtype=float)
    reff = r_th / beta_t + re * (q + 1.0 / beta_t)
    u = _initial_vbe(np.asarray(v_th, dtype=float), reff, is_t, vt)
    return q * is_t * np.exp(u / vt)
