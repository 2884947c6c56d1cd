"""The exported SPICE netlist, run by ngspice, gives the engine's figures.

Reference: ngspice (Debian's package, batch mode) on the deck that
:func:`optimiser.spice_netlist.spice_netlist` writes for seeded random stages of
every variant (tests/reference/random_stages.py), unchanged but for a
``.control`` block appended by this test to print what it reads: I_C from the
``.op`` point, |v(load)| at mid_hz (the source is ``AC 1``), and f_low from the
deck's own ``.ac dec`` sweep.  The tolerances are those of the engine against
ngspice in test_ngspice_engine.py: I_C 0.5 %, midband gain 1 %, f_low 3 %.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from optimiser.evaluate import design_of, evaluate
from optimiser.spice_netlist import spice_netlist

from .random_stages import VARIANTS, random_case
from .spice import _prints, _read_wrdata, edge_from_sweep, require_ngspice, run_ngspice

pytestmark = [pytest.mark.reference]
#: Designs of each variant run through ngspice (one ngspice process each).
PER_VARIANT = 10


def _designs(variant: str, seed: int):
    req, batch, t = random_case(variant, seed, count=32)
    ev = evaluate(req, batch, t, band_edges=False, large_signal=False, corner_gain=False)
    keep = np.nonzero((ev.op.vce > 1.0) & ~ev.op.cutoff & ev.op.converged)[0][:PER_VARIANT]
    assert keep.size >= PER_VARIANT // 2, f"only {keep.size} usable {variant} designs"
    batch = batch.take(keep)
    ev = evaluate(req, batch, t)
    return req, t, [design_of(ev, i, label=t.label) for i in range(batch.n)]


def _run(deck: str, mid_hz: float, workdir, name: str) -> dict:
    """Run the deck with a .control block that prints I_C, the gain at mid_hz and the sweep."""
    body = deck.rstrip()
    assert body.endswith(".end") and ".control" not in body.lower()
    sweep = workdir / f"{name}.txt"
    ctl = ["save all", "run",                       # the deck's own .op and .ac
           "setplot ac1", f"wrdata {sweep} v(load)",
           "op", "print @q[ic]",
           f"ac lin 1 {mid_hz:.12g} {mid_hz:.12g}",
           "let g = mag(v(load))", "print g"]
    text = body[: -len(".end")] + ".control\n" + "\n".join(ctl) + "\n.endc\n.end\n"
    vals = _prints(run_ngspice(text, workdir, name))
    f, h = _read_wrdata(sweep, 1)
    return {"ic": vals["@q[ic]"], "gain": vals["g"], "freqs": f, "h": h[0]}


@pytest.mark.parametrize("variant", VARIANTS)
def test_exported_netlist_gives_the_engines_ic_gain_and_f_low(variant, tmp_path):
    require_ngspice()
    req, t, designs = _designs(variant, seed=VARIANTS.index(variant) + 31)
    for i, d in enumerate(designs):
        deck = spice_netlist(d, req, t)
        sp = _run(deck, req.mid_hz, tmp_path, f"{variant}_{i}")
        m = d.metrics
        assert abs(m["ic_a"] - sp["ic"]) / sp["ic"] < 0.005, (variant, i, m["ic_a"], sp["ic"])
        assert abs(m["gain"] - sp["gain"]) / sp["gain"] < 0.01, (variant, i, m["gain"], sp)
        # The deck's sweep is the engine's own frequency range.
        assert sp["freqs"][0] == pytest.approx(1e-3) and sp["freqs"][-1] == pytest.approx(100e9)
        ref = edge_from_sweep(sp["freqs"], sp["h"], req.mid_hz, sp["gain"], below=True)
        ours = m["f_low_hz"]
        if math.isnan(ref):
            assert ours is None or math.isnan(ours), (variant, i, ours)
        else:
            assert abs(ours - ref) / ref < 0.03, (variant, i, ours, ref)


def test_values_in_the_deck_are_read_by_ngspice_as_meant(tmp_path):
    """SPICE reads "4k7" as 4 k and "1M" as 1 milli: the deck must not use either form.

    ngspice's own reading of each value (printed with ``print @R1[resistance]``) is
    compared with the design's value.
    """
    require_ngspice()
    req, t, designs = _designs("ce_partial", seed=77)
    d = designs[0]
    deck = spice_netlist(d, req, t).rstrip()
    roles = [r for r in d.parts if r.startswith("R")]
    prints = " ".join(f"@{r.lower()}[resistance]" for r in roles)
    caps = " ".join(f"@{r.lower()}[capacitance]" for r in d.parts if r.startswith("C_"))
    text = deck[: -len(".end")] + f".control\nsave all\nop\nprint {prints} {caps}\n.endc\n.end\n"
    vals = _prints(run_ngspice(text, tmp_path, "values"))
    for role, pick in d.parts.items():
        key = f"@{role.lower()}[{'resistance' if role.startswith('R') else 'capacitance'}]"
        assert vals[key] == pytest.approx(pick.value, rel=1e-5), role
    assert re.search(r"^\.model Q NPN\(IS=\S+ BF=\S+ NF=1 ", deck, re.M)
