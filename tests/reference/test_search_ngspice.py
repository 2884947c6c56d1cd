"""The search's top designs re-checked in ngspice (Debian's package, batch mode).

Reference: ngspice with the ``.model`` line of docs/model.md, TEMP = TNOM = 25 °C, through
the shared harness tests/reference/spice.py.  For the best design of several
requests: I_C within 0.5 %, the midband gain within 1 % and inside the request's
window (with the same 1 % allowance), f_low within 3 % and at or below the target,
and each capacitor's DC stress as the search allocates it equal to ngspice's
voltage across it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
from optimiser import stages
from optimiser.device import device_from_transistor
from optimiser.request import Request
from optimiser.search import Skeletons, cap_roles, search
from optimiser.search.stock import _stresses
from optimiser.stages.base import capacitor_sides

from .spice import SpiceDesign, edge_from_sweep, require_ngspice, run_op_ac

pytestmark = [pytest.mark.reference]

E12 = [1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2]
T = Transistor("GP-N1", 100, 300, qty=10, ft=250e6, cob=4e-12, vceo=40, ic_max=0.1, pd=0.5,
               vaf=100, id=900, location="Q1")


def drawer():
    res = [Resistor(m * 10**d, 10, id=i, location=f"R{i}")
           for i, (d, m) in enumerate((d, m) for d in (2, 3, 4) for m in E12)]
    caps = [Capacitor(v, 10, id=500 + i, location=f"C{i}")
            for i, v in enumerate([100e-9, 1e-6, 4.7e-6, 10e-6, 47e-6, 100e-6])]
    return StockSnapshot(tuple(res), tuple(caps), (T,))


REQUESTS = [
    Request(topology="ce", supply_v=12.0, load_ohm=10e3, source_ohm=600.0, gain=10.0,
            f_low_max_hz=100.0, ic_drift_max_pct=10.0, temp_c=(0.0, 50.0)),
    Request(topology="cb", supply_v=12.0, load_ohm=10e3, source_ohm=50.0, gain=20.0,
            gain_tol_db=2.0, f_low_max_hz=100.0),
    Request(topology="cc", supply_v=9.0, load_ohm=2e3, source_ohm=1e3, gain=0.8,
            gain_tol_db=2.0, f_low_max_hz=50.0),
]


@pytest.mark.parametrize("req", REQUESTS, ids=[r.topology for r in REQUESTS])
def test_top_design_in_ngspice(req, tmp_path):
    require_ngspice()
    res = search(req, drawer(), top=1, misses=0)
    assert res.feasible, res.stats
    d = res.designs[0]
    model = device_from_transistor(T)
    sp = run_op_ac([SpiceDesign(d.topology, d.values(), model)], supply_v=req.supply_v,
                   source_ohm=req.source_ohm, load_ohm=req.load_ohm, mid_hz=req.mid_hz,
                   workdir=tmp_path)[0]
    m = d.metrics
    assert abs(m["ic_a"] - sp["ic"]) / sp["ic"] < 0.005
    assert abs(m["gain"] - sp["gain"]) / sp["gain"] < 0.01
    lo, hi = req.gain / 10 ** (req.gain_tol_db / 20), req.gain * 10 ** (req.gain_tol_db / 20)
    assert lo * 0.99 <= sp["gain"] <= hi * 1.01
    f_low = edge_from_sweep(sp["freqs"], sp["h"], req.mid_hz, sp["gain"], below=True)
    assert math.isfinite(f_low) and abs(f_low - m["f_low_hz"]) / m["f_low_hz"] < 0.03
    assert f_low <= req.f_low_max_hz * 1.03
    # each capacitor's DC stress as the search allocates it (the topology's
    # capacitors() through optimiser/search/stock.py) against ngspice's voltages on
    # its two sides (the source, load and ground sides at 0 V DC)
    vals = d.values()
    sk = Skeletons(d.topology, T, d.form, *(np.array([float(vals.get(r) or 0.0)])
                                            for r in ("R1", "R2", "RC", "RE", "RE_BYP")))
    st = _stresses(sk, 0, {"vb_v": [sp["vb"]], "ve_v": [sp["ve"]], "vc_v": [sp["vc"]]}, 0,
                   req.supply_v)
    node = {"base": sp["vb"], "emitter": sp["ve"], "collector": sp["vc"], "junction": sp["vx"]}
    roles = cap_roles(d.topology, d.form)
    assert set(roles) == {r for r in vals if r.startswith("C_") and vals[r]}
    for role, (a, b) in capacitor_sides(stages.module(d.topology)).items():
        if role in roles:
            want = abs(node.get(a, 0.0) - node.get(b, 0.0))
            assert st[role] == pytest.approx(want, rel=1e-4, abs=1e-6), role
