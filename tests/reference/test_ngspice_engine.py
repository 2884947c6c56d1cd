"""The engine against ngspice (Debian's package, batch mode) on seeded random stages.

Reference: ngspice with the ``.model`` line of docs/model.md, TEMP = TNOM = 25 °C.
Tolerances: I_C and V_CE 0.5 %, midband gain 1 %, f_low, f_high, Zin,
Zout 3 %; THD and swing 10 % relative (THD below 0.5 %: 0.05 percentage points).
At least 20 designs of each variant.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from optimiser.device import device_from_transistor
from optimiser.evaluate import evaluate

from .random_stages import VARIANTS, random_case
from .spice import (
    SpiceDesign,
    edge_from_sweep,
    require_ngspice,
    run_op_ac,
    run_quasi_static,
    swing_from_curve,
    thd_from_curve,
)

pytestmark = [pytest.mark.reference]
MIN_DESIGNS = 20


def _case(variant, seed):
    req, batch, t = random_case(variant, seed, count=40)
    ev = evaluate(req, batch, t, band_edges=False, large_signal=False, corner_gain=False)
    ok = (ev.op.vce > 1.0) & ~ev.op.cutoff & ev.op.converged
    keep = np.nonzero(ok)[0][:24]
    assert keep.size >= MIN_DESIGNS, f"only {keep.size} usable {variant} designs"
    batch = batch.take(keep)
    ev = evaluate(req, batch, t)
    model = device_from_transistor(t)
    designs = [SpiceDesign(batch.topology, batch.one(i) | {k: 0.0 for k in ()}, model)
               for i in range(batch.n)]
    return req, batch, t, ev, model, designs


@pytest.fixture(scope="module", params=VARIANTS)
def compared(request, tmp_path_factory):
    require_ngspice()
    variant = request.param
    req, batch, t, ev, model, designs = _case(variant, seed=VARIANTS.index(variant) + 11)
    wd = tmp_path_factory.mktemp(variant)
    sp = run_op_ac(designs, supply_v=req.supply_v, source_ohm=req.source_ohm,
                   load_ohm=req.load_ohm, mid_hz=req.mid_hz, workdir=wd)
    qs = run_quasi_static(designs, sp, supply_v=req.supply_v, source_ohm=req.source_ohm,
                          load_ohm=req.load_ohm, amplitude=req.input_vpk, workdir=wd)
    sw = run_quasi_static(designs, sp, supply_v=req.supply_v, source_ohm=req.source_ohm,
                          load_ohm=req.load_ohm, amplitude=req.supply_v, points=6001,
                          workdir=wd)
    return variant, req, ev, model, sp, qs, sw


def _rel(a, b):
    return abs(a - b) / abs(b)


def test_operating_point(compared):
    variant, req, ev, model, sp, qs, sw = compared
    for i, r in enumerate(sp):
        assert _rel(ev.metrics["ic_a"][i], r["ic"]) < 0.005, (variant, i)
        assert _rel(ev.metrics["vce_v"][i], r["vce"]) < 0.005, (variant, i)


def test_midband_gain_zin_zout(compared):
    variant, req, ev, model, sp, qs, sw = compared
    for i, r in enumerate(sp):
        assert _rel(ev.metrics["gain"][i], r["gain"]) < 0.01, (variant, i)
        assert _rel(ev.metrics["zin_ohm"][i], r["zin"]) < 0.03, (variant, i)
        assert _rel(ev.metrics["zout_ohm"][i], r["zout"]) < 0.03, (variant, i)


def test_band_edges(compared):
    variant, req, ev, model, sp, qs, sw = compared
    for i, r in enumerate(sp):
        for key, below in (("f_low_hz", True), ("f_high_hz", False)):
            ref = edge_from_sweep(r["freqs"], r["h"], req.mid_hz, r["gain"], below)
            ours = ev.metrics[key][i]
            if math.isnan(ref):
                assert math.isnan(ours), (variant, i, key, ours)
            else:
                assert _rel(ours, ref) < 0.03, (variant, i, key, ours, ref)


def test_thd_and_swing(compared):
    variant, req, ev, model, sp, qs, sw = compared
    for i, (q, s) in enumerate(zip(qs, sw, strict=True)):
        ref = thd_from_curve(q["emf"], q["v_load"], req.input_vpk)
        ours = ev.metrics["thd_pct"][i]
        if ref < 0.5:
            assert abs(ours - ref) <= 0.05, (variant, i, ours, ref)
        else:
            assert _rel(ours, ref) < 0.10, (variant, i, ours, ref)
        ref_sw = swing_from_curve(s["emf"], s["v_load"], s["vce"], s["ic"], sp[i]["ic"],
                                  model.vce_sat)
        ours_sw = ev.metrics["swing_vpk"][i]
        if math.isnan(ref_sw):
            assert math.isnan(ours_sw)
        else:
            assert _rel(ours_sw, ref_sw) < 0.10, (variant, i, ours_sw, ref_sw)
