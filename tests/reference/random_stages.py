"""Seeded random stages of each variant for the reference checks (numpy default_rng).

Each variant draws a transistor, a request (supply, source, load, mid_hz) and
``count`` bias networks aimed at a sensible operating point, then keeps those the
engine finds forward-active with margin (V_CE ≥ 1 V, not cut off).
"""

from __future__ import annotations

import numpy as np

from inventory.parts import Transistor
from optimiser.request import Request
from optimiser.stage import StageBatch

VARIANTS = ("ce_full", "ce_partial", "ce_unbypassed", "cb", "cc")


def _lu(rng, lo, hi, n=None):
    return 10 ** rng.uniform(np.log10(lo), np.log10(hi), n)


def random_transistor(rng, label="RND-1") -> Transistor:
    hmin = float(rng.uniform(60, 200))
    return Transistor(label, hfe_min=hmin, hfe_max=hmin * float(rng.uniform(1.5, 3.0)),
                      vbe=float(rng.uniform(0.6, 0.72)), ic_ref=1e-3,
                      vaf=float(rng.uniform(30, 200)), vce_sat=0.2,
                      ft=float(_lu(rng, 50e6, 500e6)), cob=float(_lu(rng, 1.5e-12, 10e-12)))


def random_case(variant: str, seed: int, count: int = 32):
    """(request, batch, transistor) with up to ``count`` candidates of ``variant``."""
    rng = np.random.default_rng(seed)
    t = random_transistor(rng)
    topo = variant.split("_")[0]
    vcc = float(rng.uniform(9, 18))
    req = Request(topo, vcc, load_ohm=float(_lu(rng, 2e3, 100e3)),
                  source_ohm=float(_lu(rng, 10, 2e3)) if topo != "cb" else float(_lu(rng, 10, 200)),
                  mid_hz=float(_lu(rng, 500, 5e3)), input_vpk=0.01)
    n = count
    ic = _lu(rng, 0.3e-3, 5e-3, n)
    if topo == "cc":
        vb = rng.uniform(0.3, 0.6, n) * vcc
    else:
        vb = rng.uniform(1.2, 0.3 * vcc, n)
    re_tot = (vb - 0.65) / ic
    r2 = _lu(rng, 3e3, 60e3, n)
    r1 = r2 * (vcc - vb) / vb
    ve = vb - 0.65
    if topo == "cc":
        rc = np.where(rng.random(n) < 0.5, 0.0, _lu(rng, 10, 300, n))
    else:
        rc = (vcc - ve) / (2 * ic) * rng.uniform(0.6, 1.3, n)
    vals = dict(R1=r1, R2=r2, RC=rc, C_IN=_lu(rng, 0.1e-6, 10e-6, n),
                C_OUT=_lu(rng, 0.1e-6, 10e-6, n))
    if variant == "ce_full":
        vals.update(RE=0.0, RE_BYP=re_tot, C_BYP=_lu(rng, 10e-6, 470e-6, n))
    elif variant == "ce_partial":
        frac = rng.uniform(0.1, 0.5, n)
        vals.update(RE=frac * re_tot, RE_BYP=(1 - frac) * re_tot,
                    C_BYP=_lu(rng, 10e-6, 470e-6, n))
    elif variant == "ce_unbypassed":
        vals.update(RE=re_tot)
    elif topo == "cb":
        vals.update(RE=re_tot, C_B=_lu(rng, 1e-6, 100e-6, n))
    else:
        vals.update(RE=re_tot)
    return req, StageBatch.from_values(topo, **vals), t
