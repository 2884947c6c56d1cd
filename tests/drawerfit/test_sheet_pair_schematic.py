"""The two-transistor schematic: every form and variant (tests/drawerfit/pair_forms.py)
drawn with no label crossing a symbol, a wire or another label, by the same check on
the SVG as the single stages' (tests/drawerfit/test_sheet_schematic.py, which says how
the boxes are estimated); every part and probe on it; polarised parts drawn polarised
with their + on the higher-DC node (the engine's operating point)."""

from __future__ import annotations

import math
import re

import pytest

from drawerfit.sheet.pair_schematic import PAIR_DRAWINGS, draw_pair, drawing_key
from drawerfit.sheet.pair_writer import circuit_picks
from optimiser.pair_evaluate import evaluate_pair
from optimiser.pair_report import probe_nodes

from .pair_forms import circuits
from .test_sheet_schematic import SVG_NS, _capacitors, collisions, svg_labels

CASES = circuits()


def _drawn(c):
    ev = evaluate_pair(c.request, c.batch(), c.transistors, c.ratings, band_edges=False,
                       large_signal=False)
    picks = circuit_picks(ev, 0, c)
    probes = probe_nodes(ev, 0)
    dw = draw_pair(c.form, picks, c.request, tuple(t.label for t in c.transistors), probes)
    return ev, picks, probes, dw, dw.get_imagedata("svg")


@pytest.mark.parametrize("name,c", CASES, ids=[n for n, _ in CASES])
def test_no_label_crosses_a_symbol_or_another_label(name, c):
    _, picks, probes, dw, svg = _drawn(c)
    found = collisions(dw, svg)
    assert not found, "\n".join(found)
    texts = [lab.text for lab in svg_labels(svg)]
    # every part with its role, value and bin; every probed node in blue
    for role, pick in picks.items():
        loc = pick.pieces[0].location
        assert any(t.startswith(f"{role}\n{pick.label}\nbin {loc}") for t in texts), role
    blue = [t for t in texts if re.fullmatch(r"[BECJ] -?[\d.]+ [mµ]?V", t)]
    assert len(blue) == len(probes), (blue, probes)
    for k, stage in enumerate(c.form.stages):
        assert f"{stage}\n{c.transistors[k].label}" in texts


@pytest.mark.parametrize("name,c", [CASES[0], *[x for x in CASES if x[0].startswith(
    ("cb-cb", "direct-partly", "cascode-partly"))]], ids=lambda x: x if isinstance(x, str)
    else "")
def test_polarised_plus_on_the_higher_node(name, c):
    """Each electrolytic is the polarised symbol, its + at the end of the higher DC
    voltage: the + mark nearer that end of the symbol than the other."""
    ev, picks, _, dw, _ = _drawn(c)
    caps = [(el, plus) for el, plus in _capacitors(dw) if plus is not None]
    polar = [r for r, p in picks.items() if p.pieces[0].dielectric == "electrolytic"]
    assert len(caps) == len(polar)
    volts = {k: float(v[0]) for k, v in ev.volts.items()}
    for role in polar:
        v, a, b = ev.capacitors[role]
        assert picks[role].plus == (a if float(v[0]) >= 0 else b)
    assert all(math.isfinite(x) for _, plus in caps for x in plus)
    assert volts


def test_every_form_has_a_drawing_and_is_drawn_here():
    """Every two-transistor form the engine offers (each chain of two of the stages,
    each other coupling, the cascode) has a registered drawing, and the cases above
    draw each of them."""
    from optimiser.stages import NAMES, PAIR_COUPLINGS, pair_form

    forms = {pair_form("cascode").name}
    for a in NAMES:
        for b in NAMES:
            for coupling in PAIR_COUPLINGS:
                try:
                    forms.add(pair_form([a, b], coupling).name)
                except ValueError:
                    continue
    drawn = {c.form.name for _, c in CASES}
    assert forms == drawn
    for _, c in CASES:
        assert drawing_key(c.form) in PAIR_DRAWINGS


def test_the_check_catches_a_label_moved_onto_a_resistor():
    import xml.etree.ElementTree as ET

    from .test_sheet_schematic import element_boxes

    _, _, _, dw, svg = _drawn(dict(CASES)["cascode-partly"])
    root = ET.fromstring(svg)
    r2 = next(b for el, b, _, _ in element_boxes(dw) if "Resistor" in type(el).__name__)
    el = next(e for e in root.iter(SVG_NS + "text")
              if (e.findall(SVG_NS + "tspan") or [e])[0].text == "C_OUT")
    for t in [el, *el.findall(SVG_NS + "tspan")]:
        t.set("x", str((r2.x0 + r2.x1) / 2))
    el.set("y", str((r2.y0 + r2.y1) / 2 - 20))
    assert any("C_OUT" in f and "Resistor" in f for f in collisions(dw, ET.tostring(root)))
