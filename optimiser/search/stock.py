"""Stock allocation: pieces per copy of each resistor value against the snapshot,
the best ratings the drawer offers and the DC stresses the pieces must bear."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from inventory.parts import (
    DEFAULT_CAPACITOR_VOLTAGE_V,
    DEFAULT_RESISTOR_POWER_W,
    POLARISED_DIELECTRICS,
)
from optimiser.design import RolePick
from optimiser.options import StockOptions
from optimiser.search.skeletons import Skeletons, cap_roles
from optimiser.stage import PartRatings
from optimiser.stages import module


def _ratings_best(sk: Skeletons, opts: StockOptions, caps_voltage: dict | None = None) -> PartRatings:
    """Most permissive ratings the drawer offers for each resistor value of ``sk``."""
    pw, share = {}, {}
    for role in ("R1", "R2", "RC", "RE", "RE_BYP"):
        vals = getattr(sk, role)
        r = np.full(vals.shape, np.inf)
        nz = vals > 0
        if nz.any():
            idx = np.clip(np.searchsorted(opts.resistor.values, vals[nz]), 0,
                          len(opts.resistor) - 1)
            r[nz] = opts.resistor.best_rating[idx]
        pw[role] = r
        share[role] = np.ones(vals.shape)
    volt = {} if caps_voltage is None else dict(caps_voltage)
    for role in cap_roles(sk.topology, sk.form):
        volt.setdefault(role, np.full(sk.n, np.inf))
    return PartRatings(power_w=pw, power_share=share, voltage_v=volt)


def _stresses(sk: Skeletons, i: int, m: dict, j: int, V: float,
              unrated=()) -> dict[str, float]:
    """DC dissipation (W) of each resistor role, |DC voltage| (V) of each capacitor role
    (0 for the roles ``unrated``: the request's ``unrated_caps``)."""
    vb, ve, vc = float(m["vb_v"][j]), float(m["ve_v"][j]), float(m["vc_v"][j])
    r1, r2, rc, re, byp = (float(getattr(sk, k)[i]) for k in ("R1", "R2", "RC", "RE", "RE_BYP"))
    ie = ve / (re + byp) if re + byp > 0 else 0.0
    s = {"R1": (V - vb) ** 2 / r1, "R2": vb ** 2 / r2, "RE": ie * ie * re,
         "RE_BYP": ie * ie * byp, "RC": (V - vc) ** 2 / rc if rc > 0 else 0.0}
    # each capacitor's DC voltage as the topology places it (its ``capacitors``);
    # the junction of RE and RE_BYP sits at I_E·RE_BYP
    node = SimpleNamespace(vb=vb, ve=ve, vc=vc, vx=ie * byp)
    for role, (v, _, _) in module(sk.topology).capacitors(sk, node).items():
        s[role] = 0.0 if role in unrated else abs(v)
    return s


def _alloc_caps(opts, croles, vec, st):
    return opts.allocate({r: ("capacitor", float(opts.capacitor.values[vec[k]]), st[r])
                          for k, r in enumerate(croles)})


def stock_units(opts: StockOptions, rv: np.ndarray):
    """Per resistor value: pieces per copy (rows pooled; inf with joined pairs),
    the largest row, and whether it may be bought (a virtual row)."""
    units = np.zeros(rv.size)
    for k, v in enumerate(rv):
        rows = opts.rows_of("resistor", v)
        units[k] = sum(opts.rows[i].qty // opts.builds for i in rows) if rows else np.inf
        if opts.allow_combos:
            units[k] = np.inf       # a joined pair may stand in: no cheap count
    maxq = np.array([max((opts.rows[i].qty for i in opts.rows_of("resistor", v)),
                         default=0) for v in rv], dtype=float)
    virtual = np.array([any((opts.rows[i].id is not None and opts.rows[i].id < 0)
                            for i in opts.rows_of("resistor", v)) for v in rv])
    return units, maxq, virtual


def _share(pick: RolePick) -> float:
    """The largest share of a role's dissipation one of its pieces takes."""
    if len(pick.pieces) < 2 or pick.joined is None:
        return 1.0
    # series: R_i/(R_a+R_b); parallel: R_other/(R_a+R_b); the larger share either way
    a, b = (p.value for p in pick.pieces[:2])
    return max(a, b) / (a + b)


def piece_ratings(picks: list[dict[str, RolePick]], roles) -> PartRatings:
    """Ratings of the very pieces of each design (``picks``: role -> RolePick per
    design) for the engine's derating rules, over ``roles``: a resistor role its
    least piece rating and the largest share one piece takes, a capacitor role its
    voltage rating and whether it is polarised."""
    r = PartRatings()
    for role in roles:
        col = [p.get(role) for p in picks]
        if all(c is None or not c.pieces for c in col):
            continue
        kind = next(c.pieces[0].kind for c in col if c is not None and c.pieces)
        rating = np.array([min((x.rating or np.inf) for x in c.pieces) if c and c.pieces
                           else np.inf for c in col])
        if kind == "resistor":
            r.power_w[role] = np.where(np.isfinite(rating), rating, DEFAULT_RESISTOR_POWER_W)
            r.power_share[role] = np.array([_share(c) if c else 1.0 for c in col])
        else:
            r.voltage_v[role] = np.where(np.isfinite(rating), rating,
                                          DEFAULT_CAPACITOR_VOLTAGE_V)
            r.polarised[role] = np.array([bool(c and c.pieces and (c.pieces[0].dielectric or "")
                                               .lower() in POLARISED_DIELECTRICS)
                                          for c in col])
    return r
