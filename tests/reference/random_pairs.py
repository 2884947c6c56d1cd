"""Seeded random two-transistor circuits of each form for the reference checks
(numpy default_rng): capacitor-coupled ce→cc, ce→ce, cb→cc, direct ce→cc, cascode.

Each form draws one transistor, a request (supply, source, load, mid_hz) and
``count`` circuits aimed at a sensible operating point of both transistors; the
caller keeps those the engine finds forward-active with margin.
"""

from __future__ import annotations

import numpy as np

from optimiser.request import Request
from optimiser.stages import pair_form
from optimiser.stages.pair import PairBatch

from .random_stages import _lu, random_case, random_transistor

FORMS = ("ce-cc", "ce-ce", "cb-cc", "direct", "cascode")


def _stage(variant, seed, count, vcc):
    """Role values of ``count`` single stages of ``variant`` at supply ``vcc``: the
    single-stage generator's draws with the divider ratio kept and the emitter and
    collector resistors scaled with the supply (the caller keeps the circuits that come
    out forward-active with margin)."""
    req, batch, _ = random_case(variant, seed, count)
    scale = vcc / req.supply_v
    vals = {r: np.asarray(getattr(batch, r)) for r in ("R1", "R2", "RC", "RE", "RE_BYP",
                                                        "C_IN", "C_OUT", "C_BYP", "C_B")}
    vals["RE"] = vals["RE"] * scale
    vals["RE_BYP"] = vals["RE_BYP"] * scale
    vals["RC"] = vals["RC"] * scale
    return vals


def random_pairs(form_name: str, seed: int, count: int = 32):
    """(request, batch, transistor) with ``count`` circuits of ``form_name``."""
    rng = np.random.default_rng(seed)
    t = random_transistor(rng, "RND-2")
    vcc = float(rng.uniform(10, 18))
    load = float(_lu(rng, 1e3, 50e3))
    src = float(_lu(rng, 10, 2e3))
    mid = float(_lu(rng, 500, 5e3))
    n = count
    if form_name in ("ce-cc", "ce-ce", "cb-cc"):
        first, second = form_name.split("-")
        if first == "cb":
            src = float(_lu(rng, 10, 200))
        v1 = _stage({"ce": "ce_partial", "cb": "cb"}[first], seed + 100, n, vcc)
        v2 = _stage({"cc": "cc", "ce": "ce_full"}[second], seed + 200, n, vcc)
        form = pair_form((first, second), "capacitor")
        vals = {f"S1.{r}": v for r, v in v1.items()} | {f"S2.{r}": v for r, v in v2.items()}
        vals["C_COUPLE"] = _lu(rng, 0.2e-6, 10e-6, n)
        vals = {k: v for k, v in vals.items() if k in form.role_names}
        req = Request((first, second), vcc, load_ohm=load, source_ohm=src, mid_hz=mid,
                      input_vpk=0.003, coupling="capacitor")
    elif form_name == "direct":
        form = pair_form(("ce", "cc"), "direct")
        v1 = _stage("ce_partial", seed + 100, n, vcc)
        vals = {f"S1.{r}": v1[r] for r in ("R1", "R2", "RC", "RE", "RE_BYP", "C_BYP", "C_IN")}
        # the follower's emitter resistor for its current at a first collector near
        # mid-supply (the filter of the caller keeps the circuits that work out)
        ic2 = _lu(rng, 0.5e-3, 5e-3, n)
        vals["S2.RE"] = (0.5 * vcc - 0.65) / ic2
        vals["S2.RC"] = np.where(rng.random(n) < 0.5, 0.0, _lu(rng, 10, 300, n))
        vals["S2.C_OUT"] = _lu(rng, 1e-6, 20e-6, n)
        req = Request(("ce", "cc"), vcc, load_ohm=load, source_ohm=src, mid_hz=mid,
                      input_vpk=0.003, coupling="direct")
    else:
        form = pair_form("cascode")
        ic = _lu(rng, 0.3e-3, 4e-3, n)
        vb1 = rng.uniform(1.2, 0.2 * vcc, n)
        vb2 = vb1 + rng.uniform(1.5, 0.3 * vcc, n)
        i_div = _lu(rng, 0.1e-3, 0.5e-3, n)           # divider current
        r3 = vb1 / i_div
        r2 = (vb2 - vb1) / i_div
        r1 = (vcc - vb2) / i_div
        re_tot = (vb1 - 0.65) / ic
        frac = rng.uniform(0.0, 0.5, n)
        vc = vb2 - 0.65 + (vcc - vb2 + 0.65) * rng.uniform(0.3, 0.6, n)
        vals = {"R1": r1, "R2": r2, "R3": r3, "RC": (vcc - vc) / ic,
                "RE": np.where(frac > 0.05, frac * re_tot, 0.0),
                "RE_BYP": (1 - np.where(frac > 0.05, frac, 0.0)) * re_tot,
                "C_BYP": _lu(rng, 10e-6, 470e-6, n), "C_B": _lu(rng, 1e-6, 100e-6, n),
                "C_IN": _lu(rng, 0.1e-6, 10e-6, n), "C_OUT": _lu(rng, 0.1e-6, 10e-6, n)}
        req = Request("cascode", vcc, load_ohm=load, source_ohm=src, mid_hz=mid,
                      input_vpk=0.003)
    return req, PairBatch.from_values(form, **vals), t
