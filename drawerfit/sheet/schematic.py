"""The stage's schematic, drawn with schemdraw into SVG with searchable text.

Every part is labelled with its role name, its value and the bin it comes from;
the supply, the signal source (with its resistance) and the load are drawn too.
Layout, read left to right: supply, signal source, bias divider, transistor,
output coupling and load; the supply rail across the top, a ground rail across
the bottom.  The common-base stage takes its input at the emitter from the
lower right, so that no wire crosses another.
"""

from __future__ import annotations

from pathlib import Path

import schemdraw
import schemdraw.elements as elm

from drawerfit.sheet import fmt
from optimiser.design import Design
from optimiser.request import Request

__all__ = ["draw", "write_schematic", "role_label"]

#: Unit length of one part body (schemdraw units).
L = 2.6
FONT = 14


def role_label(design: Design, role: str, kind: str) -> str:
    """Three lines: role, value (with how pieces are joined), bin location."""
    pick = design.parts[role]
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


def _cap(d: Design, role: str):
    """A capacitor element: polarised parts get the curved plate and a + mark."""
    pick = d.parts[role]
    from inventory.parts import POLARISED_DIELECTRICS

    polar = any((pc.dielectric or "").lower() in POLARISED_DIELECTRICS for pc in pick.pieces)
    return elm.Capacitor(polar=polar)


PROBE_COLOUR = "#1f4fbf"


def draw(design: Design, request: Request,
         probes: dict[str, float] | None = None) -> schemdraw.Drawing:
    """The schematic as a schemdraw Drawing (SVG canvas, text kept as <text>).

    ``probes`` maps "base", "emitter", "collector" to the DC volts to expect
    there; they are written beside those nodes (blue), to ground.
    """
    schemdraw.svgconfig.text = "text"
    p = design.parts
    topo = design.topology
    dw = schemdraw.Drawing(canvas="svg", show=False)
    dw.config(fontsize=FONT, unit=L, lw=1.4)

    # --- transistor and the vertical stack on its emitter -------------------
    q = dw.add(elm.BjtNpn(circle=True).at((0, 0)).anchor("base")
               .label(f"Q\n{design.transistor}", loc="right", ofst=(0.15, -0.1)))
    emitter_parts: list[str] = [r for r in ("RE", "RE_BYP") if r in p]
    stack_h = L * max(1, len(emitter_parts)) + 0.8
    y_gnd = q.emitter[1] - stack_h - 0.4
    y_top = q.collector[1] + L + 1.2
    x_div = -3.6                           # the bias divider's column

    # Collector: RC to the rail, or straight to the rail (cc without RC).
    if "RC" in p:
        dw.add(elm.Line().at(q.collector).up(0.6))
        dw.add(elm.Resistor().up(L).label(_label(design, "RC"), loc="top", ofst=0.15))
        dw.add(elm.Line().toy(y_top))
    else:
        dw.add(elm.Line().at(q.collector).toy(y_top))
    c_node = (q.collector[0], q.collector[1] + 0.6)

    # Emitter stack: RE then RE_BYP (with C_BYP across it) to ground.
    e_node = (q.emitter[0], q.emitter[1] - 0.6)
    dw.add(elm.Line().at(q.emitter).to(e_node))
    here = e_node
    for r in emitter_parts:
        res = dw.add(elm.Resistor().at(here).down(L).label(_label(design, r), loc="bottom",
                                                            ofst=0.15))
        if r == "RE_BYP" and "C_BYP" in p:
            dw.add(elm.Dot().at(res.start))
            dw.add(elm.Line().at(res.start).right(2.8))
            dw.add(_cap(design, "C_BYP").down(L).label(_label(design, "C_BYP"), loc="bottom",
                                                       ofst=0.15))
            dw.add(elm.Line().toy(y_gnd))
            dw.add(elm.Line().tox(res.end[0]))
            dw.add(elm.Dot())
        here = res.end
    dw.add(elm.Line().at(here).toy(y_gnd))

    # --- bias divider ---------------------------------------------------------
    b_node = (x_div, 0.0)
    dw.add(elm.Line().at(q.base).tox(x_div))
    dw.add(elm.Dot())
    dw.add(elm.Resistor().at(b_node).up(L).label(_label(design, "R1"), loc="bottom", ofst=0.15))
    dw.add(elm.Line().toy(y_top))
    dw.add(elm.Resistor().at(b_node).down(L).label(_label(design, "R2"), loc="bottom", ofst=0.15))
    dw.add(elm.Line().toy(y_gnd))
    if "C_B" in p:
        dw.add(elm.Line().at(b_node).down(0.5))
        dw.add(elm.Dot())
        dw.add(elm.Line().left(1.6))
        dw.add(_cap(design, "C_B").down(L).label(_label(design, "C_B"), loc="top", ofst=0.15))
        dw.add(elm.Line().toy(y_gnd))

    # --- input of cb: into the emitter node from the lower right ------------
    x_src = None
    if topo == "cb":
        dw.add(elm.Dot().at(e_node))
        dw.add(elm.Line().at(e_node).right(1.4))
        cin = dw.add(_cap(design, "C_IN").right(L)
                     .label(_label(design, "C_IN"), loc="top", ofst=0.15))
        here = cin.end
        if request.source_ohm:
            rs = dw.add(elm.Resistor().at(here).right(L * 0.8)
                        .label(f"source R\n{fmt.value(request.source_ohm, 'resistor')}",
                               loc="bottom", ofst=0.15))
            here = rs.end
        x_src = here[0] + 0.8
        dw.add(elm.Line().at(here).tox(x_src))
        dw.add(elm.SourceSin().at((x_src, y_gnd)).toy(e_node[1])
               .label("signal\nsource", loc="bottom", ofst=0.2).reverse())
        dw.add(elm.Dot().at((x_src, y_gnd)))

    # --- output: C_OUT from the collector (ce, cb) or the emitter (cc) -------
    out_node = c_node if topo in ("ce", "cb") else e_node
    dw.add(elm.Dot().at(out_node))
    dw.add(elm.Line().at(out_node).right(1.4))
    cout = dw.add(_cap(design, "C_OUT").right(L)
                  .label(_label(design, "C_OUT"), loc="top", ofst=0.15))
    x_load = cout.end[0] + 1.2
    if x_src is not None:
        x_load = max(x_load, x_src + 2.6)       # the load stands right of the cb source
    dw.add(elm.Line().at(cout.end).tox(x_load))
    out_pt = (x_load, out_node[1])
    if request.load_ohm:
        dw.add(elm.Dot().at(out_pt))
        dw.add(elm.Resistor().at(out_pt).down(L)
               .label(f"load\n{fmt.value(request.load_ohm, 'resistor')}", loc="bottom",
                      ofst=0.15))
        dw.add(elm.Line().toy(y_gnd))
    dw.add(elm.Line().at(out_pt).right(0.9))
    dw.add(elm.Dot(open=True).label("out", loc="right"))
    x_right = x_load

    # --- input of ce and cc: source (with source_ohm) through C_IN to the base
    if topo == "cb":
        x_left = x_div - (2.4 if "C_B" in p else 0.8)
    else:
        here = (x_div, 0.0)
        cin = dw.add(_cap(design, "C_IN").at(here).left(L)
                     .label(_label(design, "C_IN"), loc="bottom", ofst=0.15))
        here = cin.end
        if request.source_ohm:
            rs = dw.add(elm.Resistor().at(here).left(L * 0.8)
                        .label(f"source R\n{fmt.value(request.source_ohm, 'resistor')}",
                               loc="bottom", ofst=0.15))
            here = rs.end
        dw.add(elm.Line().at(here).left(0.6))
        x_src = here[0] - 0.6
        dw.add(elm.SourceSin().at((x_src, y_gnd)).toy(0.0)
               .label("signal\nsource", loc="top", ofst=0.2))
        dw.add(elm.Dot().at((x_src, y_gnd)))
        x_left = x_src

    # --- supply and the rails -------------------------------------------------
    x_sup = x_left - 2.2
    sup = f"supply\n+{fmt.si(request.supply_v, 'V')}"
    dw.add(elm.BatteryCell().at((x_sup, y_gnd)).toy(y_top).reverse()
           .label(sup, loc="bottom", ofst=0.2))
    dw.add(elm.Line().at((x_sup, y_top)).tox(q.collector[0]))
    dw.add(elm.Label().at((x_sup + 0.8, y_top)).label(f"+{fmt.si(request.supply_v, 'V')}",
                                                      loc="top", ofst=0.1))
    dw.add(elm.Line().at((x_sup, y_gnd)).tox(x_right))
    x_mid = (x_div + q.collector[0]) / 2
    dw.add(elm.Ground().at((x_mid, y_gnd)))
    # Junction dots where a branch meets a rail part-way along.
    dw.add(elm.Dot().at((x_div, y_top)))
    for x in {x_div, q.emitter[0], x_mid} | ({x_div - 1.6} if "C_B" in p else set()):
        dw.add(elm.Dot().at((x, y_gnd)))

    probes = probes or {}
    where = {"base": ((x_div + 0.25, 0.05), "left", "bottom"),
             "emitter": ((e_node[0] - 0.2, e_node[1]), "right", "center"),
             "collector": ((c_node[0] - 0.2, c_node[1]), "right", "center")}
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
