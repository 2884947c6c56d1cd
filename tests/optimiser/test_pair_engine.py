"""The two-transistor engine's pieces against the single-stage engine.

The reference for every figure is ngspice (tests/reference/test_ngspice_pairs.py);
these checks tie the joint-network solver to the single-stage solver, which is itself
checked against ngspice and textbook bias examples: two different algorithms (Newton on
the node voltages here, Newton on the two junction voltages there) on the same device
equations must agree.
"""

from __future__ import annotations

import numpy as np
import pytest

from inventory.parts import Transistor
from optimiser.dc import DCElement, operating_point, solve_bias, solve_nodes, thevenin
from optimiser.device import device_from_transistor, scaled, thermal_voltage
from optimiser.pair_evaluate import evaluate_pair, pair_operating_point, stage_batches
from optimiser.request import Request
from optimiser.stages import pair_form
from optimiser.stages.pair import PairBatch

T = Transistor("T-1", hfe_min=100, hfe_max=300, vaf=80, ft=250e6, cob=4e-12)


def test_node_newton_agrees_with_the_single_stage_solver():
    rng = np.random.default_rng(5)
    n = 200
    r1, r2 = 10 ** rng.uniform(3.5, 5, n), 10 ** rng.uniform(3, 4.5, n)
    re, rc = 10 ** rng.uniform(2, 3.5, n), 10 ** rng.uniform(2.5, 4, n)
    m = device_from_transistor(T)
    ref = solve_bias(*thevenin(12.0, r1, r2), re, rc, 12.0, m)
    els = [DCElement("R", "supply", "b", r1), DCElement("R", "b", "ground", r2),
           DCElement("R", "e", "ground", re), DCElement("R", "supply", "c", rc)]
    is_t, b_t = scaled(m, 25.0)
    volts, junc, conv = solve_nodes(("b", "e", "c"), {"ground": 0.0, "supply": 12.0}, els,
                                    [("b", "e", "c")],
                                    [(is_t, b_t, thermal_voltage(25.0), 1 / m.vaf)])
    assert conv.all()
    np.testing.assert_allclose(volts["c"], ref.vc, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(junc[0][0], ref.vbe, rtol=1e-9)


def _chain():
    f = pair_form(("ce", "cc"), "capacitor")
    return PairBatch.from_values(f, **{
        "S1.R1": 47e3, "S1.R2": 10e3, "S1.RC": 4.7e3, "S1.RE": 220, "S1.RE_BYP": 820,
        "S1.C_BYP": 47e-6, "S1.C_IN": 1e-6, "C_COUPLE": 1e-6, "S2.R1": 22e3, "S2.R2": 27e3,
        "S2.RE": 2.2e3, "S2.C_OUT": 10e-6})


def test_capacitor_coupled_stages_are_biased_independently():
    b = _chain()
    m = device_from_transistor(T)
    ops, volts = pair_operating_point(b, 12.0, (m, m))
    for sb, op in zip(stage_batches(b), ops, strict=True):
        alone = operating_point(sb.topology, 12.0, sb, m)
        np.testing.assert_allclose(op.ic, alone.ic, rtol=1e-12)
    assert volts["S2.base"][0] == pytest.approx(ops[1].vb[0])


def test_direct_coupling_loads_the_first_collector_with_the_follower_base_current():
    """KCL at the first collector: (V_CC − V_C1)/RC1 = I_C1 + I_B2, to solver precision."""
    f = pair_form(("ce", "cc"), "direct")
    b = PairBatch.from_values(f, **{"S1.R1": 47e3, "S1.R2": 10e3, "S1.RC": 4.7e3,
                                    "S1.RE": 1e3, "S1.C_IN": 1e-6, "S2.RE": 2.2e3,
                                    "S2.C_OUT": 10e-6})
    m = device_from_transistor(T)
    ops, volts = pair_operating_point(b, 12.0, (m, m))
    i_rc = (12.0 - volts["S1.collector"]) / 4.7e3
    assert i_rc[0] == pytest.approx(ops[0].ic[0] + ops[1].ib[0], rel=1e-9)
    assert ops[1].vb[0] == pytest.approx(ops[0].vc[0])


def test_zout_target_judged():
    b = _chain()
    req = Request(("ce", "cc"), 12.0, load_ohm=1e3, source_ohm=600, coupling="capacitor",
                  zout_max_ohm=10.0)
    ev = evaluate_pair(req, b, (T, T), band_edges=False, large_signal=False)
    assert ev.metrics["zout_ohm"][0] > 10.0
    assert "zout_ohm" in ev.failed_keys(0)
