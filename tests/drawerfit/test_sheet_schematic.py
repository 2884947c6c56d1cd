"""The schematic's labels: none crosses a symbol, a wire or another label.

The check reads schematic.svg as a browser gets it.  Each label is an SVG
``<text>`` whose lines are ``<tspan dy="font size">``; its box is estimated as:

* width: the widest line set in DejaVu Sans at the text's font size (the font
  matplotlib ships, measured with matplotlib's own text layout; it is also the
  usual "sans" of Linux browsers) plus 10 % for fonts that set wider, placed by
  ``text-anchor`` (start, middle, end);
* height: one font size per line; line k's reference height is y + (k+1)·dy and
  ``dominant-baseline`` says where the line sits on it: ``central`` its middle,
  ``hanging`` its top, ``ideographic`` its bottom, otherwise its baseline with
  0.8 of the size above and 0.2 below.  Renderers that follow SVG 1.1 do not
  pass ``dominant-baseline`` on to the ``<tspan>`` lines and set them on their
  baseline instead, so the box is the union of both placements.

The symbols' boxes are schemdraw's own ``Element.get_bbox(transform=True,
includetext=False)`` for every element of the drawing (wires and dots included),
scaled to SVG points as schemdraw's SVG backend does (x·scale, −y·scale).  A
part's label crosses no element, its own included; text that is part of a symbol
(the + of a polarised capacitor) may touch only its own symbol.  Each text is
matched to its element by its text among the element's text segments.
"""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET
from dataclasses import dataclass

import pytest
from matplotlib.font_manager import FontProperties
from matplotlib.textpath import TextToPath

from drawerfit.sheet.schematic import draw
from optimiser.design import Design

from .test_sheet import Q, _parts, _pick, _request

SVG_NS = "{http://www.w3.org/2000/svg}"
_T2P = TextToPath()
_FONT = FontProperties(family="DejaVu Sans")
#: Extra width allowed for fonts that set wider than DejaVu Sans.
WIDTH_MARGIN = 1.10


@dataclass
class Box:
    x0: float
    y0: float
    x1: float
    y1: float

    def crosses(self, o: "Box") -> bool:
        """True when the two boxes share interior points (a wire crossing counts)."""
        return self.x0 < o.x1 and o.x0 < self.x1 and self.y0 < o.y1 and o.y0 < self.y1

    def finite(self) -> bool:
        return all(math.isfinite(v) for v in (self.x0, self.y0, self.x1, self.y1))


@dataclass
class TextLabel:
    text: str
    x: float
    y: float
    box: Box


def _line_width(line: str, size: float) -> float:
    fp = _FONT.copy()
    fp.set_size(size)
    w, _, _ = _T2P.get_text_width_height_descent(line, fp, ismath=False)
    return w * WIDTH_MARGIN


def svg_labels(svg: bytes) -> list[TextLabel]:
    """Every <text> of the SVG with its estimated box (SVG points, y down)."""
    out = []
    root = ET.fromstring(svg)
    for el in root.iter(SVG_NS + "text"):
        lines = [t.text or "" for t in el.findall(SVG_NS + "tspan")] or [el.text or ""]
        size = float(el.get("font-size", "14"))
        x, y = float(el.get("x")), float(el.get("y"))
        w = max(_line_width(s, size) for s in lines)
        anchor = el.get("text-anchor", "start")
        x0 = {"start": x, "middle": x - w / 2, "end": x - w}[anchor]
        base = el.get("dominant-baseline", "alphabetic")
        spans = el.findall(SVG_NS + "tspan")
        dys = [float(t.get("dy", size)) for t in spans] or [size]
        tops = []
        ref = y
        for dy in dys:
            ref += dy
            tops.append({"central": ref - size / 2, "hanging": ref,
                         "ideographic": ref - size}.get(base, ref - 0.8 * size))
            tops.append(ref - 0.8 * size)              # the baseline, dominant-baseline unused
        box = Box(x0, min(tops), x0 + w, max(tops) + size)
        out.append(TextLabel("\n".join(lines), x, y, box))
    return out


def element_boxes(drawing) -> list[tuple[object, Box]]:
    """Each element and its symbol box (text left out) in SVG points."""
    import schemdraw.segments as seg

    scale = drawing.fig.scale
    out = []
    for el in drawing.elements:
        bb = el.get_bbox(transform=True, includetext=False)
        box = Box(bb.xmin * scale, -bb.ymax * scale, bb.xmax * scale, -bb.ymin * scale)
        texts = [s.text for s in el.segments if isinstance(s, seg.SegmentText)]
        user = {lab.label for lab in getattr(el, "_userlabels", [])}
        out.append((el, box, texts, user))
    return out


def collisions(drawing, svg: bytes) -> list[str]:
    """Every label that crosses another label or an element other than its own."""
    labels = svg_labels(svg)
    elements = element_boxes(drawing)
    owner = {}
    for i, lab in enumerate(labels):
        mine = [j for j, (_, _, texts, _) in enumerate(elements) if lab.text in texts]
        assert mine, f"no element carries the label {lab.text!r}"
        # The same text on several elements (the + of each polarised part): the nearest.
        owner[i] = min(mine, key=lambda j: _distance(elements[j][1], lab.box))
    found = []
    for i, lab in enumerate(labels):
        for j, (el, box, _, user) in enumerate(elements):
            own_symbol_text = j == owner[i] and lab.text not in user
            if not own_symbol_text and box.finite() and lab.box.crosses(box):
                found.append(f"{lab.text!r} crosses {type(el).__name__} {box}")
        for k in range(i + 1, len(labels)):
            if lab.box.crosses(labels[k].box):
                found.append(f"{lab.text!r} crosses the label {labels[k].text!r}")
    return found


def _distance(a: Box, b: Box) -> float:
    dx = max(a.x0 - b.x1, b.x0 - a.x1, 0.0)
    dy = max(a.y0 - b.y1, b.y0 - a.y1, 0.0)
    return math.hypot(dx, dy)


PROBES = {"base": 2.0, "emitter": 1.35, "collector": 7.0}


def _drawn(topology: str, form: str | None, *, rc: bool = False, load: bool = True,
           source: bool = True):
    parts = _parts(topology, form or "")
    if rc:
        parts["RC"] = _pick("RC", 100.0, "100R", "B1")
    d = Design(topology, Q.label, parts, {"vb_v": 2.0, "ve_v": 1.35, "vc_v": 7.0}, True)
    kw = {}
    if not load:
        kw["load_ohm"] = None
    if not source:
        kw["source_ohm"] = 0.0
    dw = draw(d, _request(topology, **kw), PROBES)
    svg = dw.get_imagedata("svg")
    return d, dw, svg


FORMS = [("ce", "unbypassed", {}), ("ce", "partly bypassed", {}), ("ce", "fully bypassed", {}),
         ("cb", None, {}), ("cc", None, {}), ("cc", None, {"rc": True}),
         ("cc", None, {"load": False}), ("cc", None, {"rc": True, "load": False}),
         ("ce", "partly bypassed", {"load": False, "source": False}),
         ("cb", None, {"load": False})]


@pytest.mark.parametrize("topology,form,kw", FORMS)
def test_no_label_crosses_a_symbol_or_another_label(topology, form, kw):
    d, dw, svg = _drawn(topology, form, **kw)
    found = collisions(dw, svg)
    assert not found, "\n".join(found)


def test_the_check_catches_a_misplaced_label():
    """Moving one label onto a resistor, or onto another label, is reported."""
    d, dw, svg = _drawn("ce", "partly bypassed")
    assert not collisions(dw, svg)
    root = ET.fromstring(svg)
    texts = {"\n".join(t.text for t in el.findall(SVG_NS + "tspan")): el
             for el in root.iter(SVG_NS + "text")}
    r2_label = next(lab.box for lab in svg_labels(svg) if lab.text.startswith("R2"))
    r2 = min((b for el, b, _, _ in element_boxes(dw) if "Resistor" in type(el).__name__),
             key=lambda b: _distance(b, r2_label))
    moved = texts["RC\n4k7\nbin B2"]
    for t in [moved, *moved.findall(SVG_NS + "tspan")]:
        t.set("x", str((r2.x0 + r2.x1) / 2))
    moved.set("y", str((r2.y0 + r2.y1) / 2 - 28))
    found = collisions(dw, ET.tostring(root))
    assert any(f.startswith("'RC\\n4k7") and "Resistor" in f for f in found), found
    # Onto another label (the R1 label's own place), away from any symbol.
    root = ET.fromstring(svg)
    texts = {"\n".join(t.text for t in el.findall(SVG_NS + "tspan")): el
             for el in root.iter(SVG_NS + "text")}
    src, dst = texts["RC\n4k7\nbin B2"], texts["R1\n47k\nbin A3"]
    for a in ("x", "y", "text-anchor", "dominant-baseline"):
        src.set(a, dst.get(a))
    for t in src.findall(SVG_NS + "tspan"):
        t.set("x", dst.get("x"))
    found = collisions(dw, ET.tostring(root))
    assert any("crosses the label" in f and "R1" in f for f in found), found


def _capacitors(dw):
    """(element, + position or None) of every capacitor symbol in the drawing."""
    import schemdraw.segments as seg

    out = []
    for el in dw.elements:
        if "Capacitor" not in type(el).__name__:
            continue
        plus = [s.xform(el.transform).xy for s in el.segments
                if isinstance(s, seg.SegmentText) and s.text == "+"]
        out.append((el, plus[0] if plus else None))
    return out


@pytest.mark.parametrize("topology,form", [("ce", "partly bypassed"), ("cb", None), ("cc", None)])
def test_electrolytics_are_drawn_with_the_polarised_symbol(topology, form):
    # schemdraw's polarised capacitor is Capacitor2 (curved plate) with its + mark.
    d, dw, _ = _drawn(topology, form)
    polar = sum(1 for p in d.parts.values() if p.pieces[0].dielectric == "electrolytic")
    caps = _capacitors(dw)
    assert sum(1 for el, plus in caps if type(el).__name__ == "Capacitor2" and plus) == polar
    assert sum(1 for el, plus in caps if type(el).__name__ == "Capacitor" and not plus) == \
        sum(1 for r in d.parts if r.startswith("C_")) - polar


@pytest.mark.parametrize("plus,near", [("collector", "start"), ("load", "end")])
def test_the_plus_mark_is_at_the_end_the_design_says(plus, near):
    from dataclasses import replace

    parts = _parts("ce", "partly bypassed")
    parts["C_OUT"] = replace(parts["C_OUT"], plus=plus)
    d = Design("ce", Q.label, parts, {"vb_v": 2.0, "ve_v": 1.35, "vc_v": 7.0}, True)
    dw = draw(d, _request("ce"), PROBES)
    # C_OUT is the capacitor on the collector's level, right of the transistor.
    el, xy = next((el, xy) for el, xy in _capacitors(dw)
                  if xy is not None and abs(el.start[1] - el.end[1]) < 1e-9
                  and el.start[0] > 0)
    # The element runs from the collector toward the load (start nearer the transistor).
    collector_end, load_end = sorted((el.start, el.end), key=lambda pt: pt[0])
    d_start = math.dist(xy, collector_end)
    d_end = math.dist(xy, load_end)
    assert (d_start < d_end) == (near == "start"), (xy, el.start, el.end)
    assert not collisions(dw, dw.get_imagedata("svg"))
