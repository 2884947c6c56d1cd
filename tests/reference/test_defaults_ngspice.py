"""The request defaults hold in ngspice: a 44 dB ce request with no THD target.

Reference: ngspice (Debian's package, batch mode) through tests/reference/spice.py:
the quasi-static transfer curve of each returned design, swept over the request's
input level, and the THD taken from it.  Every design the search returns must stay
under the default THD ceiling (with a 5 % allowance for the engine-versus-ngspice
agreement the engine tests check), and its I_C in ngspice above the least current.
"""

from __future__ import annotations

import pytest

from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
from optimiser.device import device_from_transistor
from optimiser.request import DEFAULTS, parse_request
from optimiser.search import search

from .spice import SpiceDesign, require_ngspice, run_op_ac, run_quasi_static, thd_from_curve

pytestmark = [pytest.mark.reference]

E12 = [1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2]
T = Transistor("GP-N1", 100, 300, qty=10, ft=250e6, cob=4e-12, vceo=40, ic_max=0.1, pd=0.5,
               vaf=100, id=900, location="Q1")


def drawer():
    res = [Resistor(m * 10**d, 10, id=i, location=f"R{i}")
           for i, (d, m) in enumerate((d, m) for d in (1, 2, 3, 4) for m in E12)]
    caps = [Capacitor(v, 10, id=500 + i, location=f"C{i}")
            for i, v in enumerate([1e-6, 10e-6, 47e-6, 100e-6, 470e-6])]
    return StockSnapshot(tuple(res), tuple(caps), (T,))


def test_high_gain_ce_without_a_thd_target_stays_under_the_default(tmp_path):
    require_ngspice()
    req = parse_request({"topology": "ce", "supply_v": 12.0, "load_ohm": "10k",
                         "source_ohm": "600", "gain_db": 44.0})
    assert set(req.assumed) == {"thd_max_pct", "ic_min_a"}
    res = search(req, drawer(), top=3, misses=0)
    assert res.feasible, res.stats
    model = device_from_transistor(T)
    designs = [SpiceDesign(d.topology, d.values(), model) for d in res.designs]
    ops = run_op_ac(designs, supply_v=req.supply_v, source_ohm=req.source_ohm,
                    load_ohm=req.load_ohm, mid_hz=req.mid_hz, workdir=tmp_path)
    qs = run_quasi_static(designs, ops, supply_v=req.supply_v, source_ohm=req.source_ohm,
                          load_ohm=req.load_ohm, amplitude=req.input_vpk, workdir=tmp_path)
    for d, op, q in zip(res.designs, ops, qs, strict=True):
        thd = thd_from_curve(q["emf"], q["v_load"], req.input_vpk)
        assert thd <= DEFAULTS["thd_max_pct"] * 1.05, (d.values(), thd)
        assert op["ic"] >= DEFAULTS["ic_min_a"] * 0.995
    # without the default the same drawer ranks a stage above the ceiling first
    # (the reason for the default; checked in ngspice too)
    free = parse_request({"topology": "ce", "supply_v": 12.0, "load_ohm": "10k",
                          "source_ohm": "600", "gain_db": 44.0, "thd_max_pct": "none",
                          "ic_min_a": "none"})
    top = search(free, drawer(), top=1, misses=0).designs[0]
    sd = [SpiceDesign(top.topology, top.values(), model)]
    op = run_op_ac(sd, supply_v=12.0, source_ohm=600.0, load_ohm=10e3, mid_hz=free.mid_hz,
                   workdir=tmp_path)
    q = run_quasi_static(sd, op, supply_v=12.0, source_ohm=600.0, load_ohm=10e3,
                         amplitude=free.input_vpk, workdir=tmp_path)[0]
    assert thd_from_curve(q["emf"], q["v_load"], free.input_vpk) > DEFAULTS["thd_max_pct"]
