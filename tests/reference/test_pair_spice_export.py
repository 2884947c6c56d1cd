"""The exported SPICE deck of a two-transistor circuit, run by ngspice, gives the engine's
figures.

Reference: ngspice (Debian's package, batch mode) on the deck that
:func:`optimiser.spice_netlist.pair_spice_netlist` writes for seeded random circuits of
every form (tests/reference/random_pairs.py), unchanged but for a ``.control`` block
appended by this test: I_C of both transistors from ``.op`` and |v(load)| at mid_hz
(the source is ``AC 1``).  Tolerances as the engine against ngspice
(test_ngspice_pairs.py): I_C 0.5 %, midband gain 1 %.
"""

from __future__ import annotations

import numpy as np
import pytest

from optimiser.circuit_file import PairCircuit
from optimiser.pair_evaluate import evaluate_pair
from optimiser.spice_netlist import pair_spice_netlist

from .random_pairs import FORMS, random_pairs
from .spice import _prints, require_ngspice, run_ngspice

pytestmark = [pytest.mark.reference]
PER_FORM = 4


@pytest.mark.parametrize("form", FORMS)
def test_exported_deck_gives_the_engines_ic_and_gain(form, tmp_path):
    require_ngspice()
    req, batch, t = random_pairs(form, FORMS.index(form) + 41, count=16)
    ev = evaluate_pair(req, batch, (t, t), band_edges=False, large_signal=False)
    ok = np.ones(batch.n, bool)
    for op in ev.ops:
        ok &= (op.vce > 1.0) & ~op.cutoff & op.converged
    keep = np.nonzero(ok)[0][:PER_FORM]
    assert keep.size >= 2, f"only {keep.size} usable {form} circuits"
    for i in keep:
        c = PairCircuit(req, batch.form, batch.one(i), (t, t), {})
        deck = pair_spice_netlist(c, (t, t)).rstrip()
        assert deck.endswith(".end") and ".control" not in deck.lower()
        ctl = ["save all", "run", "op", "print @qs1[ic] @qs2[ic]", f"ac lin 1 {req.mid_hz:.12g} {req.mid_hz:.12g}",
               "let g = mag(v(load))", "print g"]
        text = deck[: -len(".end")] + ".control\n" + "\n".join(ctl) + "\n.endc\n.end\n"
        vals = _prints(run_ngspice(text, tmp_path, f"{form}{i}"))
        for k, stage in enumerate(("s1", "s2")):
            ref = vals[f"@q{stage}[ic]"]
            assert abs(ev.stages[k]["ic_a"][i] - ref) < 0.005 * abs(ref), (form, i, stage)
        assert abs(ev.metrics["gain"][i] - vals["g"]) < 0.01 * vals["g"], (form, i)
