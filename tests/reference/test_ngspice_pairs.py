"""Two-transistor circuits against ngspice (Debian's package, batch mode): seeded random
capacitor-coupled ce→cc, ce→ce and cb→cc chains, direct-coupled ce→cc, and cascodes.

Reference: ngspice with the ``.model`` line of docs/model.md, TEMP = TNOM = 25 °C, on
decks written out by hand for each form (tests/reference/pair_spice.py), not from the
engine's description of the forms.  The operating-point/AC and output-impedance decks
compared against are committed under tests/reference/netlists/pairs/ (the test fails
when the seeded circuits no longer give those exact decks; ``DRAWERFIT_WRITE_NETLISTS=1``
rewrites them); the quasi-static decks hold the capacitors at ngspice's own operating
point, so they are written at run time.

Tolerances, the single-stage ones (tests/reference/test_ngspice_engine.py): I_C and V_CE
of each transistor 0.5 %, midband gain 1 %, f_low, f_high, Zin, Zout 3 %; THD and swing
10 % relative (THD below 0.5 %: 0.05 percentage points).  At least 20 circuits a form.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np
import pytest

from optimiser.device import device_from_transistor
from optimiser.pair_evaluate import evaluate_pair

from .pair_spice import op_ac_deck, parse_op_ac, qs_deck, read_sweep, zout_deck
from .random_pairs import FORMS, random_pairs
from .spice import (
    _prints,
    edge_from_sweep,
    require_ngspice,
    run_ngspice,
    swing_from_curve,
    thd_from_curve,
)

pytestmark = [pytest.mark.reference]
MIN_CIRCUITS = 20
NETLISTS = Path(__file__).parent / "netlists" / "pairs"


def _case(form):
    req, batch, t = random_pairs(form, FORMS.index(form) + 21, count=40)
    ev = evaluate_pair(req, batch, (t, t), band_edges=False, large_signal=False)
    ok = np.ones(batch.n, bool)
    for op in ev.ops:
        ok &= (op.vce > 1.0) & ~op.cutoff & op.converged
    keep = np.nonzero(ok)[0][:22]
    assert keep.size >= MIN_CIRCUITS, f"only {keep.size} usable {form} circuits"
    batch = batch.take(keep)
    ev = evaluate_pair(req, batch, (t, t))
    return req, batch, t, ev, device_from_transistor(t)


def _committed(name: str, text: str) -> None:
    path = NETLISTS / name
    if os.environ.get("DRAWERFIT_WRITE_NETLISTS") == "1":
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)
    assert path.exists() and path.read_text() == text, (
        f"{path.name} is not the deck these circuits give (DRAWERFIT_WRITE_NETLISTS=1 "
        "rewrites it)")


@pytest.fixture(scope="module", params=FORMS)
def compared(request, tmp_path_factory):
    require_ngspice()
    form = request.param
    return compare(form, tmp_path_factory.mktemp(form))


def compare(form, wd):
    """The engine's and ngspice's figures of the seeded circuits of ``form`` (run in ``wd``)."""
    req, batch, t, ev, model = _case(form)
    circuits = [batch.one(i) for i in range(batch.n)]
    kw = dict(supply_v=req.supply_v, source_ohm=req.source_ohm, load_ohm=req.load_ohm)
    deck = op_ac_deck(form, circuits, model, mid_hz=req.mid_hz, sweep_dir=".", **kw)
    _committed(f"{form}-op-ac.cir", deck)
    sp = parse_op_ac(run_ngspice(deck, wd, "opac"), batch.n, form, circuits, model, **kw)
    for k, r in enumerate(sp):
        r["freqs"], r["h"] = read_sweep(wd / f"sweep_{k}.txt")
    zdeck = zout_deck(form, circuits, model, mid_hz=req.mid_hz, **kw)
    _committed(f"{form}-zout.cir", zdeck)
    zo = _prints(run_ngspice(zdeck, wd, "zout"))
    for k, r in enumerate(sp):
        r["zout"] = zo[f"zo_{k}"]
    curves = {}
    # each circuit's swing sweep reaches 1.5 times the EMF limit the engine finds (a
    # chain driven far past its limit, to ±supply_v, stops ngspice's DC sweep); a limit
    # the engine placed too high is found inside the sweep, one placed more than 1.5
    # times too low shows as no limit in the reference: either fails the check
    lim = ev.extra["swing_emf_vpk"]
    top = np.where(np.isfinite(lim), np.minimum(req.supply_v, 1.5 * lim), req.supply_v)
    # the quasi-static decks one circuit each: ngspice stopping on one hard-driven copy
    # would otherwise lose the whole batch
    curves["thd"] = [_sweeps(form, [c], model, [sp[k]], [req.input_vpk], 2001, wd,
                             f"thd{k}", kw, [k])[0] for k, c in enumerate(circuits)]
    curves["swing"] = [_sweeps(form, [c], model, [sp[k]], top[k:k + 1], 6001, wd,
                               f"swing{k}", kw, [k])[0] for k, c in enumerate(circuits)]
    return form, req, ev, model, sp, curves


def _sweeps(form, circuits, model, ops, amps, points, wd, tag, kw, numbers=None):
    numbers = list(range(len(circuits))) if numbers is None else numbers
    run_ngspice(qs_deck(form, circuits, model, ops, amplitudes=amps, points=points,
                        out_dir=".", tag=tag, numbers=numbers, **kw), wd, tag)
    out = []
    for j, k in enumerate(numbers):
        pos = np.loadtxt(wd / f"{tag}_{k}p.txt", ndmin=2)
        neg = np.loadtxt(wd / f"{tag}_{k}n.txt", ndmin=2)
        data = np.concatenate([neg[:0:-1], pos])      # −1 … 0 … +1, 0 once
        data[:, 0] *= amps[j]                 # the copy's own EMF
        out.append(data)
    return out


def _rel(a, b):
    return abs(a - b) / abs(b)


def test_operating_points(compared):
    form, req, ev, model, sp, curves = compared
    for i, r in enumerate(sp):
        for k in range(2):
            assert _rel(ev.stages[k]["ic_a"][i], r["ic"][k]) < 0.005, (form, i, k)
            assert _rel(ev.stages[k]["vce_v"][i], r["vce"][k]) < 0.005, (form, i, k)


def test_midband_gain_zin_zout(compared):
    form, req, ev, model, sp, curves = compared
    for i, r in enumerate(sp):
        assert _rel(ev.metrics["gain"][i], r["gain"]) < 0.01, (form, i)
        assert _rel(ev.metrics["zin_ohm"][i], r["zin"]) < 0.03, (form, i)
        assert _rel(ev.metrics["zout_ohm"][i], r["zout"]) < 0.03, (form, i)


def test_band_edges(compared):
    form, req, ev, model, sp, curves = compared
    for i, r in enumerate(sp):
        for key, below in (("f_low_hz", True), ("f_high_hz", False)):
            ref = edge_from_sweep(r["freqs"], r["h"], req.mid_hz, r["gain"], below)
            ours = ev.metrics[key][i]
            if math.isnan(ref):
                assert math.isnan(ours), (form, i, key, ours)
            else:
                assert _rel(ours, ref) < 0.03, (form, i, key, ours, ref)


def test_thd_and_swing(compared):
    form, req, ev, model, sp, curves = compared
    for i, r in enumerate(sp):
        q = curves["thd"][i]
        ref = thd_from_curve(q[:, 0], q[:, 1], req.input_vpk)
        ours = ev.metrics["thd_pct"][i]
        if ref < 0.5:
            assert abs(ours - ref) <= 0.05, (form, i, ours, ref)
        else:
            assert _rel(ours, ref) < 0.10, (form, i, ours, ref)
        s = curves["swing"][i]
        # both transistors forward-active: the smaller margin of the two (docs/model.md)
        margins = [np.minimum(s[:, 3 + 4 * k] - model.vce_sat,
                              (s[:, 5 + 4 * k] - 0.01 * r["ic"][k]) / r["ic"][k])
                   for k in range(2)]
        m = np.minimum(*margins)
        ref_sw = swing_from_curve(s[:, 0], s[:, 1], model.vce_sat + m, 0.01 + m, 1.0,
                                  model.vce_sat)
        ours_sw = ev.metrics["swing_vpk"][i]
        if math.isnan(ref_sw):
            assert math.isnan(ours_sw), (form, i, ours_sw)
        else:
            assert _rel(ours_sw, ref_sw) < 0.10, (form, i, ours_sw, ref_sw)
