"""Every figure of a two-transistor circuit (a chain of two stages or a cascode).

The form's description (:mod:`optimiser.stages.pair`) gives the networks; this
module solves them with the single-stage engine's pieces:

* DC: a capacitor-coupled chain's stages are independent, each solved by
  :func:`optimiser.dc.operating_point`; a direct-coupled chain and a cascode are
  one network, solved by :func:`optimiser.dc.solve_nodes` (Newton on the node
  voltages with the same device equations and junction limiting);
* small signal: :func:`optimiser.ac.midband_of` and :func:`optimiser.ac.band_edges_of`
  over the network with both transistors, each at its own operating point;
* THD and swing: the quasi-static midband network (every capacitor holding its DC
  voltage) solved through both transistors for each EMF value (docs/model.md);
* drift: each transistor's I_C at the corners of both hFE spreads and the
  temperature range (eight corners: T low/high × hFE_min/max of S1 × of S2).

Pure functions over numpy arrays; no I/O.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from inventory.parts import DEFAULT_CAPACITOR_VOLTAGE_V, DEFAULT_RESISTOR_POWER_W, Transistor

from . import ac, distortion
from .dc import CUTOFF_A, OperatingPoint, operating_point, solve_nodes
from .device import DeviceModel, device_from_transistor, junction_currents, scaled, thermal_voltage
from .evaluate import DERATING, FLAT_PASSBAND_DB, RuleVerdicts, _g, _Rule, _si, thd_rule, verdicts
from .request import Request
from .stage import PartRatings, StageBatch
from .stages.pair import (
    PairBatch,
    ac_network,
    capacitor_volts,
    dc_elements,
    qs_elements,
    resistor_volts,
)

__all__ = ["PairEvaluation", "evaluate_pair", "pair_operating_point", "pair_transfer",
           "stage_batches", "CORNERS"]

#: The drift corners: (index of the temperature end, hFE end of S1, hFE end of S2),
#: 0 = low, 1 = high.
CORNERS = tuple((t, b1, b2) for t in (0, 1) for b1 in (0, 1) for b2 in (0, 1))


def stage_batches(batch: PairBatch) -> tuple[StageBatch, StageBatch]:
    """The two single stages of a capacitor-coupled chain (C_COUPLE as S1's C_OUT and
    S2's C_IN, so each stage sees the other as a capacitor)."""
    form = batch.form
    out = []
    for k, (stage, kind) in enumerate(zip(form.stages, form.stage_kinds, strict=True)):
        vals = {r.split(".", 1)[1]: v for r, v in batch.values.items()
                if r.startswith(stage + ".")}
        vals["C_OUT" if k == 0 else "C_IN"] = batch.role("C_COUPLE")
        out.append(StageBatch.from_values(kind, **vals))
    return out[0], out[1]


def _op(vbe, vbc, vb, ve, vc, vx, is_, beta, vt, iva, model, conv) -> OperatingPoint:
    ic, ib, *_ = junction_currents(vbe, vbc, is_, beta, vt, iva)
    shape = np.shape(ic)
    b = lambda a: np.broadcast_to(np.asarray(a, dtype=float), shape)  # noqa: E731
    vce = vbe - vbc
    return OperatingPoint(
        ic=ic, ib=ib, ie=ic + ib, vb=b(vb), ve=b(ve), vc=b(vc), vbe=vbe, vce=vce,
        pq=ic * vce + ib * vbe, saturated=vce < model.vce_sat, cutoff=ic < CUTOFF_A, vbc=vbc,
        vx=b(vx), is_=b(is_), beta=b(beta), vt=b(vt), converged=np.broadcast_to(conv, shape))


def _inv_vaf(model: DeviceModel) -> float:
    return 0.0 if not np.isfinite(model.vaf) else 1.0 / model.vaf


def pair_operating_point(batch: PairBatch, supply_v: float, models, temp_c=25.0,
                         betas=(None, None)):
    """Both transistors' operating points and every node's DC voltage.

    ``temp_c`` and each of ``betas`` (β at 25 °C, ``None``: nominal) may be arrays
    of shape (1, K) for K corners, giving results of shape (n, K).

    Returns (ops, volts): a list of two :class:`~optimiser.dc.OperatingPoint`, and
    node -> voltage (V) for every node of the form (supply and ground included).
    """
    form = batch.form
    corner = np.ndim(temp_c) == 2 or any(np.ndim(b) == 2 for b in betas if b is not None)
    if form.coupling == "capacitor":
        ops = [operating_point(sb.topology, supply_v, sb, m, temp_c=temp_c, beta=beta)
               for sb, m, beta in zip(stage_batches(batch), models, betas, strict=True)]
        volts = {}
        for stage, op in zip(form.stages, ops, strict=True):
            volts.update({f"{stage}.base": op.vb, f"{stage}.emitter": op.ve,
                          f"{stage}.collector": op.vc, f"{stage}.junction": op.vx})
    else:
        params = []
        for m, beta in zip(models, betas, strict=True):
            is_t, beta_t = scaled(m, temp_c, beta)
            params.append((is_t, beta_t, thermal_voltage(temp_c), _inv_vaf(m)))
        els = dc_elements(batch, col=corner)
        volts, junc, conv = solve_nodes(form.nodes(), {"ground": 0.0, "supply": supply_v},
                                        els, form.devices, params)
        ops = []
        for (b, e, c), (vbe, vbc), m, p in zip(form.devices, junc, models, params, strict=True):
            vx = volts.get(e.rsplit(".", 1)[0] + ".junction", volts[e] * 0.0)
            ops.append(_op(vbe, vbc, volts[b], volts[e], volts[c], vx, *p, m, conv))
    shape = np.shape(ops[0].ic)
    volts = {k: np.broadcast_to(v, shape) for k, v in volts.items()}
    volts["supply"] = np.full(shape, float(supply_v))
    volts["ground"] = np.zeros(shape)
    return ops, volts


def pair_transfer(request: Request, batch: PairBatch, models, ops, volts, emf):
    """Load voltage and each transistor's V_CE and I_C for EMF values ``emf`` (n, k), the
    capacitors holding their nominal DC voltages.  Returns (v_load, [vce1, vce2],
    [ic1, ic2]), each (n, k)."""
    form = batch.form
    emf = np.asarray(emf, dtype=float)
    els = qs_elements(batch, volts, request.source_ohm, request.load_ohm)
    params = [(np.asarray(op.is_)[:, None], np.asarray(op.beta)[:, None],
               np.asarray(op.vt)[:, None], _inv_vaf(m)) for op, m in zip(ops, models,
                                                                         strict=True)]
    guess = {n: np.asarray(volts[n])[:, None] for n in form.nodes() if n in volts}
    v, junc, _ = solve_nodes(form.nodes() + ("source", "load"),
                             {"ground": 0.0, "supply": request.supply_v, "emf": emf}, els,
                             form.devices, params, guess)
    vces, ics = [], []
    for (vbe, vbc), p in zip(junc, params, strict=True):
        with np.errstate(over="ignore", invalid="ignore"):   # far past the swing limit
            ic, *_ = junction_currents(vbe, vbc, *p)
        vces.append(vbe - vbc)
        ics.append(ic)
    return v["load"], vces, ics


@dataclass
class PairEvaluation(RuleVerdicts):
    """Figures and verdicts of ``n`` two-transistor circuits; arrays (n,).

    ``metrics``: the whole circuit's gain, gain_db, f_low_hz, f_high_hz, zin_ohm,
    zout_ohm, thd_pct, swing_vpk; ``stages``: per transistor (S1, S2) its ic_a,
    vce_v, vbe_v, vb_v, ve_v, vc_v, pd_q_w, ic_drift_pct; ``volts``: every node's DC
    voltage; ``corners``: per transistor, arrays (n, 8) over :data:`CORNERS`.
    """

    request: Request
    batch: PairBatch
    transistors: tuple[Transistor, Transistor]
    models: tuple[DeviceModel, DeviceModel]
    ops: list[OperatingPoint]
    volts: dict[str, np.ndarray]
    metrics: dict[str, np.ndarray]
    stages: list[dict[str, np.ndarray]]
    corners: list[dict[str, np.ndarray]]
    capacitors: dict
    valid: np.ndarray
    meets: np.ndarray
    rules: list[_Rule] = field(default_factory=list)
    extra: dict = field(default_factory=dict)



def _corner_arrays(request: Request, models):
    t = np.array([[request.temp_c[c[0]] for c in CORNERS]], dtype=float)
    betas = tuple(np.array([[m.corner_betas[c[1 + k]] for c in CORNERS]], dtype=float)
                  for k, m in enumerate(models))
    return t, betas


def evaluate_pair(request: Request, batch: PairBatch, transistors, ratings: PartRatings |
                  None = None, *, band_edges: bool = True, large_signal: bool = True,
                  derating: dict | None = None, temp_c=25.0,
                  betas=(None, None)) -> PairEvaluation:
    """All figures and verdicts of docs/model.md for two-transistor circuits.

    ``transistors`` is one :class:`~inventory.parts.Transistor` per transistor (S1, S2).
    The figures are taken at ``temp_c`` with each transistor's β at 25 °C ``betas``
    (``None``: nominal); each may be an array (n,), one value per circuit (the Monte
    Carlo samples of :func:`optimiser.yield_.monte_carlo_pair`).
    """
    der = dict(DERATING)
    if derating:
        der.update(derating)
    form = batch.form
    transistors = tuple(transistors)
    models = tuple(device_from_transistor(t) for t in transistors)
    n = batch.n
    nan = np.full(n, np.nan)
    ops, volts = pair_operating_point(batch, request.supply_v, models, temp_c=temp_c,
                                      betas=betas)
    ss = tuple(ac.small_signal(op, m) for op, m in zip(ops, models, strict=True))
    net = ac_network(batch)
    mid = ac.midband_of(net, ss, request)
    gain = np.abs(mid["h"])
    with np.errstate(divide="ignore"):
        gain_db = 20.0 * np.log10(gain)
    has_fhigh = all(m.has_ft and m.has_cob for m in models)
    f_low, f_high, peak_db = nan.copy(), nan.copy(), nan.copy()
    if band_edges:
        f_low, f_high, peak_db = ac.band_edges_of(net, ss, request, gain, want_high=has_fhigh)
        if not has_fhigh:
            f_high = nan.copy()

    # drift corners
    t_c, b_c = _corner_arrays(request, models)
    cops, _ = pair_operating_point(batch, request.supply_v, models, temp_c=t_c, betas=b_c)
    corners = []
    for k, cop in enumerate(cops):
        corners.append({"beta25": np.broadcast_to(b_c[k], cop.ic.shape).copy(),
                        "temp_c": np.broadcast_to(t_c, cop.ic.shape).copy(),
                        "ic_a": np.asarray(cop.ic), "vce_v": np.asarray(cop.vce),
                        "pq_w": np.asarray(cop.pq)})

    thd, swing, swing_emf = nan.copy(), nan.copy(), nan.copy()
    thd_active = np.ones(n, dtype=bool)
    if large_signal:
        def transfer(emf, rows=None):
            b, o, v = (batch, ops, volts) if rows is None else (
                batch.take(rows), [op.take(rows) for op in ops],
                {k: a[rows] for k, a in volts.items()})
            return pair_transfer(request, b, models, o, v, emf)

        def state(emf, rows=None):
            v, vces, ics = transfer(emf, rows)
            ok = np.ones(v.shape, dtype=bool)
            for vce, ic, op, m in zip(vces, ics, ops, models, strict=True):
                ic0 = np.asarray(op.ic)[:, None] if rows is None else np.asarray(op.ic)[rows, None]
                ok &= distortion.forward_active(vce, ic, ic0, m.vce_sat)
            return v, ok

        thd, thd_active = distortion.thd_active_of(state, request.input_vpk, n)
        if large_signal != "thd":
            swing, swing_emf = distortion.swing_of(state, n, request.supply_v)

    stages = []
    for k, op in enumerate(ops):
        with np.errstate(divide="ignore", invalid="ignore"):
            drift = 100.0 * np.max(np.abs(corners[k]["ic_a"] - op.ic[:, None]), axis=1) / op.ic
        stages.append({"ic_a": np.asarray(op.ic), "vce_v": np.asarray(op.vce),
                       "vbe_v": np.asarray(op.vbe), "vb_v": np.asarray(op.vb),
                       "ve_v": np.asarray(op.ve), "vc_v": np.asarray(op.vc),
                       "pd_q_w": np.asarray(op.pq), "ic_drift_pct": drift})
    metrics = {"gain": gain, "gain_db": gain_db, "f_low_hz": f_low, "f_high_hz": f_high,
               "zin_ohm": np.abs(mid["zin"]), "zout_ohm": np.abs(mid["zout"]),
               "thd_pct": thd, "swing_vpk": swing}

    rules: list[_Rule] = []
    for stage, op, m, cop in zip(form.stages, ops, models, cops, strict=True):
        vs = m.vce_sat
        rules.append(_Rule("validity", f"{stage}.converged", ~np.asarray(op.converged),
                           lambda i, s=stage: f"{s}: the operating point could not be solved "
                                              "(no convergence)"))
        rules.append(_Rule("validity", f"{stage}.saturated", op.vce < vs,
                           lambda i, s=stage, op=op, vs=vs:
                           f"{s}: V_CE {_g(op.vce[i])} V is below vce_sat {_g(vs)} V: "
                           "the transistor is saturated"))
        rules.append(_Rule("validity", f"{stage}.cutoff", op.cutoff,
                           lambda i, s=stage, op=op: f"{s}: the transistor is cut off "
                                                     f"(I_C {_si(op.ic[i], 'A')})"))
        cconv = np.asarray(cop.converged).all(axis=1) | ~np.asarray(op.converged)
        rules.append(_Rule("validity", f"{stage}.corner_converged", ~cconv,
                           lambda i, s=stage: f"{s}: the operating point at a drift corner "
                                              "could not be solved (no convergence)"))
        csat = (cop.vce < vs).any(axis=1) & ~(op.vce < vs)
        rules.append(_Rule("validity", f"{stage}.corner_saturated", csat,
                           lambda i, s=stage, cop=cop, vs=vs:
                           f"{s}: at a drift corner V_CE falls to {_g(cop.vce[i].min())} V, "
                           f"below vce_sat {_g(vs)} V"))
        if math.isfinite(m.ic_max):
            over = np.maximum(op.ic, cop.ic.max(axis=1)) > m.ic_max
            rules.append(_Rule("validity", f"{stage}.ic_max", over,
                               lambda i, s=stage, op=op, cop=cop, m=m:
                               f"{s}: I_C reaches {_si(max(op.ic[i], cop.ic[i].max()), 'A')}, "
                               f"over the transistor's ic_max {_si(m.ic_max, 'A')}"))
        if math.isfinite(m.pd):
            over = np.maximum(op.pq, cop.pq.max(axis=1)) > m.pd
            rules.append(_Rule("validity", f"{stage}.pd", over,
                               lambda i, s=stage, op=op, cop=cop, m=m:
                               f"{s}: the transistor dissipates "
                               f"{_g(max(op.pq[i], cop.pq[i].max()))} W, over its pd "
                               f"{_g(m.pd)} W"))
        if math.isfinite(m.vceo):
            vmax = np.maximum(op.vce, cop.vce.max(axis=1))
            rules.append(_Rule("validity", f"{stage}.vceo", vmax > m.vceo,
                               lambda i, s=stage, vmax=vmax, m=m:
                               f"{s}: V_CE reaches {_g(vmax[i])} V, over the transistor's "
                               f"vceo {_g(m.vceo)} V"))
    # derating
    r = ratings or PartRatings()
    rf, cf = der["resistor_power"], der["capacitor_voltage"]
    rv = resistor_volts(batch, volts)
    for role in form.role_names:
        if form.kind(role) != "resistor":
            continue
        val = batch.role(role)
        with np.errstate(divide="ignore", invalid="ignore"):
            p = np.where(val > 0, rv[role] ** 2 / np.where(val > 0, val, 1.0), 0.0)
        rating = np.broadcast_to(np.asarray(r.power_w.get(role, DEFAULT_RESISTOR_POWER_W),
                                            dtype=float), (n,))
        share = np.broadcast_to(np.asarray(r.power_share.get(role, 1.0), dtype=float), (n,))
        rules.append(_Rule("validity", f"power_{role}", p * share > rf * rating,
                           lambda i, role=role, p=p, rating=rating:
                           f"{role} dissipates {_g(p[i], 2)} W, over {rf * 100:g} % of its "
                           f"{rating[i]:g} W rating", {"power_w": p}))
    caps = capacitor_volts(batch, volts)
    plus = {}
    for role, (v, a, b) in caps.items():
        if role not in form.role_names:
            continue
        present = batch.role(role) > 0
        plus[role] = np.where(v >= 0, a, b).astype(object)
        rating = np.broadcast_to(np.asarray(r.voltage_v.get(role, DEFAULT_CAPACITOR_VOLTAGE_V),
                                            dtype=float), (n,))
        rules.append(_Rule("validity", f"voltage_{role}", present & (np.abs(v) > cf * rating),
                           lambda i, role=role, v=v, rating=rating:
                           f"{role} sees {_g(abs(v[i]))} V, over {cf * 100:g} % of its "
                           f"{rating[i]:g} V rating", {"volts": v}))
        pol = np.broadcast_to(np.asarray(r.polarised.get(role, False), dtype=bool), (n,))
        if pol.any():
            rules.append(_Rule("warning", f"polarity_{role}", present & pol & (np.abs(v) < 0.1),
                               lambda i, role=role, v=v:
                               f"polarised {role} has only {_g(abs(v[i]))} V across it: no "
                               "clear polarity; use a non-polarised capacitor"))
    if band_edges:
        peak = np.where(np.isfinite(peak_db), peak_db, -np.inf)
        rules.append(_Rule("validity", "flat_passband", peak > FLAT_PASSBAND_DB,
                           lambda i: f"the gain rises {_g(peak_db[i], 2)} dB above its mid_hz "
                                     f"value inside the passband (limit {_g(FLAT_PASSBAND_DB)} dB)"))

    # targets
    if request.gain is not None:
        tdb, tol = 20.0 * math.log10(request.gain), request.gain_tol_db
        rules.append(_Rule("target", "gain", ~(np.abs(gain_db - tdb) <= tol),
                           lambda i: f"gain_db {_g(gain_db[i])} outside {tdb:g} ± {tol:g}"))
    if band_edges and request.f_low_max_hz is not None:
        lim = request.f_low_max_hz
        rules.append(_Rule("target", "f_low_hz", np.isfinite(f_low) & (f_low > lim),
                           lambda i: f"f_low_hz {_g(f_low[i])} > {lim:g}"))
    if request.f_high_min_hz is not None:
        lim2 = request.f_high_min_hz
        if not has_fhigh:
            rules.append(_Rule("target", "f_high_hz", np.ones(n, bool),
                               lambda i: "a transistor lacks ft/cob: f_high_hz cannot be "
                                         f"computed for the target {lim2:g}"))
        elif band_edges:
            rules.append(_Rule("target", "f_high_hz", np.isfinite(f_high) & (f_high < lim2),
                               lambda i: f"f_high_hz {_g(f_high[i])} < {lim2:g}"))
    zin, zout = metrics["zin_ohm"], metrics["zout_ohm"]
    if request.zin_min_ohm is not None:
        lim3 = request.zin_min_ohm
        rules.append(_Rule("target", "zin_ohm", ~(zin >= lim3),
                           lambda i: f"zin_ohm {_g(zin[i])} < {lim3:g}"))
    if request.zout_max_ohm is not None:
        lim4 = request.zout_max_ohm
        rules.append(_Rule("target", "zout_ohm", ~(zout <= lim4),
                           lambda i: f"zout_ohm {_g(zout[i])} > {lim4:g}"))
    for stage, st in zip(form.stages, stages, strict=True):
        if request.ic_drift_max_pct is not None:
            lim5, d = request.ic_drift_max_pct, st["ic_drift_pct"]
            rules.append(_Rule("target", f"{stage}.ic_drift_pct", ~(d <= lim5),
                               lambda i, s=stage, d=d, lim5=lim5:
                               f"{s}: ic_drift_pct {_g(d[i])} > {lim5:g}"))
        if request.ic_min_a is not None:
            lim6, ic = request.ic_min_a, st["ic_a"]
            rules.append(_Rule("target", f"{stage}.ic_a", ~(ic >= lim6),
                               lambda i, s=stage, ic=ic, lim6=lim6:
                               f"{s}: ic_a {_g(ic[i])} < {lim6:g}"))
    if large_signal and request.thd_max_pct is not None:
        rules.append(thd_rule(request, thd, thd_active))
    if large_signal:
        clip = np.isfinite(swing_emf) & (swing_emf < request.input_vpk)
        rules.append(_Rule("warning", "clipping", clip,
                           lambda i: f"an input of {_g(request.input_vpk)} V peak drives a "
                                     "transistor out of the forward-active region (both stay "
                                     f"linear up to {_g(swing_emf[i])} V peak)"))
    valid, meets = verdicts(rules, n)
    return PairEvaluation(
        request=request, batch=batch, transistors=transistors, models=models, ops=ops,
        volts=volts, metrics=metrics, stages=stages, corners=corners, capacitors=caps,
        valid=valid, meets=meets, rules=rules,
        extra={"peak_db": peak_db, "swing_emf_vpk": swing_emf, "plus": plus})
