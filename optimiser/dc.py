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
    "DCElement",
    "solve_nodes",
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


# --------------------------------------------------------------------------------------
# Networks of several transistors: Newton on the node voltages
# --------------------------------------------------------------------------------------

@dataclass(frozen=True)
class DCElement:
    """A branch of a DC network: ``"R"`` (ohm; 0 joins the nodes, inf leaves them
    open) or ``"V"`` (a source holding ``v_a − v_b = value``; NaN: absent).
    ``value`` broadcasts against the problem's shape."""

    kind: str
    a: str
    b: str
    value: object


def _join(parent, offset, fixed_names, a, b, val):
    """Union of nodes a and b with v_a − v_b = val (offsets are arrays)."""
    def find(n):
        off = 0.0
        while parent[n] != n:
            off = off + offset[n]
            n = parent[n]
        return n, off

    ra, oa = find(a)
    rb, ob = find(b)
    if ra == rb:
        return
    # v_ra + oa − (v_rb + ob) = val
    if rb in fixed_names and ra not in fixed_names:
        parent[ra] = rb
        offset[ra] = val + ob - oa          # v_ra = v_rb + (val + ob − oa)
    elif ra in fixed_names and rb in fixed_names:
        return                               # two fixed nodes: nothing to join
    else:
        parent[rb] = ra
        offset[rb] = oa - val - ob           # v_rb = v_ra + (oa − val − ob)


def solve_nodes(nodes, fixed, elements, devices, params, guess=None, *, tol: float = 1e-10,
                max_iter: int = 300):
    """DC node voltages of a network of resistors, held voltages and transistors.

    Newton's method on Kirchhoff's current law at every free node, each transistor the
    device model of :func:`optimiser.device.junction_currents` linearised at its junction
    voltages, with SPICE's junction limiting between iterations (as
    :func:`solve_terminals`).  Zero-ohm resistors and ``"V"`` elements join nodes
    (with an offset), so designs are grouped by which are present.

    Parameters
    ----------
    nodes : sequence of str
        The node names besides the fixed ones.
    fixed : dict
        Node name -> voltage (array_like) of nodes held by ideal sources (ground,
        the supply, the signal source).
    elements : sequence of DCElement
    devices : sequence of (base, emitter, collector)
        Node names of each transistor.
    params : sequence of (is_, beta, vt, inv_vaf)
        Device values of each transistor (array_like).
    guess : dict, optional
        Node name -> starting voltage; nodes left out start from the network with
        every transistor removed.

    Returns
    -------
    volts : dict node -> ndarray
        Every node's voltage (the fixed ones included), broadcast shape.
    junctions : list of (vbe, vbc)
        Each transistor's junction voltages.
    converged : ndarray of bool
    """
    guess = guess or {}
    arrays = [np.asarray(v, dtype=float) for v in fixed.values()]
    arrays += [np.asarray(e.value, dtype=float) for e in elements]
    arrays += [np.asarray(x, dtype=float) for p in params for x in p]
    arrays += [np.asarray(v, dtype=float) for v in guess.values()]
    shape = np.broadcast_shapes(*[a.shape for a in arrays])
    m = int(np.prod(shape)) if shape else 1
    flat = lambda x: np.broadcast_to(np.asarray(x, dtype=float), shape).reshape(m)  # noqa: E731
    fixed_f = {k: flat(v) for k, v in fixed.items()}
    vals = [flat(e.value) for e in elements]
    pars = [tuple(flat(x) for x in p) for p in params]
    guess_f = {k: flat(v) for k, v in guess.items()}
    joins = np.stack([(v == 0) if e.kind == "R" else np.isfinite(v)
                      for e, v in zip(elements, vals, strict=True)], axis=1) \
        if elements else np.zeros((m, 0), bool)
    code = (joins.astype(np.int64) << np.arange(joins.shape[1], dtype=np.int64)).sum(axis=1)
    all_nodes = tuple(nodes) + tuple(fixed)
    volts = {n: np.full(m, np.nan) for n in all_nodes}
    junc = [(np.full(m, np.nan), np.full(m, np.nan)) for _ in devices]
    conv = np.zeros(m, dtype=bool)
    for c in np.flatnonzero(np.bincount(code)):
        sel = np.nonzero(code == c)[0]
        v, j, ok = _solve_nodes_group(
            nodes, {k: a[sel] for k, a in fixed_f.items()}, elements, [a[sel] for a in vals],
            joins[sel[0]], devices, [tuple(x[sel] for x in p) for p in pars],
            {k: a[sel] for k, a in guess_f.items()}, tol, max_iter)
        for n in all_nodes:
            volts[n][sel] = v[n]
        for k in range(len(devices)):
            junc[k][0][sel], junc[k][1][sel] = j[k]
        conv[sel] = ok
    return ({n: a.reshape(shape) for n, a in volts.items()},
            [(u.reshape(shape), w.reshape(shape)) for u, w in junc], conv.reshape(shape))


def _solve_nodes_group(nodes, fixed, elements, vals, joined, devices, pars, guess, tol,
                       max_iter):
    m = next(iter(fixed.values())).shape[0]
    parent = {n: n for n in tuple(nodes) + tuple(fixed)}
    offset = {n: np.zeros(m) for n in parent}
    fixed_names = set(fixed)
    for e, v, j in zip(elements, vals, joined, strict=True):
        if j:
            _join(parent, offset, fixed_names, e.a, e.b, 0.0 if e.kind == "R" else v)

    def find(n):
        off = np.zeros(m)
        while parent[n] != n:
            off = off + offset[n]
            n = parent[n]
        return n, off

    roots = [n for n in nodes if parent[n] == n and n not in fixed_names]
    col = {r: i for i, r in enumerate(roots)}
    M = len(roots)
    where = {}                       # node -> (column or −1, offset + fixed voltage)
    for n in parent:
        r, off = find(n)
        where[n] = (col[r], off) if r in col else (-1, off + fixed[r])

    resistors = [(where[e.a], where[e.b], v) for e, v, j in zip(elements, vals, joined,
                                                                  strict=True)
                 if e.kind == "R" and not j]
    dev = [tuple(where[t] for t in d) for d in devices]

    def voltage(x, w):
        k, off = w
        return off if k < 0 else x[:, k] + off

    def stamp(J, F, wa, wb, g, i):
        """Current i leaving a (into b) with conductance g on v_a − v_b."""
        ka, kb = wa[0], wb[0]
        if ka >= 0:
            F[:, ka] += i
            J[:, ka, ka] += g
            if kb >= 0:
                J[:, ka, kb] -= g
        if kb >= 0:
            F[:, kb] -= i
            J[:, kb, kb] += g
            if ka >= 0:
                J[:, kb, ka] -= g

    # start: the guess, else the resistive network with the transistors removed
    x = np.zeros((m, M))
    if M:
        J0 = np.zeros((m, M, M)) + 1e-12 * np.eye(M)
        F0 = np.zeros((m, M))
        for wa, wb, r in resistors:
            g = np.where(np.isfinite(r) & (r > 0), 1.0 / np.where(r > 0, r, 1.0), 0.0)
            stamp(J0, F0, wa, wb, g, g * (voltage(x, wa) - voltage(x, wb)))
        x = np.linalg.solve(J0, -F0[..., None])[..., 0]
        for n, gv in guess.items():
            k, off = where[n]
            if k >= 0 and n == roots[k]:
                x[:, k] = gv - off
    # previous junction voltages for the limiting
    prev = []
    for (is_, _beta, vt, _iva), (wb_, we, wc) in zip(pars, dev, strict=True):
        vcrit = vt * np.log(vt / (np.sqrt(2.0) * is_))
        prev.append((voltage(x, wb_) - voltage(x, we), voltage(x, wb_) - voltage(x, wc), vcrit))
    started = bool(guess)
    with np.errstate(over="ignore", invalid="ignore"):
        x, done = _newton_nodes(x, m, M, resistors, pars, dev, prev, started, voltage, stamp,
                                tol, max_iter)
    out = {}
    for n in parent:
        out[n] = voltage(x, where[n])
    junctions = []
    for wb_, we, wc in dev:
        junctions.append((voltage(x, wb_) - voltage(x, we), voltage(x, wb_) - voltage(x, wc)))
    return out, junctions, done


def _newton_nodes(x, m, M, resistors, pars, dev, prev, started, voltage, stamp, tol,
                  max_iter):
    """The Newton iterations of :func:`solve_nodes` on one group of designs."""
    done = np.zeros(m, dtype=bool)
    sq = np.sqrt(tol)
    for it in range(max_iter):
        J = np.zeros((m, M, M))
        F = np.zeros((m, M))
        for wa, wb, r in resistors:
            g = np.where(np.isfinite(r) & (r > 0), 1.0 / np.where(r > 0, r, 1.0), 0.0)
            stamp(J, F, wa, wb, g, g * (voltage(x, wa) - voltage(x, wb)))
        limited = np.zeros(m, dtype=bool)
        lin = []
        for k, ((is_, beta, vt, iva), (wb_, we, wc)) in enumerate(zip(pars, dev, strict=True)):
            u_prev, w_prev, vcrit = prev[k]
            u_new = voltage(x, wb_) - voltage(x, we)
            w_new = voltage(x, wb_) - voltage(x, wc)
            if it == 0 and not started:
                # no starting point given: the junctions start as SPICE starts them, the
                # emitter junction near 1 mA and the collector junction off
                u = np.minimum(u_new, vt * np.log(1e-3 / is_))
                w = np.minimum(w_new, 0.0)
            else:
                u = _pnjlim(u_new, u_prev, vt, vcrit)
                w = _pnjlim(w_new, w_prev, vt, vcrit)
            limited |= (u != u_new) | (w != w_new)
            ic, ib, dcu, dcw, dbu, dbw = junction_currents(u, w, is_, beta, vt, iva)
            # currents linearised at the limited point, evaluated at the present voltages
            icl = ic + dcu * (u_new - u) + dcw * (w_new - w)
            ibl = ib + dbu * (u_new - u) + dbw * (w_new - w)
            lin.append((u, w))
            kb, ke, kc = wb_[0], we[0], wc[0]
            # KCL: i_c leaves the collector node, i_b the base node, −(i_c + i_b) the emitter
            for node, cur, du_, dw_ in ((kc, icl, dcu, dcw), (kb, ibl, dbu, dbw),
                                        (ke, -(icl + ibl), -(dcu + dbu), -(dcw + dbw))):
                if node < 0:
                    continue
                F[:, node] += cur
                # v_be = v_b − v_e, v_bc = v_b − v_c
                for term, coef in ((kb, du_ + dw_), (ke, -du_), (kc, -dw_)):
                    if term >= 0:
                        J[:, node, term] += coef
        prev = [(u, w, p[2]) for (u, w), p in zip(lin, prev, strict=True)]
        if M == 0:
            done[:] = True
            break
        try:
            dx = np.linalg.solve(J, -F[..., None])[..., 0]
        except np.linalg.LinAlgError:
            # a node held only by cut-off junctions leaves its row empty: the least-squares
            # step for the whole group (rare; the other designs' steps are the same)
            dx = (np.linalg.pinv(J) @ -F[..., None])[..., 0]
        step = np.max(np.abs(dx), axis=1)
        vt_min = np.min([p[2] for p in pars], axis=0)
        ok = np.isfinite(step)
        x = np.where(ok[:, None], x + dx, x)
        done = ok & ~limited & (step <= sq * vt_min * 1e-3)
        if done.all():
            break
    return x, done
