"""The stage's schematic, drawn with schemdraw into SVG with searchable text.

Every part is labelled with its role name, its value and the bin it comes from;
the supply, the signal source (with its resistance) and the load are drawn too.
Layout, read left to right: supply, signal source, bias divider, transistor,
output coupling and load; the supply rail across the top, a ground rail across
the bottom.  The common-base stage takes its input at the emitter from the
lower right, so that no wire crosses another.

Each topology has its drawing in :data:`DRAWINGS` (registered with
:func:`drawing`); the three divider-biased stages share one, which asks the
topology's module (:mod:`optimiser.stages`) at which terminals the source and
the load attach.  A new topology registers its own.

Each label stands beside its part, placed from the part's symbol box, so that
no label crosses a symbol, a wire or another label (the tests check this on the
SVG).  Polarised capacitors are schemdraw's polarised symbol (curved plate and
+), with the + at the end the design says and on the side away from the label.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import schemdraw
import schemdraw.elements as elm

from drawerfit.sheet import fmt
from optimiser.design import Design
from optimiser.request import Request
from optimiser.stages import module as stage_module

__all__ = ["draw", "drawing", "DRAWINGS", "write_schematic", "role_label", "pick_label",
           "cap_symbol", "tag"]

#: topology name -> its drawing: (design, request, probes) -> schemdraw.Drawing.
DRAWINGS: dict[str, Callable[..., schemdraw.Drawing]] = {}


def drawing(*names: str):
    """Register the decorated function as the drawing of the topologies ``names``."""
    def register(fn):
        for name in names:
            DRAWINGS[name] = fn
        return fn
    return register

#: Unit length of one part body (schemdraw units).
L = 2.6
FONT = 14


def role_label(design: Design, role: str, kind: str) -> str:
    """Three lines: role, value (with how pieces are joined), bin location."""
    return pick_label(design.parts[role], role, kind)


def pick_label(pick, role: str, kind: str) -> str:
    """Three lines for a :class:`~optimiser.design.RolePick`: role, value (with how
    pieces are joined), bin location."""
    text = pick.label or fmt.value(pick.value, kind)
    if pick.joined:
        vals = [fmt.value(pc.value, kind) for pc in pick.pieces for _ in range(pc.count)]
        sep = " + " if pick.joined == "series" else " ∥ "
        text = f"{text} = {sep.join(vals)}"
    loc = fmt.location_of(pick)
    lines = [role, text]
    if loc:
        lines.append(f"bin {loc}")
    return "\n".join(lines)


def _label(d: Design, role: str) -> str:
    return role_label(d, role, "capacitor" if role.startswith("C_") else "resistor")


#: Height of one text line in drawing units (schemdraw's SVG is 36 points a unit).
LINE_U = FONT / 36.0
#: Space between a part and its label, drawing units.
GAP = 0.15
#: Where the ``+`` of schemdraw's polarised capacitor falls for each drawing
#: direction (unflipped): the left of the direction of travel.
_PLUS_SIDE = {"right": "above", "left": "below", "down": "right", "up": "left"}
_OPPOSITE = {"above": "below", "below": "above", "left": "right", "right": "left"}
#: Nodes on the far side of a capacitor from the transistor.
_FAR_NODES = ("source", "load", "ground")


def _polarised(d: Design, role: str) -> bool:
    from inventory.parts import POLARISED_DIELECTRICS

    return any((pc.dielectric or "").lower() in POLARISED_DIELECTRICS
               for pc in d.parts[role].pieces)


def _plus_at_far_side(d: Design, request: Request, role: str) -> bool:
    """True when the design puts the + of ``role`` on its far side (source, load, ground).

    The design's own ``plus`` when it has one, else the side at the higher DC
    voltage (:func:`optimiser.cautions.capacitor_bias`); the transistor's side when
    neither is known.
    """
    plus = d.parts[role].plus
    if plus is None:
        from optimiser.cautions import capacitor_bias

        bias = capacitor_bias(d, request).get(role)
        plus = bias.plus if bias is not None else None
    return plus in _FAR_NODES


def _cap(d: Design, request: Request, role: str, direction: str, label_side: str):
    """A capacitor drawn from its transistor side toward ``direction``.

    Polarised parts are schemdraw's polarised capacitor (curved plate and +), the
    + at the end the design says and on the side away from the label.
    """
    polar = _polarised(d, role)
    return cap_symbol(polar, polar and _plus_at_far_side(d, request, role), direction,
                      label_side)


def cap_symbol(polarised: bool, plus_at_end: bool, direction: str, label_side: str):
    """A capacitor drawn toward ``direction``: schemdraw's polarised symbol (curved plate
    and +) when ``polarised``, its + at the end (``plus_at_end``) or the start, and on
    the side away from the label."""
    if not polarised:
        return getattr(elm.Capacitor(), direction)(L)
    cap = getattr(elm.Capacitor2(polar=True), direction)(L)
    if plus_at_end:
        cap = cap.reverse()
    if _PLUS_SIDE[direction] == label_side:
        cap = cap.flip()
    return cap


def tag(dw: schemdraw.Drawing, element, text: str, side: str, gap: float = GAP, **style):
    """Write ``text`` beside ``element`` (above, below, left or right of its symbol).

    The anchor keeps the text clear of the symbol whether or not the viewer
    honours ``dominant-baseline`` on the text's lines (renderers that do not set
    each line on its baseline: up to 0.8 of a line higher, 0.2 lower).
    """
    bb = element.get_bbox(transform=True, includetext=False)
    cx, cy = (bb.xmin + bb.xmax) / 2, (bb.ymin + bb.ymax) / 2
    where = {"above": ((cx, bb.ymax + gap + 0.2 * LINE_U), "center", "bottom"),
             "below": ((cx, bb.ymin - gap - 0.8 * LINE_U), "center", "top"),
             "left": ((bb.xmin - gap, cy), "right", "center"),
             "right": ((bb.xmax + gap, cy), "left", "center")}[side]
    xy, ha, va = where
    dw.add(elm.Label().at(xy).label(text, halign=ha, valign=va, **style))


PROBE_COLOUR = "#1f4fbf"


def draw(design: Design, request: Request,
         probes: dict[str, float] | None = None) -> schemdraw.Drawing:
    """The schematic as a schemdraw Drawing (SVG canvas, text kept as <text>).

    ``probes`` maps "base", "emitter", "collector" to the DC volts to expect
    there; they are written beside those nodes (blue), to ground.  Every label
    stands beside its part, clear of every symbol, wire and other label.
    """
    fn = DRAWINGS.get(design.topology)
    if fn is None:
        raise ValueError(f"no schematic drawing for a {design.topology} stage")
    return fn(design, request, probes)


@drawing("ce", "cb", "cc")
def _divider_biased(design: Design, request: Request,
                    probes: dict[str, float] | None = None) -> schemdraw.Drawing:
    """A divider-biased stage: the source at the topology's INPUT terminal (base, or the
    emitter from the lower right), the load from its OUTPUT terminal."""
    schemdraw.svgconfig.text = "text"
    p = design.parts
    mod = stage_module(design.topology)
    at_emitter = mod.INPUT == "emitter"
    at_collector = mod.OUTPUT == "collector"
    dw = schemdraw.Drawing(canvas="svg", show=False)
    dw.config(fontsize=FONT, unit=L, lw=1.4)

    def part(element, text: str, side: str, gap: float = GAP):
        dw.add(element)
        tag(dw, element, text, side, gap)
        return element

    # --- transistor and the vertical stack on its emitter -------------------
    q = dw.add(elm.BjtNpn(circle=True).at((0, 0)).anchor("base"))
    tag(dw, q, f"Q\n{design.transistor}", "right", gap=0.1)
    emitter_parts: list[str] = [r for r in ("RE", "RE_BYP") if r in p]
    stack_h = L * max(1, len(emitter_parts)) + 0.8
    y_gnd = q.emitter[1] - stack_h - 0.4
    y_top = q.collector[1] + L + 1.2
    x_div = -3.6                           # the bias divider's column

    # Collector: RC to the rail, or straight to the rail (cc without RC).
    if "RC" in p:
        dw.add(elm.Line().at(q.collector).up(0.6))
        part(elm.Resistor().up(L), _label(design, "RC"), "left")
        dw.add(elm.Line().toy(y_top))
    else:
        dw.add(elm.Line().at(q.collector).toy(y_top))
    c_node = (q.collector[0], q.collector[1] + 0.6)

    # Emitter stack: RE then RE_BYP (with C_BYP across it) to ground.
    e_node = (q.emitter[0], q.emitter[1] - 0.6)
    dw.add(elm.Line().at(q.emitter).to(e_node))
    here = e_node
    for r in emitter_parts:
        res = part(elm.Resistor().at(here).down(L), _label(design, r), "right")
        if r == "RE_BYP" and "C_BYP" in p:
            dw.add(elm.Dot().at(res.start))
            dw.add(elm.Line().at(res.start).right(2.8))
            part(_cap(design, request, "C_BYP", "down", "right"), _label(design, "C_BYP"),
                 "right")
            dw.add(elm.Line().toy(y_gnd))
            dw.add(elm.Line().tox(res.end[0]))
            dw.add(elm.Dot())
        here = res.end
    dw.add(elm.Line().at(here).toy(y_gnd))

    # --- bias divider ---------------------------------------------------------
    b_node = (x_div, 0.0)
    dw.add(elm.Line().at(q.base).tox(x_div))
    dw.add(elm.Dot())
    part(elm.Resistor().at(b_node).up(L), _label(design, "R1"), "right")
    dw.add(elm.Line().toy(y_top))
    part(elm.Resistor().at(b_node).down(L), _label(design, "R2"), "right")
    dw.add(elm.Line().toy(y_gnd))
    if "C_B" in p:
        dw.add(elm.Line().at(b_node).down(0.5))
        dw.add(elm.Dot())
        dw.add(elm.Line().left(1.6))
        part(_cap(design, request, "C_B", "down", "left"), _label(design, "C_B"), "left")
        dw.add(elm.Line().toy(y_gnd))

    source_r = f"source R\n{fmt.value(request.source_ohm, 'resistor')}" \
        if request.source_ohm else None

    # --- input at the emitter (cb): into the emitter node from the lower right
    x_src = None
    if at_emitter:
        dw.add(elm.Dot().at(e_node))
        dw.add(elm.Line().at(e_node).right(2.0))
        cin = part(_cap(design, request, "C_IN", "right", "below"), _label(design, "C_IN"),
                   "below")
        here = cin.end
        if source_r:
            here = part(elm.Resistor().at(here).right(L * 0.8), source_r, "below").end
        x_src = here[0] + 0.8
        dw.add(elm.Line().at(here).tox(x_src))
        part(elm.SourceSin().at((x_src, y_gnd)).toy(e_node[1]).reverse(), "signal\nsource",
             "right", gap=0.2)
        dw.add(elm.Dot().at((x_src, y_gnd)))

    # --- output: C_OUT from the collector (ce, cb) or the emitter (cc) -------
    # Above the collector's wire; below the emitter's, clear of the transistor's label.
    out_node = c_node if at_collector else e_node
    out_side = "above" if at_collector else "below"
    dw.add(elm.Dot().at(out_node))
    dw.add(elm.Line().at(out_node).right(2.0))
    cout = part(_cap(design, request, "C_OUT", "right", out_side), _label(design, "C_OUT"),
                out_side)
    x_load = cout.end[0] + 1.2
    if x_src is not None:
        x_load = max(x_load, x_src + 3.0)       # the load stands right of the cb source
    dw.add(elm.Line().at(cout.end).tox(x_load))
    out_pt = (x_load, out_node[1])
    if request.load_ohm:
        dw.add(elm.Dot().at(out_pt))
        part(elm.Resistor().at(out_pt).down(L),
             f"load\n{fmt.value(request.load_ohm, 'resistor')}", "right")
        dw.add(elm.Line().toy(y_gnd))
    dw.add(elm.Line().at(out_pt).right(0.9))
    dw.add(elm.Dot(open=True).label("out", loc="right"))
    x_right = x_load

    # --- input at the base (ce, cc): source (with source_ohm) through C_IN
    if at_emitter:
        x_left = x_div - (2.4 if "C_B" in p else 0.8)
    else:
        here = (x_div, 0.0)
        cin = part(_cap(design, request, "C_IN", "left", "above").at(here),
                   _label(design, "C_IN"), "above")
        here = cin.end
        if source_r:
            here = part(elm.Resistor().at(here).left(L * 0.8), source_r, "above").end
        dw.add(elm.Line().at(here).left(0.6))
        x_src = here[0] - 0.6
        part(elm.SourceSin().at((x_src, y_gnd)).toy(0.0), "signal\nsource", "right",
             gap=0.2)
        dw.add(elm.Dot().at((x_src, y_gnd)))
        x_left = x_src

    # --- supply and the rails -------------------------------------------------
    # The supply's label stands outside, left of the cell.
    x_sup = x_left - 2.2
    sup = f"supply\n+{fmt.si(request.supply_v, 'V')}"
    part(elm.BatteryCell().at((x_sup, y_gnd)).toy(y_top).reverse(), sup, "left", gap=0.2)
    dw.add(elm.Line().at((x_sup, y_top)).tox(q.collector[0]))
    dw.add(elm.Label().at((x_sup + 0.8, y_top + GAP + 0.2 * LINE_U))
           .label(f"+{fmt.si(request.supply_v, 'V')}", halign="center", valign="bottom"))
    dw.add(elm.Line().at((x_sup, y_gnd)).tox(x_right))
    x_mid = (x_div + q.collector[0]) / 2
    dw.add(elm.Ground().at((x_mid, y_gnd)))
    # Junction dots where a branch meets a rail part-way along.
    dw.add(elm.Dot().at((x_div, y_top)))
    for x in {x_div, q.emitter[0], x_mid} | ({x_div - 1.6} if "C_B" in p else set()):
        dw.add(elm.Dot().at((x, y_gnd)))

    # DC voltages to probe: left of the collector and emitter wires, above the base's.
    probes = probes or {}
    where = {"base": ((x_div + 0.25, GAP + 0.2 * LINE_U), "left", "bottom"),
             "emitter": ((e_node[0] - 0.5, e_node[1]), "right", "center"),
             "collector": ((c_node[0] - 0.5, c_node[1]), "right", "center")}
    letter = {"base": "B", "emitter": "E", "collector": "C"}
    for node, volts in probes.items():
        if node not in where or volts is None:
            continue
        xy, ha, va = where[node]
        dw.add(elm.Label().at(xy).label(f"{letter[node]} {fmt.si(volts, 'V')}",
                                        halign=ha, valign=va, color=PROBE_COLOUR))
    return dw


def write_schematic(path: Path, design: Design, request: Request,
                    probes: dict[str, float] | None = None) -> Path:
    """Write ``schematic.svg`` (SVG with <text> labels) and return its path."""
    dw = draw(design, request, probes)
    path = Path(path)
    path.write_bytes(dw.get_imagedata("svg"))
    return path
