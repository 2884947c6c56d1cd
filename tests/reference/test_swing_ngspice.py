"""Swing and THD of high-gain, fully bypassed common-emitter stages against ngspice.

Reference: ngspice (Debian's package, batch mode) with the engine's ``.model`` line at
TEMP = TNOM = 25 °C, on the quasi-static circuit of the swing definition: every
capacitor a DC source holding the voltage of ngspice's own ``.op``, a ``.dc`` sweep of
the EMF.  The netlists are written by :func:`tests.reference.spice.stage_netlist`
(mode ``"qs"``); each design gets its own EMF node ``emf_k`` driven as
``lo_k + t·(hi_k − lo_k)`` from one swept source ``VT`` (a DC offset source and a
linear VCVS), so one ngspice run sweeps a different range for every design.  The
limiting EMF is found as the definition states it, going out from 0 on each sign:

1. bracket: a sweep of each sign from 0 to BRACKET_V in 3000 steps, first sweep point
   where V_CE < vce_sat or I_C < 1 % of the ``.op`` I_C.  The first failure going out
   from 0 is the limit whatever lies beyond it, so the sweep need not go on to
   supply_v once one sign has failed: the limit of the period is the smaller of the
   two, and behind an ideal source the cut-off edge of a fully bypassed stage lies
   near V_T·ln 100 ≈ 0.12 V of EMF.  The test requires a failure within BRACKET_V.
   (ngspice itself stops converging when an ideal source drives the base much
   further past its bias.)
2. refine: a sweep of 2000 steps across that bracket, the crossing interpolated
   linearly in the margin;
3. period: a sweep from −a to +a (a the smaller limit) in 4000 steps; the swing is the
   smaller of the largest and the most negative v_load (AC part: the load side of the
   held C_OUT) over it.

Stages: the two circuits of a 15 V / 12 V high-gain bench case, and seeded random fully
bypassed stages with a midband gain of 40–50 dB, open and lightly loaded.  The EMF
source is ideal (source_ohm = 0, the request's default): the base is then driven
without limit, and past the saturation edge a hard-driven junction can pass the
forward-active test again far out, which a search for the limit must never look at.
(With a source resistance the base current is limited and that never happens, which
is why the general engine check in ``test_ngspice_engine.py`` with 10 Ω–2 kΩ sources
does not reach this region.)  THD is checked on the same curves at input_vpk and at
twice the limiting EMF (into saturation).  Tolerance 5 % on swing, limiting EMF and THD.

Each run's netlist is written beside its results in the test's temporary folder
(``bracket0.cir``, ``refine0.cir``, ``bracket1.cir``, ``refine1.cir``, ``period.cir``,
``qs.cir``); ``pytest --basetemp=DIR`` keeps them for reading or rerunning with
``ngspice -b``.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from inventory.parts import Transistor
from optimiser import distortion
from optimiser.device import device_from_transistor
from optimiser.evaluate import evaluate
from optimiser.request import Request
from optimiser.stage import StageBatch

from .random_stages import random_case
from .spice import (
    _OPTIONS,
    SpiceDesign,
    require_ngspice,
    run_ngspice,
    run_op_ac,
    run_quasi_static,
    stage_netlist,
    thd_from_curve,
)

pytestmark = [pytest.mark.reference]

TOL = 0.05
BRACKET_V = 0.2
BRACKET_STEPS = 3000
REFINE_STEPS = 2000
PERIOD_STEPS = 4000

#: The bench case's transistor and the fixed parts of its two stages.
BENCH_T = Transistor("BENCH", hfe_min=80, hfe_typ=150, hfe_max=200, vbe=0.68, ic_ref=2e-3,
                     vaf=60, ft=150e6, cob=6e-12, vce_sat=0.25)
BENCH = {
    "15 V, 82k/10k, 8k2": (15.0, dict(R1=82e3, R2=10e3, RC=8.2e3)),
    "12 V, 100k/10k, 10k": (12.0, dict(R1=100e3, R2=10e3, RC=10e3)),
}
BENCH_COMMON = dict(RE=0.0, RE_BYP=1e3, C_BYP=220e-6, C_IN=1e-6, C_OUT=1e-6)


def _sweep(designs, ops, req, lo, hi, steps, wd, name):
    """One ``.dc`` run: design k's EMF goes from lo[k] to hi[k] in ``steps`` steps.

    Returns per design a dict of arrays emf, v_load, vce, ic over the sweep.
    """
    body = [f"* drawerfit swing check: {name}", "VT t 0 dc 0"]
    for k, d in enumerate(designs):
        body += stage_netlist(d, k, supply_v=req.supply_v, source_ohm=req.source_ohm,
                              load_ohm=req.load_ohm, mode="qs", op=ops[k],
                              emf_node=f"emf_{k}")
        body += [f"VOFF_{k} off_{k} 0 dc {lo[k]:.15g}",
                 f"EEMF_{k} emf_{k} off_{k} t 0 {hi[k] - lo[k]:.15g}"]
    step = 1.0 / steps
    ctl = [_OPTIONS, ".control", f"dc vt 0 {1 + step / 2:.15g} {step:.15g}"]
    for k in range(len(designs)):
        ctl.append(f"wrdata {wd}/{name}_{k}.txt v(emf_{k}) v(l_{k}) v(c_{k})-v(e_{k}) "
                   f"i(vic_{k})")
    ctl += [".endc", ".end"]
    run_ngspice("\n".join(body + ctl) + "\n", wd, name)
    out = []
    for k in range(len(designs)):
        data = np.loadtxt(wd / f"{name}_{k}.txt", ndmin=2)
        out.append({"emf": data[:, 1], "v_load": data[:, 3], "vce": data[:, 5],
                    "ic": data[:, 7]})
    return out


def _margin(curve, ic0, vce_sat):
    """Forward-active margin along a sweep: negative where the definition's test fails."""
    return np.minimum(curve["vce"] - vce_sat,
                      (curve["ic"] - distortion.IC_FLOOR * ic0) / ic0)


def _first_fail(margin):
    """Index of the first failing sweep point (the sweep goes out from 0), or None."""
    bad = np.nonzero(~(margin >= 0))[0]
    return None if bad.size == 0 else int(bad[0])


def spice_swing(designs, ops, req, model, wd):
    """(swing V peak, limiting EMF V) of each design per the definition, from ngspice."""
    n = len(designs)
    ic0 = [op["ic"] for op in ops]
    limits = np.full((n, 2), np.inf)
    for j, sign in enumerate((1.0, -1.0)):
        coarse = _sweep(designs, ops, req, [0.0] * n, [sign * BRACKET_V] * n,
                        BRACKET_STEPS, wd, f"bracket{j}")
        lo, hi, todo = [0.0] * n, [0.0] * n, []
        for k, c in enumerate(coarse):
            i = _first_fail(_margin(c, ic0[k], model.vce_sat))
            if i is None:
                continue
            assert i > 0, f"design {k} is not forward-active at its operating point"
            lo[k], hi[k] = c["emf"][i - 1], c["emf"][i]
            todo.append(k)
        if not todo:
            continue
        fine = _sweep(designs, ops, req, lo, hi, REFINE_STEPS, wd, f"refine{j}")
        for k in todo:
            c = fine[k]
            m = _margin(c, ic0[k], model.vce_sat)
            i = _first_fail(m)
            assert i is not None and i > 0, f"design {k}: refine sweep lost the bracket"
            t = m[i - 1] / (m[i - 1] - m[i])
            limits[k, j] = abs(c["emf"][i - 1] + t * (c["emf"][i] - c["emf"][i - 1]))
    a = limits.min(axis=1)
    assert np.all(np.isfinite(a)), f"ngspice reaches no limit within {BRACKET_V} V"
    period = _sweep(designs, ops, req, -a, a, PERIOD_STEPS, wd, "period")
    swing = np.array([min(max(p["v_load"].max(), 0.0), max(-p["v_load"].min(), 0.0))
                      for p in period])
    return swing, a


def _compare(req, batch, t, wd):
    """Engine and ngspice figures for one request over ``batch``."""
    ev = evaluate(req, batch, t, band_edges=False, corner_gain=False)
    model = device_from_transistor(t)
    designs = [SpiceDesign("ce", batch.one(i), model) for i in range(batch.n)]
    ops = run_op_ac(designs, supply_v=req.supply_v, source_ohm=req.source_ohm,
                    load_ohm=req.load_ohm, mid_hz=req.mid_hz, sweep=None, workdir=wd)
    sw, a = spice_swing(designs, ops, req, model, wd)
    return ev, model, designs, ops, sw, a


def _check_swing(ev, sw, a, label):
    for i in range(len(sw)):
        assert ev.metrics["swing_vpk"][i] == pytest.approx(sw[i], rel=TOL), (label, i)


def _check_thd(req, batch, t, ev, model, designs, ops, a, wd, label):
    """THD at input_vpk, and at twice the limiting EMF (well into saturation), where the
    same transfer is sampled past the edge the swing search stops at."""
    qs = run_quasi_static(designs, ops, supply_v=req.supply_v, source_ohm=req.source_ohm,
                          load_ohm=req.load_ohm, amplitude=req.input_vpk, workdir=wd)
    for i, q in enumerate(qs):
        ref = thd_from_curve(q["emf"], q["v_load"], req.input_vpk)
        assert ev.metrics["thd_pct"][i] == pytest.approx(ref, rel=TOL), (label, i)
    over = 2.0 * float(np.max(a))
    hard = run_quasi_static(designs, ops, supply_v=req.supply_v, source_ohm=req.source_ohm,
                            load_ohm=req.load_ohm, amplitude=over, points=8001, workdir=wd)
    op = evaluate(req, batch, t, band_edges=False, corner_gain=False, large_signal=False).op
    for i, q in enumerate(hard):
        amp = 2.0 * a[i]
        one = dataclasses.replace(req, input_vpk=float(amp))
        ours = distortion.thd_pct(one, batch.take([i]), model, op.take([i]))[0]
        ref = thd_from_curve(q["emf"], q["v_load"], amp)
        assert ours == pytest.approx(ref, rel=TOL), (label, i, amp)


@pytest.mark.parametrize("label", list(BENCH))
def test_bench_stages(label, tmp_path):
    require_ngspice()
    vcc, parts = BENCH[label]
    req = Request("ce", vcc, load_ohm=None, source_ohm=0.0, input_vpk=5e-3)
    batch = StageBatch.from_values("ce", **parts, **BENCH_COMMON)
    ev, model, designs, ops, sw, a = _compare(req, batch, BENCH_T, tmp_path)
    assert ev.metrics["gain_db"][0] > 40.0
    _check_swing(ev, sw, a, label)
    ours_a = distortion.swing_vpk(req, batch, model, ev.op)[1]
    assert ours_a[0] == pytest.approx(a[0], rel=TOL), label
    _check_thd(req, batch, BENCH_T, ev, model, designs, ops, a, tmp_path, label)


def _random_high_gain(seed, load_ohm):
    """Fully bypassed random stages behind an ideal source, kept at 40–50 dB, V_CE > 1 V."""
    req, batch, t = random_case("ce_full", seed, count=60)
    req = dataclasses.replace(req, source_ohm=0.0, load_ohm=load_ohm, input_vpk=5e-3)
    ev = evaluate(req, batch, t, band_edges=False, large_signal=False, corner_gain=False)
    g = ev.metrics["gain_db"]
    keep = np.nonzero((g >= 40) & (g <= 50) & (ev.op.vce > 1.0) & ~ev.op.cutoff
                      & ev.op.converged)[0][:12]
    assert keep.size >= 8, f"only {keep.size} usable stages (seed {seed})"
    return req, batch.take(keep), t


@pytest.mark.parametrize("seed, load", [(101, "open"), (102, "open"), (103, "light"),
                                        (104, "light")])
def test_random_high_gain_stages(seed, load, tmp_path):
    """Open load, or a light load drawn log-uniform from 47k–220k per seed."""
    require_ngspice()
    load_ohm = None
    if load == "light":
        load_ohm = float(10 ** np.random.default_rng(seed).uniform(np.log10(47e3),
                                                                  np.log10(220e3)))
    req, batch, t = _random_high_gain(seed, load_ohm)
    ev, model, designs, ops, sw, a = _compare(req, batch, t, tmp_path)
    _check_swing(ev, sw, a, (seed, load))
    ours_a = distortion.swing_vpk(req, batch, model, ev.op)[1]
    for i in range(batch.n):
        assert ours_a[i] == pytest.approx(a[i], rel=TOL), (seed, load, i)
    _check_thd(req, batch, t, ev, model, designs, ops, a, tmp_path, (seed, load))
