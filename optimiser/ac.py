"""Small-signal analysis by complex nodal equations (MNA by stamps).

The network of a stage (:mod:`optimiser.stages`) plus the hybrid-π transistor
is written as ``Y(ω)·v = j`` for every design and frequency at once: arrays of
shape ``(nf, n, N, N)`` with frequency as the leading axis, solved by
``np.linalg.solve`` broadcasting over ``(nf, n)``.  Stamps:

* resistor, capacitor: two-terminal admittance ``1/R``, ``jωC`` (R = 0 joins
  the two nodes, so designs are grouped by which resistors are shorts);
* the source branch ``R_S + 1/(jωC_IN)`` from the EMF to the input node and the
  load branch ``1/(jωC_OUT) + R_L`` from the output node, as series admittances;
* each transistor of the network (one for a stage, two for a chain or a
  cascode, each with its own operating point): the linearised base and
  collector currents of the device model, ``i_b = y_be·v_be + y_bc·v_bc`` and ``i_c = y_ce·v_be + y_cc·v_bc`` with
  the charges ``Q_D`` (C_π = ∂Q_D/∂V_BE and the transcapacitance ∂Q_D/∂V_BC,
  base to emitter) and ``C_μ = CJC`` (base to collector).

Frequencies in Hz at the interface, ω = 2πf inside; results complex, shape
``(nf, n)``.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import elementwise

from .dc import OperatingPoint
from .device import DeviceModel, junction_currents
from .stage import StageBatch
from .stages import module as stage_module
from .stages.common import GROUND, Network

__all__ = [
    "SingularCircuitError",
    "SmallSignal",
    "small_signal",
    "network_of",
    "solve_network",
    "frequency_response",
    "response_of",
    "midband",
    "midband_of",
    "band_edges",
    "band_edges_of",
    "EDGE_DB",
    "F_MIN_HZ",
    "F_MAX_HZ",
]

#: The band edge is where the gain is this many dB below its mid_hz value.
EDGE_DB = 3.01
F_MIN_HZ = 1e-3
F_MAX_HZ = 100e9
#: Points per decade of the bracketing grid for the band edges.
GRID_PER_DECADE = 20
_CHUNK = 200_000    # (nf × n) matrices per solve call, to bound memory


class SingularCircuitError(ArithmeticError):
    """The nodal equations have no unique solution; the message says why physically."""


class SmallSignal(dict):
    """Hybrid-π values at an operating point (arrays): ``gm``, ``gpi``, ``go``
    (S), ``gmu_dc`` (S, base–collector junction conductance), ``gx`` (S,
    ∂I_C/∂V_BC), ``cpi``, ``ctx``, ``cmu`` (F), plus ``rpi`` and ``ro`` (ohm)."""


def small_signal(op: OperatingPoint, model: DeviceModel) -> SmallSignal:
    """Linearise the device model of docs/model.md at ``op`` (arrays of op's shape)."""
    inv_vaf = 0.0 if not np.isfinite(model.vaf) else 1.0 / model.vaf
    ic, ib, dcu, dcw, dbu, dbw = junction_currents(op.vbe, op.vbc, op.is_, op.beta, op.vt,
                                                   inv_vaf)
    q = 1.0 - op.vbc * inv_vaf
    ebe = np.exp(np.minimum(op.vbe / op.vt, 80.0))
    fwd = op.vbe > 0            # ngspice adds the diffusion charge only for V_BE > 0
    cpi = np.where(fwd, model.tf * op.is_ * ebe / op.vt * q, 0.0)
    ctx = np.where(fwd, -model.tf * op.is_ * (ebe - 1.0) * inv_vaf, 0.0)
    cmu = np.full_like(ic, model.cjc)
    with np.errstate(divide="ignore"):
        rpi = 1.0 / dbu
        ro = np.where(dcw < 0, -1.0 / np.where(dcw < 0, dcw, -1.0), np.inf)
    return SmallSignal(gm=dcu, gx=dcw, gpi=dbu, gmu_dc=dbw, go=-dcw, cpi=cpi, ctx=ctx,
                       cmu=cmu, rpi=rpi, ro=ro)


def network_of(topology: str, batch: StageBatch) -> Network:
    return stage_module(topology).network(batch)


def _series_admittance(r, c, w):
    """Admittance of R in series with C: jωC / (1 + jωRC) (C = 0: open)."""
    jwc = 1j * w * c
    return jwc / (1.0 + jwc * r)


def _classes(net: Network, short_mask: np.ndarray):
    """Node index of each node (−1 = ground) after joining the shorted resistors."""
    parent = {n: n for n in net.nodes + (GROUND,)}

    def find(a):
        while parent[a] != a:
            a = parent[a]
        return a

    r_elems = [e for e in net.elements if e.kind == "R"]
    for e, short in zip(r_elems, short_mask, strict=True):
        if short:
            ra, rb = find(e.a), find(e.b)
            if ra != rb:
                if rb == GROUND:
                    ra, rb = rb, ra
                parent[rb] = ra          # ground stays a root
    roots = []
    index = {}
    for n in net.nodes:
        r = find(n)
        if r == GROUND:
            index[n] = -1
        else:
            if r not in roots:
                roots.append(r)
            index[n] = roots.index(r)
    index[GROUND] = -1
    return index, len(roots)


def _why_singular(net: Network, index, ss_sel, mode) -> str:
    """A physical reason for a singular nodal matrix."""
    if index.get(net.base, -1) == index.get(net.emitter, -1) and index.get(net.base, -1) >= 0:
        return "base and emitter are joined by a zero-ohm path"
    return ("the small-signal circuit has a node with no path to ground at this frequency "
            "(a floating node: check that every resistor role has a value and the transistor "
            f"conducts) [{mode}]")


def _ss_list(ss) -> tuple[SmallSignal, ...]:
    """The small-signal values of each transistor (one SmallSignal, or one per device)."""
    return tuple(ss) if isinstance(ss, (list, tuple)) else (ss,)


def solve_network(net: Network, ss, freqs, *, source_ohm: float = 0.0,
                  load_ohm: float | None = None, mode: str = "transfer",
                  per_design: bool = False) -> dict[str, np.ndarray]:
    """Node voltages of the small-signal network.

    Parameters
    ----------
    net : Network
        From :func:`network_of`; element arrays of shape (n,).
    ss : SmallSignal or sequence of SmallSignal
        Arrays of shape (n,); one per transistor of ``net.transistors``.
    freqs : array_like
        Frequencies in Hz, shape (nf,); with ``per_design`` shape (n,), one
        frequency per design (then the result has nf = 1).
    mode : {"transfer", "zin", "zout"}
        ``transfer``: EMF = 1 V through R_S + C_IN, load branch in place;
        ``zin``: no source branch, load in place, 1 A into the input node;
        ``zout``: EMF zeroed (R_S + C_IN to ground), load removed, 1 A into
        the output node.

    Returns
    -------
    dict node -> complex ndarray of shape (nf, n) (ground nodes give 0).
    """
    f = np.asarray(freqs, dtype=float)
    n = int(np.asarray(net.c_in).shape[0])
    if per_design:
        w_all = (2.0 * math.pi * f)[None, :]
    else:
        w_all = (2.0 * math.pi * np.atleast_1d(f))[:, None]
    nf = w_all.shape[0]
    r_elems = [e for e in net.elements if e.kind == "R"]
    shorts = np.stack([np.asarray(e.value) == 0 for e in r_elems], axis=1) if r_elems else \
        np.zeros((n, 0), bool)
    code = (shorts.astype(np.int64) << np.arange(shorts.shape[1], dtype=np.int64)).sum(axis=1)
    out = {name: np.zeros((nf, n), dtype=complex) for name in net.nodes}
    for c in np.flatnonzero(np.bincount(code)):
        sel = np.nonzero(code == c)[0]
        pat = shorts[sel[0]]
        index, size = _classes(net, pat)
        if size == 0:
            continue
        step = max(1, _CHUNK // max(nf, 1))
        for start in range(0, sel.size, step):
            part = sel[start:start + step]
            w = w_all[:, part] if per_design else w_all
            v = _solve_group(net, ss, part, index, size, w, source_ohm, load_ohm, mode)
            for name in net.nodes:
                k = index[name]
                if k >= 0:
                    out[name][:, part] = v[..., k]
    return out


def _solve_group(net, ss, part, index, size, w, source_ohm, load_ohm, mode):
    m = part.size
    nf = w.shape[0]
    # frequency-independent stamps: Y(ω) = G + jω·C, then the series branches
    G = np.zeros((m, size, size))
    Cm = np.zeros((m, size, size))

    def add2(M, a, b, y):
        ia, ib = index[a], index[b]
        if ia >= 0:
            M[:, ia, ia] += y
        if ib >= 0:
            M[:, ib, ib] += y
        if ia >= 0 and ib >= 0:
            M[:, ia, ib] -= y
            M[:, ib, ia] -= y

    for e in net.elements:
        val = np.asarray(e.value, dtype=float)[part]
        if e.kind == "R":
            ok = (val > 0) & np.isfinite(val)
            if not ok.any():
                continue
            add2(G, e.a, e.b, np.where(ok, 1.0 / np.where(ok, val, 1.0), 0.0))
        else:
            if not np.any(val > 0):
                continue
            add2(Cm, e.a, e.b, np.where(val > 0, val, 0.0))

    # each transistor: i_b = y_be·v_be + y_bc·v_bc, i_c = y_ce·v_be + y_cc·v_bc,
    # i_e = −(i_b + i_c)
    sss = _ss_list(ss)
    for (nb, ne, nc), one in zip(net.transistors, sss, strict=True):
        s = {k: np.asarray(v)[part] for k, v in one.items()}
        B, E, C = index[nb], index[ne], index[nc]
        parts_g = {"be": s["gpi"], "bc": s["gmu_dc"], "ce": s["gm"], "cc": s["gx"]}
        parts_c = {"be": s["cpi"], "bc": s["ctx"] + s["cmu"], "ce": 0.0 * s["gm"],
                   "cc": -s["cmu"]}
        for M, y in ((G, parts_g), (Cm, parts_c)):
            def add(i, j, val, M=M):
                if i >= 0 and j >= 0:
                    M[:, i, j] += val
            add(B, B, y["be"] + y["bc"])
            add(B, E, -y["be"])
            add(B, C, -y["bc"])
            add(C, B, y["ce"] + y["cc"])
            add(C, E, -y["ce"])
            add(C, C, -y["cc"])
            add(E, B, -(y["be"] + y["bc"] + y["ce"] + y["cc"]))
            add(E, E, y["be"] + y["ce"])
            add(E, C, y["bc"] + y["cc"])

    Y = G[None] + (1j * w)[:, :, None, None] * Cm[None]
    J = np.zeros((nf, m, size), dtype=complex)
    c_in = np.asarray(net.c_in, dtype=float)[part][None, :]
    c_out = np.asarray(net.c_out, dtype=float)[part][None, :]
    k_in, k_out = index[net.input], index[net.output]
    if mode in ("transfer", "zout"):
        ys = _series_admittance(source_ohm, c_in, w)
        if k_in >= 0:
            Y[:, :, k_in, k_in] += ys
            if mode == "transfer":
                J[:, :, k_in] += ys
    if mode in ("transfer", "zin") and load_ohm is not None:
        yl = _series_admittance(load_ohm, c_out, w)
        if k_out >= 0:
            Y[:, :, k_out, k_out] += yl
    if mode == "zin" and k_in >= 0:
        J[:, :, k_in] += 1.0
    if mode == "zout" and k_out >= 0:
        J[:, :, k_out] += 1.0

    try:
        v = np.linalg.solve(Y, J[..., None])[..., 0]
    except np.linalg.LinAlgError:
        raise SingularCircuitError(_why_singular(net, index, sss, mode)) from None
    return v


def _load_voltage(net: Network, nodes, freqs, load_ohm, per_design=False, part=None):
    """v_load from the output node voltage through the C_OUT–R_L divider."""
    vout = nodes[net.output]
    if load_ohm is None:
        return vout
    f = np.asarray(freqs, dtype=float)
    w = (2.0 * math.pi * f)[None, :] if per_design else (2.0 * math.pi * np.atleast_1d(f))[:, None]
    c_out = np.asarray(net.c_out, dtype=float)[None, :]
    if part is not None:
        c_out = c_out[:, part]
    zc = 1.0 / (1j * w * c_out)
    return vout * load_ohm / (load_ohm + zc)


def response_of(net: Network, ss, freqs, source_ohm: float,
                load_ohm: float | None) -> np.ndarray:
    """v_load / v_emf of a network (any number of transistors) at ``freqs``: (nf, n)."""
    nodes = solve_network(net, ss, freqs, source_ohm=source_ohm, load_ohm=load_ohm,
                          mode="transfer")
    return _load_voltage(net, nodes, freqs, load_ohm)


def frequency_response(request, batch: StageBatch, model: DeviceModel, op: OperatingPoint,
                       freqs, ss: SmallSignal | None = None) -> np.ndarray:
    """v_load / v_emf at ``freqs`` (Hz): complex array of shape (nf, n)."""
    net = network_of(batch.topology, batch)
    ss = small_signal(op, model) if ss is None else ss
    return response_of(net, ss, freqs, request.source_ohm, request.load_ohm)


def _h_at(net, ss, f_per_design, source_ohm, load_ohm):
    nodes = solve_network(net, ss, f_per_design, source_ohm=source_ohm, load_ohm=load_ohm,
                          mode="transfer", per_design=True)
    return _load_voltage(net, nodes, f_per_design, load_ohm, per_design=True)[0]


def midband_of(net: Network, ss, request, want_zout: bool = True) -> dict[str, np.ndarray]:
    """Gain (complex, V/V), Zin and Zout (ohm) of a network at ``request.mid_hz``; (n,)."""
    f = [request.mid_hz]
    h = response_of(net, ss, f, request.source_ohm, request.load_ohm)[0]
    zin_nodes = solve_network(net, ss, f, source_ohm=request.source_ohm,
                              load_ohm=request.load_ohm, mode="zin")
    w = 2.0 * math.pi * request.mid_hz
    with np.errstate(divide="ignore"):
        zin = zin_nodes[net.input][0] + 1.0 / (1j * w * np.asarray(net.c_in, dtype=float))
    if want_zout:
        zout_nodes = solve_network(net, ss, f, source_ohm=request.source_ohm,
                                   load_ohm=request.load_ohm, mode="zout")
        with np.errstate(divide="ignore"):
            zout = zout_nodes[net.output][0] + 1.0 / (1j * w * np.asarray(net.c_out,
                                                                          dtype=float))
    else:
        zout = np.full(zin.shape, np.nan + 0j)
    return {"h": h, "zin": zin, "zout": zout}


def midband(request, batch: StageBatch, model: DeviceModel, op: OperatingPoint,
            ss: SmallSignal | None = None, want_zout: bool = True) -> dict[str, np.ndarray]:
    """Gain (complex, V/V), Zin and Zout (ohm) at ``request.mid_hz``; arrays (n,).

    ``want_zout=False`` skips the output-impedance solve (Zout is then NaN).
    """
    net = network_of(batch.topology, batch)
    ss = small_signal(op, model) if ss is None else ss
    return midband_of(net, ss, request, want_zout)


def edge_grid(mid_hz: float) -> np.ndarray:
    """The bracketing grid, 1 mHz to 100 GHz, GRID_PER_DECADE points a decade."""
    decades = math.log10(F_MAX_HZ / F_MIN_HZ)
    return np.logspace(math.log10(F_MIN_HZ), math.log10(F_MAX_HZ),
                       int(round(decades * GRID_PER_DECADE)) + 1)


def band_edges(request, batch: StageBatch, model: DeviceModel, op: OperatingPoint,
               gain_mid: np.ndarray, ss: SmallSignal | None = None, want_high: bool = True):
    """Lower and upper −3.01 dB edges (Hz, NaN where never crossed) and the passband peak.

    The response is sampled on a log grid from 1 mHz to 100 GHz; scanning away
    from mid_hz, the first grid interval where |H| falls below
    |H(mid)|·10^(−3.01/20) brackets the edge, which is refined by a vectorised
    bracketing root finder (Chandrupatla's method, scipy.optimize.elementwise)
    on |H| against log f.  Returns (f_low, f_high, peak_db) where peak_db is
    the largest 20·log10(|H|/|H(mid)|) on the grid strictly between the edges.
    """
    net = network_of(batch.topology, batch)
    ss = small_signal(op, model) if ss is None else ss
    return band_edges_of(net, ss, request, gain_mid, want_high)


def band_edges_of(net: Network, ss, request, gain_mid: np.ndarray, want_high: bool = True):
    """:func:`band_edges` of a network with any number of transistors (``ss`` one per device)."""
    n = int(np.asarray(net.c_in).shape[0])
    grid = edge_grid(request.mid_hz)
    H = np.abs(response_of(net, ss, grid, request.source_ohm, request.load_ohm))   # (nf, n)
    g = np.asarray(gain_mid, dtype=float)
    thresh = g * 10.0 ** (-EDGE_DB / 20.0)
    below = H < thresh[None, :]
    lo_grid = grid < request.mid_hz
    hi_grid = grid > request.mid_hz
    f_low = np.full(n, np.nan)
    f_high = np.full(n, np.nan)

    # lower edge: the largest grid index below mid with |H| < thresh
    cand = below & lo_grid[:, None]
    has = cand.any(axis=0)
    i_lo = np.where(has, (len(grid) - 1) - np.argmax(cand[::-1], axis=0), 0)
    # upper edge: the smallest grid index above mid with |H| < thresh
    cand_h = below & hi_grid[:, None]
    has_h = cand_h.any(axis=0) & want_high
    i_hi = np.where(has_h, np.argmax(cand_h, axis=0), len(grid) - 1)

    def refine(mask, a, b):
        idx = np.nonzero(mask)[0]
        if idx.size == 0:
            return np.array([])

        def fun(x, k):
            h = _h_at(_sub_net(net, k), _sub_ss(ss, k), np.exp(x), request.source_ohm,
                      request.load_ohm)
            return np.log(np.abs(h)) - np.log(thresh[k])

        res = elementwise.find_root(fun, (np.log(a[idx]), np.log(b[idx])), args=(idx,),
                                    tolerances={"xrtol": 1e-12, "xatol": 1e-12})
        return np.exp(res.x), idx

    nxt = np.minimum(i_lo + 1, len(grid) - 1)
    a_lo = grid[i_lo]
    b_lo = np.where(grid[nxt] < request.mid_hz, grid[nxt], request.mid_hz)
    if has.any():
        x, idx = refine(has, a_lo, b_lo)
        f_low[idx] = x
    prv = np.maximum(i_hi - 1, 0)
    a_hi = np.where(grid[prv] > request.mid_hz, grid[prv], request.mid_hz)
    b_hi = grid[i_hi]
    if has_h.any():
        x, idx = refine(has_h, a_hi, b_hi)
        f_high[idx] = x

    # passband peak between the edges (grid points only)
    lo_b = np.where(np.isnan(f_low), 0.0, f_low)
    hi_b = np.where(np.isnan(f_high), np.inf, f_high)
    inside = (grid[:, None] > lo_b[None, :]) & (grid[:, None] < hi_b[None, :])
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.where(inside, 20.0 * np.log10(H / g[None, :]), -np.inf)
    peak_db = np.max(rel, axis=0)
    return f_low, f_high, peak_db


def _sub_net(net: Network, k) -> Network:
    from dataclasses import replace

    from .stages.common import Element

    els = tuple(Element(e.kind, e.role, e.a, e.b, np.asarray(e.value)[k]) for e in net.elements)
    return replace(net, elements=els, c_in=np.asarray(net.c_in)[k],
                   c_out=np.asarray(net.c_out)[k])


def _sub_ss(ss, k):
    if isinstance(ss, (list, tuple)):
        return tuple(_sub_ss(one, k) for one in ss)
    return SmallSignal({key: np.asarray(v)[k] for key, v in ss.items()})
