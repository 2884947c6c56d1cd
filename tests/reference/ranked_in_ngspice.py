"""The ranked two-transistor designs a search found, simulated in ngspice on the
hand-written decks of tests/reference/pair_spice.py: the shared half of the chain
and cascode search checks."""

from __future__ import annotations

from collections import Counter
from pathlib import Path

from optimiser.device import device_from_transistor

from .pair_spice import op_ac_deck, parse_op_ac, read_sweep, zout_deck
from .spice import _prints, run_ngspice
from .test_ngspice_pairs import _sweeps


def simulate_ranked(result, snap, form: str, wd: Path):
    """(designs, ngspice figures) of up to five ranked designs that use one transistor
    type for both transistors (the deck's one model: the type most of them use), each
    with its operating points, midband figures, sweep, Z_out and THD curve."""
    req = result.request
    same = [d for d in result.designs if d.transistors[0] == d.transistors[1]]
    label = Counter(d.transistors[0] for d in same).most_common(1)[0][0]
    designs = [d for d in same if d.transistors[0] == label][:5]
    assert len(designs) >= 3
    model = device_from_transistor(snap.transistor(label))
    circuits = [d.values() for d in designs]
    kw = dict(supply_v=req.supply_v, source_ohm=req.source_ohm, load_ohm=req.load_ohm)
    deck = op_ac_deck(form, circuits, model, mid_hz=req.mid_hz, sweep_dir=".", **kw)
    sp = parse_op_ac(run_ngspice(deck, wd, "opac"), len(circuits), form, circuits, model,
                     **kw)
    for k, r in enumerate(sp):
        r["freqs"], r["h"] = read_sweep(wd / f"sweep_{k}.txt")
    zo = _prints(run_ngspice(zout_deck(form, circuits, model, mid_hz=req.mid_hz, **kw),
                             wd, "zout"))
    for k, r in enumerate(sp):
        r["zout"] = zo[f"zo_{k}"]
        r["thd_curve"] = _sweeps(form, [circuits[k]], model, [r], [req.input_vpk], 2001,
                                 wd, f"thd{k}", kw, [k])[0]
    return designs, sp


def rel(a, b):
    return abs(a - b) / abs(b)
