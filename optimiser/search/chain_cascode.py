"""Cascodes from one drawer: :func:`search_cascode` (docs/search.md, "Cascodes").

The lower transistor (S1) with ``RC`` and its emitter resistors is a ce stage whose
collector sees the upper transistor's emitter; the divider R1/R2/R3 sets both bases.

1. **Dividers**: every triple of resistor values in stock (one piece each) as R1, R2,
   R3, with closed-form DC estimates (the divider unloaded): the lower base at
   V_B1 = V·R3/ΣR, the upper base at V_B2 = V·(R2 + R3)/ΣR.  Kept: V_B1 between
   V_BE + :data:`VE_MIN_V` and half the supply, V_B2 at least :data:`VCE_MIN_V` above
   V_B1 (the lower transistor's V_CE) and at least :data:`VCE_MIN_V` below the supply.
   Triples alike in V_B1 (steps of :data:`VB_STEP_V`) and in the lower base's source
   resistance R_TH = R3‖(R1 + R2) (within :data:`RTH_RATIO`) form a lower-bias class,
   whose estimates below are made once, with its first triple's V_B1 and R_TH; within
   a class, of the triples alike in V_B2 (steps of :data:`VB_STEP_V`) the one of least
   current is kept.
2. **Emitters**: with every pair (RE, RE_BYP) of resistor values in stock or absent
   (not both), the lower I_C ≈ (V_B1 − V_BE)/(RE + RE_BYP + R_TH/β); kept when it is
   at least ``ic_min_a`` and at most :data:`IC_MAX_A`.
3. **Collector resistor**: the gain from the source is estimated as
   k_in·(RC‖R_L)/(r_e + RE) with k_in = Z_in/(Z_in + R_S), Z_in = R2‖R3‖β(r_e + RE);
   with a gain target, the two stocked values either side of the RC the target asks;
   without one, those either side of the RC that centres the upper collector between
   V_B2 and the supply.  Kept: the estimated gain within the target's tolerance
   widened by :data:`GAIN_MARGIN_DB`, both V_CE at least :data:`VCE_MIN_V`, Z_in at
   least ``zin_min_ohm``; without a gain target, at least unity.  Of each lower
   transistor's estimates the best :data:`LOWER_KEEP` by the score's terms known before
   the upper base is chosen (gain, distortion, collector current) go on; each takes, of
   its lower-bias class's triples, the one whose V_B2 shares the room between the two
   V_CE most equally (:func:`_upper`).
4. The survivors are ranked by the chain score's terms (:func:`optimiser.score.score_terms`)
   on the estimates (I_C at nominal and at the drift corners of the lower transistor
   by :func:`optimiser.dc.forward_active_ic`); the best :data:`CANDIDATES` of each
   transistor pair get their capacitors (:func:`capacitors_for`) and pieces
   (:func:`allocate`, every value counted over all roles against stock) and go to
   :func:`.chain_confirm.confirm_chains`, which evaluates them with the engine and
   ranks them by :mod:`.chain_score` exactly among themselves.

Not proven to hold the best cascode the drawer allows (roles of several pieces,
other capacitors, dividers other than their class's representative and candidates
beyond the estimate's best are not examined); ``search`` says what was searched.
"""

from __future__ import annotations

import math
import time
from collections import defaultdict
from itertools import product

import numpy as np

from inventory.parts import StockSnapshot
from inventory.values import format_value
from optimiser.dc import forward_active_ic
from optimiser.design import Piece, RolePick
from optimiser.device import device_from_transistor, thermal_voltage
from optimiser.evaluate import DERATING
from optimiser.request import Request
from optimiser.score import hd2_pct, score_terms
from optimiser.search.tree import usable_transistors

__all__ = ["search_cascode", "dividers", "capacitors_for", "allocate", "CANDIDATES",
           "LOWER_KEEP", "PRE_RANK",
           "IC_MAX_A", "VCE_MIN_V", "VE_MIN_V", "GAIN_MARGIN_DB", "VB_STEP_V", "RTH_RATIO"]

#: Candidates of each transistor pair handed to the engine.
CANDIDATES = 300
#: The estimates ranked first without the drift, of which this many times
#: :data:`CANDIDATES` get it.
PRE_RANK = 8
#: The estimates of each lower transistor kept, by the score's terms known before the
#: upper base is chosen.
LOWER_KEEP = 30000
#: The largest lower collector current tried (A).
IC_MAX_A = 10e-3
#: The least V_CE of either transistor, and the least room between V_B2 and the supply,
#: in the closed-form estimates (V).
VCE_MIN_V = 1.0
#: The least voltage across the lower emitter resistors in the estimates (V).
VE_MIN_V = 0.3
#: How far (dB) the estimated gain may lie beyond the target's tolerance.
GAIN_MARGIN_DB = 1.5
#: Divider classes: V_B1 and V_B2 in steps of this (V) ...
VB_STEP_V = 0.1
#: ... and R3‖(R1 + R2) within this ratio.
RTH_RATIO = 1.25
#: The capacitor roles, in the order they are given stock, with the node whose DC
#: voltage each holds in the estimates.
CAP_ROLES = ("C_BYP", "C_IN", "C_B", "C_OUT")


def _rows_by_value(rows, builds: int) -> dict[float, list]:
    out: dict[float, list] = defaultdict(list)
    for r in rows:
        if r.qty > 0:
            out[r.value].append(r)
    return {v: sorted(rs, key=lambda r: -r.qty) for v, rs in out.items()
            if sum(r.qty for r in rs) >= builds}


def dividers(supply_v: float, values: np.ndarray, vbe: float) -> dict[str, np.ndarray]:
    """Step 1 of the module docstring: the divider triples kept, arrays ``R1``, ``R2``,
    ``R3``, ``vb1``, ``vb2``, ``rth`` (Ω, V) and ``cls``, the lower-bias class of each
    (V_B1 and R3‖(R1 + R2) alike), sorted by class then V_B2; of the triples alike in
    class and V_B2 (steps of :data:`VB_STEP_V`) the one of least current."""
    V = float(supply_v)
    r1, r2, r3 = (a.ravel() for a in np.meshgrid(values, values, values, indexing="ij"))
    s = r1 + r2 + r3
    vb1 = V * r3 / s
    vb2 = V * (r2 + r3) / s
    rth = r3 * (r1 + r2) / s
    ok = ((vb1 >= vbe + VE_MIN_V) & (vb1 <= V / 2.0) & (vb2 - vb1 >= VCE_MIN_V)
          & (V - vb2 >= VCE_MIN_V))
    r1, r2, r3, s, vb1, vb2, rth = (a[ok] for a in (r1, r2, r3, s, vb1, vb2, rth))
    lower = np.stack([np.round(vb1 / VB_STEP_V), np.floor(np.log(rth) / math.log(RTH_RATIO))],
                     axis=1)
    _, cls = np.unique(lower, axis=0, return_inverse=True)
    cls = cls.ravel()
    key = np.stack([cls, np.round(vb2 / VB_STEP_V)], axis=1)
    order = np.lexsort((-s, key[:, 1], key[:, 0]))
    key = key[order]
    first = np.ones(len(order), dtype=bool)
    first[1:] = np.any(key[1:] != key[:-1], axis=1)
    keep = order[first]
    return {"R1": r1[keep], "R2": r2[keep], "R3": r3[keep], "vb1": vb1[keep],
            "vb2": vb2[keep], "rth": rth[keep], "cls": cls[keep]}


def _par(a, b):
    return a * b / (a + b)


def _lower(request: Request, div, values, t1):
    """Steps 2 and 3 for the lower transistor ``t1``: every lower-bias class (its first
    triple's V_B1 and R_TH) with every emitter pair whose I_C lies in range, and the RC
    either side of the one wanted; arrays over the kept estimates (``c`` the class)."""
    V = float(request.supply_v)
    vt = float(thermal_voltage(25.0))
    beta, vbe = float(t1.beta_nominal), float(t1.vbe)
    opts = np.concatenate([[0.0], values])
    re, byp = (a.ravel() for a in np.meshgrid(opts, opts, indexing="ij"))
    some = (re > 0) | (byp > 0)
    # the gain k_in·(RC‖R_L)/(r_e + RE) is below (RC‖R_L)/RE: RE at most that over the
    # least gain accepted (unity without a target)
    g_lo = 1.0 if request.gain is None else 10.0 ** (
        (request.gain_db - request.gain_tol_db - GAIN_MARGIN_DB) / 20.0)
    most = values[-1] if request.load_ohm is None else min(values[-1], request.load_ohm)
    some &= re <= most / g_lo
    re, byp = re[some], byp[some]
    tot = re + byp
    order = np.argsort(tot, kind="stable")
    re, byp, tot = re[order], byp[order], tot[order]
    _, head = np.unique(div["cls"], return_index=True)
    vb1, rth, rin = div["vb1"][head], div["rth"][head], _par(div["R2"][head], div["R3"][head])
    lo = request.ic_min_a or 0.0
    hi = max(IC_MAX_A, lo)
    # I_C ≈ (V_B1 − V_BE)/(RE + RE_BYP + R_TH/β) in [lo, hi]: RE + RE_BYP in an interval
    a = np.searchsorted(tot, (vb1 - vbe) / hi - rth / beta, side="left")
    b = np.searchsorted(tot, (vb1 - vbe) / lo - rth / beta if lo > 0 else np.inf,
                        side="right")
    n = np.maximum(b - a, 0)
    c = np.repeat(np.arange(len(head)), n)
    start = np.repeat(np.cumsum(n) - n, n)
    e = a[c] + np.arange(int(n.sum())) - start
    re_, byp_ = re[e], byp[e]
    ic = (vb1[c] - vbe) / (tot[e] + rth[c] / beta)
    r_e = vt / ic
    zin = _par(rin[c], beta * (r_e + re_))
    k_in = zin / (zin + float(request.source_ohm))
    rl = request.load_ohm
    room = V - vb1[c] - 2.0 * VCE_MIN_V          # I_C·RC at most
    if request.gain is not None:
        want = float(request.gain) * (r_e + re_) / k_in      # RC‖R_L
        rc_want = want if rl is None else np.where(want < rl, 1.0 / np.maximum(
            1.0 / want - 1.0 / rl, 1e-30), np.inf)
    else:
        rc_want = room / (2.0 * ic)
    # RC within the stocked values' span (a neighbour is within its step) and its drop
    # within the room left
    near = ((rc_want >= values[0] / 2.0) & (rc_want <= 2.0 * values[-1])
            & (ic * np.minimum(rc_want, values[-1]) <= 2.0 * (V - vb1[c] - 2.0 * VCE_MIN_V)))
    c, re_, byp_, ic, r_e, zin, k_in, rc_want = (
        a_[near] for a_ in (c, re_, byp_, ic, r_e, zin, k_in, rc_want))
    pos = np.searchsorted(values, rc_want)
    below, above = np.clip(pos - 1, 0, len(values) - 1), np.clip(pos, 0, len(values) - 1)
    two = above != below                  # at either end of the values: one neighbour
    j = np.concatenate([below, above[two]])
    rows = np.concatenate([np.arange(len(ic)), np.flatnonzero(two)])
    rc = values[j]
    c, re_, byp_, ic, r_e, zin, k_in = (a_[rows] for a_ in (c, re_, byp_, ic, r_e, zin, k_in))
    load = rc if rl is None else _par(rc, rl)
    gain_db = 20.0 * np.log10(k_in * load / (r_e + re_))
    ok = ic * rc <= V - vb1[c] - 2.0 * VCE_MIN_V
    if request.gain is not None:
        ok &= np.abs(gain_db - request.gain_db) <= request.gain_tol_db + GAIN_MARGIN_DB
    else:
        ok &= gain_db >= 0.0              # a gain stage: at least unity without a target
    if request.zin_min_ohm is not None:
        ok &= zin >= request.zin_min_ohm
    out = {"c": c, "RE": re_, "RE_BYP": byp_, "RC": rc, "ic": ic, "gain_db": gain_db,
           "k_in": k_in, "vb1": vb1[c], "rth": rth[c]}
    out = {k: v[ok] for k, v in out.items()}
    # the best LOWER_KEEP by the score's terms known before the upper base is chosen
    # (gain, distortion and the collector current; the others are ≥ 0)
    part = sum(score_terms(gain_inf_db=out["gain_db"], target_db=request.gain_db,
                           tol_db=request.gain_tol_db, drift_pct=0.0,
                           hd2_pct=hd2_pct(request.input_vpk, out["k_in"],
                                           out["ic"] * out["RE"] / vt),
                           supply_a=out["ic"], emptied=0).values())
    keep = _best(part, LOWER_KEEP)
    return {k: v[keep] for k, v in out.items()} | {"estimated": len(part)}


def _upper(request: Request, div, est, t1, t2):
    """Each estimate's divider: of its class's triples, the one whose V_B2 comes
    nearest to sharing what the supply leaves between the two V_CE equally; kept when
    both V_CE reach :data:`VCE_MIN_V`.  Adds ``d`` (the triple), ``vb2``, ``vce1``,
    ``vce2``."""
    V = float(request.supply_v)
    vbe2 = float(t2.vbe)
    ve1 = est["ic"] * (est["RE"] + est["RE_BYP"]) * (1.0 + 1.0 / float(t1.beta_nominal))
    ideal = (V - est["ic"] * est["RC"] + ve1) / 2.0 + vbe2
    key = div["cls"] * 100.0 + div["vb2"]            # sorted: class, then V_B2 (< 100 V)
    lo = np.searchsorted(div["cls"], est["c"], side="left")
    hi = np.searchsorted(div["cls"], est["c"], side="right") - 1
    k = np.clip(np.searchsorted(key, est["c"] * 100.0 + ideal), lo, hi)
    km = np.clip(k - 1, lo, hi)
    d = np.where(np.abs(div["vb2"][km] - ideal) < np.abs(div["vb2"][k] - ideal), km, k)
    vb2 = div["vb2"][d]
    vce1 = vb2 - vbe2 - ve1
    vce2 = V - est["ic"] * est["RC"] - (vb2 - vbe2)
    ok = (vce1 >= VCE_MIN_V) & (vce2 >= VCE_MIN_V)
    out = {k_: v[ok] for k_, v in est.items()}
    out.update(d=d[ok], vb2=vb2[ok], vce1=vce1[ok], vce2=vce2[ok])
    return out


def _ranked(request: Request, est, div, t1, top: int) -> np.ndarray:
    """The indices of the best ``top`` estimates by the chain score's terms."""
    if len(est["ic"]) == 0:
        return np.zeros(0, int)
    m = device_from_transistor(t1)
    V = float(request.supply_v)
    # first by the terms without the drift (every term ≥ 0), the best PRE_RANK·top of
    # them then with the drift at the lower transistor's corners
    d = est["d"]
    div_a = V / (div["R1"][d] + div["R2"][d] + div["R3"][d])
    vt = float(thermal_voltage(25.0))
    base = sum(score_terms(gain_inf_db=est["gain_db"], target_db=request.gain_db,
                           tol_db=request.gain_tol_db, drift_pct=0.0,
                           hd2_pct=hd2_pct(request.input_vpk, est["k_in"],
                                           est["ic"] * est["RE"] / vt),
                           supply_a=est["ic"] + div_a, emptied=0,
                           vce_v=np.minimum(est["vce1"], est["vce2"]), supply_v=V).values())
    pre = _best(base, PRE_RANK * top)
    est = {k: v[pre] for k, v in est.items()}
    re_tot = est["RE"] + est["RE_BYP"]
    ic0 = forward_active_ic(est["vb1"], est["rth"], re_tot, m)
    drift = np.zeros_like(ic0)
    for temp in request.temp_c:
        for b in m.corner_betas:
            ic = forward_active_ic(est["vb1"], est["rth"], re_tot, m, temp_c=temp, beta=b)
            drift = np.maximum(drift, 100.0 * np.abs(ic - ic0) / ic0)
    div_a = div_a[pre]
    thd = hd2_pct(request.input_vpk, est["k_in"], ic0 * est["RE"] / vt)
    terms = score_terms(gain_inf_db=est["gain_db"], target_db=request.gain_db,
                        tol_db=request.gain_tol_db, drift_pct=drift, hd2_pct=thd,
                        supply_a=ic0 + div_a, emptied=0,
                        vce_v=np.minimum(est["vce1"], est["vce2"]), supply_v=V)
    total = sum(terms.values())
    return pre[_best(total, top)]


def _best(x: np.ndarray, k: int) -> np.ndarray:
    """The indices of the ``k`` least of ``x``, in order."""
    if len(x) > k:
        part = np.argpartition(x, k)[:k]
        return part[np.argsort(x[part], kind="stable")]
    return np.argsort(x, kind="stable")


def capacitors_for(request: Request, rows: dict[float, list], volts: dict[str, float],
                   corners: dict[str, float]) -> dict[str, tuple[float, float]] | None:
    """Each capacitor role's (value, least rating) for one candidate: ``C_BYP`` the
    largest value in stock rated for its DC voltage (the bypass corner sits behind the
    emitter's low impedance, usually the lowest); ``C_IN``, ``C_B`` and ``C_OUT`` the
    smallest value whose corner with the resistance ``corners[role]`` (Ω) is at or
    below half of ``f_low_max_hz`` (else the largest rated); without ``f_low_max_hz``
    the same for a band edge at ``mid_hz``/10.  A value is rated when one of its rows, derated, holds the
    role's DC voltage ``volts[role]`` plus 1 V.  None when a role has no rated value."""
    # without a target, a band edge a decade below mid_hz (as the single-stage search's
    # capacitor estimate, confirm._cap_targets), not the largest capacitors in stock
    f_aim = request.f_low_max_hz if request.f_low_max_hz is not None else request.mid_hz / 10.0
    out = {}
    for role in CAP_ROLES:
        need = (volts[role] + 1.0) / DERATING["capacitor_voltage"]
        rated = sorted(v for v, rs in rows.items() if any(r.voltage_v >= need for r in rs))
        if not rated:
            return None
        pick = rated[-1]
        if role != "C_BYP":
            least = 1.0 / (2.0 * math.pi * 0.5 * f_aim * corners[role])
            fit = [v for v in rated if v >= least]
            if fit:
                pick = fit[0]
        out[role] = (pick, need)
    return out


def _pick(role: str, rows, kind: str) -> RolePick:
    pieces = []
    for r, n in rows:
        rating = r.power_w if kind == "resistor" else r.voltage_v
        dielectric = None if kind == "resistor" else r.dielectric
        pieces.append(Piece(r.value, n, r.id, r.location, kind, r.tolerance, rating,
                            dielectric))
    value = rows[0][0].value
    return RolePick(role, value, format_value(value, kind), tuple(pieces))


def allocate(values: dict[str, float], kinds: dict[str, str], rows: dict[str, dict],
             builds: int, need_v: dict[str, float] | None = None) -> dict | None:
    """Pieces for every role (one piece of one stock row each), every value counted
    over all roles against stock for ``builds`` copies: the rows of a value are taken
    in order of quantity (a capacitor's only those rated ``need_v[role]`` volts);
    None when the stock cannot supply them."""
    need_v = need_v or {}
    left = {(kind, r.id): r.qty for kind, by in rows.items() for rs in by.values() for r in rs}
    out = {}
    # capacitors with a rating need first, so a row they can use is not taken by others
    order = sorted(values, key=lambda role: -need_v.get(role, 0.0))
    for role in order:
        kind = kinds[role]
        rs = [r for r in rows[kind].get(values[role], [])
              if kind == "resistor" or r.voltage_v >= need_v.get(role, 0.0)]
        got = next((r for r in rs if left[(kind, r.id)] >= builds), None)
        if got is None:
            return None
        left[(kind, got.id)] -= builds
        out[role] = _pick(role, [(got, 1)], kind)
    return out


def search_cascode(request: Request, snapshot: StockSnapshot, stats: dict,
                   deadline: float | None = None) -> list:
    """The candidate cascodes ``[(parts, (label1, label2))]`` for
    :func:`.chain_confirm.confirm_chains` (module docstring); ``stats`` gains what was
    searched.  ``deadline`` (``time.perf_counter()`` seconds): no transistor pair is
    begun past it; those left are named in ``stats["pairs_left"]``."""
    V = float(request.supply_v)
    b = request.builds
    rrows = _rows_by_value(snapshot.resistors, b)
    crows = _rows_by_value(snapshot.capacitors, b)
    values = np.array(sorted(rrows), dtype=float)
    ts = usable_transistors(request, snapshot)
    pairs = [(t1, t2) for t1, t2 in product(ts, ts)
             if t1.label != t2.label or t1.qty >= 2 * b]
    vt = float(thermal_voltage(25.0))
    kinds = {r: "resistor" for r in ("R1", "R2", "R3", "RC", "RE", "RE_BYP")}
    kinds.update({c: "capacitor" for c in CAP_ROLES})
    out: list = []
    n_div, n_est, unfit = 0, 0, 0
    divs: dict = {}
    lowers: dict = {}
    left: list = []
    for t1, t2 in pairs:
        if len(values) == 0:
            break
        if deadline is not None and time.perf_counter() > deadline:
            left.append(f"{t1.label}/{t2.label}")
            continue
        vbe = float(t1.vbe)
        if vbe not in divs:
            divs[vbe] = dividers(V, values, vbe)
        div = divs[vbe]
        n_div = max(n_div, len(div["R1"]))
        if t1.label not in lowers:
            lowers[t1.label] = _lower(request, div, values, t1)
            n_est += lowers[t1.label].pop("estimated")
        est = _upper(request, div, lowers[t1.label], t1, t2)
        for i in _ranked(request, est, div, t1, CANDIDATES):
            d = int(est["d"][i])
            vals = {"R1": div["R1"][d], "R2": div["R2"][d], "R3": div["R3"][d],
                    "RC": est["RC"][i], "RE": est["RE"][i], "RE_BYP": est["RE_BYP"][i]}
            vals = {k: float(v) for k, v in vals.items() if v > 0}
            vb1, vb2, ic = float(est["vb1"][i]), float(est["vb2"][i]), float(est["ic"][i])
            vc2 = V - ic * vals["RC"]
            volts = {"C_BYP": ic * vals.get("RE_BYP", 0.0), "C_IN": vb1, "C_B": vb2,
                     "C_OUT": vc2}
            rl = request.load_ohm if request.load_ohm is not None else 1e12
            zin = _par(_par(vals["R2"], vals["R3"]),
                       float(t1.beta_nominal) * (vals.get("RE", 0.0) + vt / ic))
            corners = {"C_IN": float(request.source_ohm) + zin, "C_OUT": vals["RC"] + rl,
                       "C_B": _par(vals["R1"], vals["R2"] + vals["R3"])}
            caps = capacitors_for(request, crows, volts, corners)
            if caps is None:
                unfit += 1
                continue
            if "RE_BYP" not in vals:
                caps.pop("C_BYP")
            vals.update({k: v for k, (v, _) in caps.items()})
            parts = allocate(vals, kinds, {"resistor": rrows, "capacitor": crows}, b,
                             {k: need for k, (_, need) in caps.items()})
            if parts is None:
                unfit += 1
                continue
            out.append((parts, (t1.label, t2.label)))
    why = []
    if not pairs:
        why.append("no transistor type in stock can serve (at least builds of each, "
                   "V_CEO at least the supply)")
    elif not out:
        why.append("no divider, emitter and collector resistors from the drawer give, by "
                   "the closed-form estimates, the gain, Z_in and both V_CE searched")
    if why:
        stats["why"] = why
    if left:
        stats.update(stopped_at_limit=True, pairs_left=left)
    stats.update(transistor_pairs=len(pairs), pairs_searched=len(pairs) - len(left),
                 dividers=n_div,
                 estimated=n_est, candidates=len(out), stock_unfit=unfit,
                 resistor_values=len(values),
                 candidates_per_pair=CANDIDATES)
    return out
