"""The schematic of a two-transistor circuit (a chain of two stages or a cascode),
drawn with schemdraw into SVG with searchable text.

Both transistors are on one drawing, the supply rail across the top and the ground
rail across the bottom, the signal source on the left and the load on the right, as
the single stage's drawing (:mod:`drawerfit.sheet.schematic`), whose building blocks
(unit length, label placement, the polarised capacitor) it shares.  Each kind of
form has its drawing in :data:`PAIR_DRAWINGS` (registered with :func:`pair_drawing`,
keyed by the form's ``coupling``, or its name when it has none):

* ``"capacitor"``: two divider-biased stages side by side, each drawn from its stage
  module's ``INPUT`` and ``OUTPUT``, ``C_COUPLE`` from the first one's output to the
  second one's input.  A second stage driven at its emitter (common base) takes the
  signal along a wire under its bias divider, whose lower parts then end on ground
  symbols of their own, so that no wire crosses another;
* ``"direct"``: the follower's base wired to the first collector;
* ``"cascode"``: the upper transistor above the lower one, the three-resistor divider
  in one column on their left.

Every part carries its role, value and bin; the DC voltages to expect are written in
blue beside each node (B base, E emitter, C collector, J the junction of RE and
RE_BYP).  No label crosses a symbol, a wire or another label (the tests check it on
the SVG of every form).
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import schemdraw
import schemdraw.elements as elm

from drawerfit.sheet import fmt
from drawerfit.sheet.schematic import (
    FONT,
    GAP,
    LINE_U,
    PROBE_COLOUR,
    L,
    cap_symbol,
    pick_label,
    tag,
)
from optimiser.stages import module as stage_module

__all__ = ["PAIR_DRAWINGS", "pair_drawing", "draw_pair", "write_pair_schematic", "drawing_key"]

#: the key of a form's drawing -> the drawing: (_Sheet) -> None.
PAIR_DRAWINGS: dict[str, Callable[..., None]] = {}

#: The bias divider stands this far left of its transistor's base (drawing units).
DIVIDER_DX = 4.8
#: Where C_B hangs, left of its divider column.
C_B_DX = 1.6
#: Where C_BYP stands, right of its emitter stack (room for a prefixed RE_BYP label).
C_BYP_DX = 3.4
#: The probe letter of each terminal of a transistor, and of the RE/RE_BYP junction.
LETTERS = {"base": "B", "emitter": "E", "collector": "C", "junction": "J"}


def pair_drawing(*keys: str):
    """Register the decorated function as the drawing of the forms keyed ``keys``."""
    def register(fn):
        for key in keys:
            PAIR_DRAWINGS[key] = fn
        return fn
    return register


def drawing_key(form) -> str:
    """The key of a form's drawing: its coupling, or its name when it has none."""
    return form.coupling or form.name


class _Sheet:
    """The drawing being made, with the circuit it draws."""

    def __init__(self, form, picks: dict, request, transistors: tuple[str, str]):
        schemdraw.svgconfig.text = "text"
        self.form, self.picks, self.request, self.transistors = form, picks, request, transistors
        self.dw = schemdraw.Drawing(canvas="svg", show=False)
        self.dw.config(fontsize=FONT, unit=L, lw=1.4)
        #: node -> (xy, halign, valign) of its probe label
        self.anchors: dict[str, tuple] = {}
        #: x of every branch that meets a rail part-way along (junction dots)
        self.top_x: list[float] = []
        self.gnd_x: list[float] = []
        self.y_top = self.y_gnd = 0.0

    # --- parts ---------------------------------------------------------------
    def has(self, role: str | None) -> bool:
        return role is not None and role in self.picks

    def add(self, element):
        return self.dw.add(element)

    def part(self, element, text: str, side: str, gap: float = GAP):
        self.dw.add(element)
        tag(self.dw, element, text, side, gap)
        return element

    def label(self, role: str) -> str:
        return pick_label(self.picks[role], role, self.form.kind(role))

    def _ends(self, role: str) -> tuple[str, str]:
        for r, a, b in self.form.wiring:
            if r == role:
                return a, b
        raise KeyError(role)

    def cap(self, role: str, start: str, at, direction: str, side: str):
        """Capacitor ``role`` drawn from its node ``start`` toward ``direction``."""
        from inventory.parts import POLARISED_DIELECTRICS

        a, b = self._ends(role)
        end = b if start == a else a
        pick = self.picks[role]
        polar = any((pc.dielectric or "").lower() in POLARISED_DIELECTRICS
                    for pc in pick.pieces)
        el = cap_symbol(polar, pick.plus == end, direction, side).at(at)
        return self.part(el, self.label(role), side)

    def probe_at(self, node: str, xy, ha: str, va: str) -> None:
        self.anchors.setdefault(node, (xy, ha, va))

    # --- building blocks -----------------------------------------------------
    def transistor(self, k: int, xy):
        q = self.add(elm.BjtNpn(circle=True).at(xy).anchor("base"))
        tag(self.dw, q, f"{self.form.stages[k]}\n{self.transistors[k]}", "right", gap=0.1)
        return q

    def collector(self, q, rc: str | None, node: str):
        """RC from the collector to the rail, or the collector straight to it."""
        c_node = (q.collector[0], q.collector[1] + 0.6)
        if self.has(rc):
            self.add(elm.Line().at(q.collector).up(0.6))
            self.part(elm.Resistor().up(L), self.label(rc), "left")
            self.add(elm.Line().toy(self.y_top))
        else:
            self.add(elm.Line().at(q.collector).toy(self.y_top))
        self.top_x.append(q.collector[0])
        self.probe_at(node, (c_node[0] - 0.5, c_node[1]), "right", "center")
        return c_node

    def emitter(self, q, re: str | None, re_byp: str | None, c_byp: str | None, node: str,
                junction: str | None, *, fed: bool = False):
        """The emitter stack: RE, then RE_BYP with C_BYP across it, to the ground rail.
        ``fed``: the signal comes into the emitter from the left (the probe then
        stands above that wire)."""
        e_node = (q.emitter[0], q.emitter[1] - 0.6)
        self.add(elm.Line().at(q.emitter).to(e_node))
        if fed:
            self.probe_at(node, (e_node[0] - 0.9, e_node[1] + GAP + 0.2 * LINE_U), "right",
                          "bottom")
        else:
            self.probe_at(node, (e_node[0] - 0.5, e_node[1]), "right", "center")
        if junction is not None and not self.has(re):
            self.probe_at(junction, *self.anchors[node])     # one node when RE is absent
        here = e_node
        for r in (re, re_byp):
            if not self.has(r):
                continue
            if r == re_byp and self.has(re) and junction is not None:
                self.probe_at(junction, (here[0] - 0.5, here[1]), "right", "center")
            res = self.part(elm.Resistor().at(here).down(L), self.label(r), "right")
            if r == re_byp and self.has(c_byp):
                self.add(elm.Dot().at(res.start))
                self.add(elm.Line().at(res.start).right(C_BYP_DX))
                start = junction if junction is not None else node
                self.cap(c_byp, start, self.dw.here, "down", "right")
                self.add(elm.Line().toy(self.y_gnd))
                self.add(elm.Line().tox(res.end[0]))
                self.add(elm.Dot())
            here = res.end
        self.add(elm.Line().at(here).toy(self.y_gnd))
        self.gnd_x.append(here[0])
        return e_node

    def ground_end(self, local: bool):
        """End the branch drawn last: on the ground rail, or on a ground symbol of its own."""
        if local:
            self.add(elm.Ground())
        else:
            end = self.dw.here
            self.add(elm.Line().toy(self.y_gnd))
            self.gnd_x.append(end[0])

    def divider(self, b_node, r_up: str, r_down: str, c_b: str | None, node: str, *,
                local_ground: bool = False, up_to_rail: bool = True):
        """R_up from the base node to the rail, R_down to ground, C_B to ground."""
        x = b_node[0]
        self.add(elm.Dot().at(b_node))
        self.probe_at(node, (x + 0.25, b_node[1] + GAP + 0.2 * LINE_U), "left", "bottom")
        self.part(elm.Resistor().at(b_node).up(L), self.label(r_up), "right")
        if up_to_rail:
            self.add(elm.Line().toy(self.y_top))
            self.top_x.append(x)
        self.part(elm.Resistor().at(b_node).down(L), self.label(r_down), "right")
        self.ground_end(local_ground)
        if self.has(c_b):
            self.add(elm.Line().at(b_node).down(0.5))
            self.add(elm.Dot())
            self.add(elm.Line().left(C_B_DX))
            self.cap(c_b, node, self.dw.here, "down", "left")
            self.ground_end(local_ground)

    def source_at_base(self, b_node, c_in: str, node: str) -> float:
        """Signal source (with its resistance) through C_IN into a base node, leftward.
        Returns the x of the source."""
        cin = self.cap(c_in, node, b_node, "left", "above")
        here = cin.end
        if self.request.source_ohm:
            here = self.part(elm.Resistor().at(here).left(L * 0.8), self._source_r(),
                             "above").end
        self.add(elm.Line().at(here).left(0.6))
        x_src = here[0] - 0.6
        self.part(elm.SourceSin().at((x_src, self.y_gnd)).toy(b_node[1]), "signal\nsource",
                  "right", gap=0.2)
        self.add(elm.Dot().at((x_src, self.y_gnd)))
        return x_src

    def source_at_emitter(self, e_node, c_in: str, node: str) -> float:
        """Signal source into an emitter from the lower right (a common-base first stage)."""
        self.add(elm.Dot().at(e_node))
        self.add(elm.Line().at(e_node).right(2.0))
        cin = self.cap(c_in, node, self.dw.here, "right", "below")
        here = cin.end
        if self.request.source_ohm:
            here = self.part(elm.Resistor().at(here).right(L * 0.8), self._source_r(),
                             "below").end
        x_src = here[0] + 0.8
        self.add(elm.Line().at(here).tox(x_src))
        self.part(elm.SourceSin().at((x_src, self.y_gnd)).toy(e_node[1]).reverse(),
                  "signal\nsource", "right", gap=0.2)
        self.add(elm.Dot().at((x_src, self.y_gnd)))
        return x_src

    def _source_r(self) -> str:
        return f"source R\n{fmt.value(self.request.source_ohm, 'resistor')}"

    def output(self, out_node, c_out: str, node: str, at_collector: bool,
               x_min: float | None = None) -> float:
        """C_OUT from the output node to the load and the output terminal; the load's x."""
        side = "above" if at_collector else "below"
        self.add(elm.Dot().at(out_node))
        self.add(elm.Line().at(out_node).right(2.0))
        cout = self.cap(c_out, node, self.dw.here, "right", side)
        x_load = cout.end[0] + 1.2
        if x_min is not None:
            x_load = max(x_load, x_min)
        self.add(elm.Line().at(cout.end).tox(x_load))
        pt = (x_load, out_node[1])
        if self.request.load_ohm:
            self.add(elm.Dot().at(pt))
            self.part(elm.Resistor().at(pt).down(L),
                      f"load\n{fmt.value(self.request.load_ohm, 'resistor')}", "right")
            self.add(elm.Line().toy(self.y_gnd))
        self.add(elm.Line().at(pt).right(0.9))
        self.add(elm.Dot(open=True).label("out", loc="right"))
        return x_load

    def rails(self, x_left: float, x_right: float, x_ground: float) -> None:
        """The supply (left of ``x_left``), both rails, the ground symbol, junction dots."""
        x_sup = x_left - 2.2
        sup = f"supply\n+{fmt.si(self.request.supply_v, 'V')}"
        self.part(elm.BatteryCell().at((x_sup, self.y_gnd)).toy(self.y_top).reverse(), sup,
                  "left", gap=0.2)
        x_top_end = max(self.top_x)
        self.add(elm.Line().at((x_sup, self.y_top)).tox(x_top_end))
        self.add(elm.Label().at((x_sup + 0.8, self.y_top + GAP + 0.2 * LINE_U))
                 .label(f"+{fmt.si(self.request.supply_v, 'V')}", halign="center",
                        valign="bottom"))
        self.add(elm.Line().at((x_sup, self.y_gnd)).tox(x_right))
        self.add(elm.Ground().at((x_ground, self.y_gnd)))
        for x in {round(v, 6) for v in self.top_x if v < x_top_end - 1e-6}:
            self.add(elm.Dot().at((x, self.y_top)))
        for x in {round(v, 6) for v in [*self.gnd_x, x_ground] if v < x_right - 1e-6}:
            self.add(elm.Dot().at((x, self.y_gnd)))

    def probes(self, probes: dict[str, float] | None) -> None:
        for node, volts in (probes or {}).items():
            if node not in self.anchors or volts is None:
                continue
            xy, ha, va = self.anchors[node]
            letter = LETTERS.get(node.rsplit(".", 1)[-1], "C" if node == "middle" else "")
            self.add(elm.Label().at(xy).label(f"{letter} {fmt.si(volts, 'V')}".strip(),
                                              halign=ha, valign=va, color=PROBE_COLOUR))


def _stack_height(sh: _Sheet, roles) -> float:
    return L * max(1, sum(1 for r in roles if sh.has(r))) + 0.8


def draw_pair(form, picks: dict, request, transistors: tuple[str, str],
              probes: dict[str, float] | None = None) -> schemdraw.Drawing:
    """The schematic of a two-transistor circuit of ``form`` as a schemdraw Drawing.

    ``picks`` maps each role present to its :class:`~optimiser.design.RolePick` (value,
    pieces with their bins and dielectrics, ``plus`` the node of a capacitor's +);
    ``transistors`` the labels of S1 and S2; ``probes`` node -> DC volts to expect
    (``optimiser.pair_report.probe_nodes``).
    """
    fn = PAIR_DRAWINGS.get(drawing_key(form))
    if fn is None:
        raise ValueError(f"no schematic drawing for a {form.name} circuit")
    sh = _Sheet(form, picks, request, transistors)
    fn(sh)
    sh.probes(probes)
    return sh.dw


def write_pair_schematic(path: Path, form, picks: dict, request, transistors,
                         probes: dict[str, float] | None = None) -> Path:
    """Write ``schematic.svg`` of a two-transistor circuit and return its path."""
    path = Path(path)
    path.write_bytes(draw_pair(form, picks, request, transistors, probes)
                     .get_imagedata("svg"))
    return path


def _roles(prefix: str) -> dict[str, str]:
    return {r: f"{prefix}.{r}" for r in ("R1", "R2", "RC", "RE", "RE_BYP", "C_BYP", "C_B",
                                         "C_IN", "C_OUT")}


@pair_drawing("capacitor")
def _chain(sh: _Sheet) -> None:
    """Two divider-biased stages side by side, joined by C_COUPLE."""
    form = sh.form
    mods = [stage_module(kind) for kind in form.stage_kinds]
    roles = [_roles(s) for s in form.stages]
    nodes = [dict(zip(("base", "emitter", "collector"), d, strict=True)) for d in form.devices]
    fed2 = mods[1].INPUT == "emitter"        # the second stage driven at its emitter
    stack = max(_stack_height(sh, (r["RE"], r["RE_BYP"])) for r in roles)
    y_route = -(0.5 + L + 0.64 + 0.6)        # under the second divider's ground symbols
    sh.y_gnd = min(-0.7 - stack - 0.4, y_route - 0.9 if fed2 else 0.0)
    sh.y_top = 0.7 + L + 1.2
    jn = [f"{s}.junction" for s in form.stages]

    # --- the first stage ------------------------------------------------------
    r, n = roles[0], nodes[0]
    q1 = sh.transistor(0, (0.0, 0.0))
    c1 = sh.collector(q1, r["RC"], n["collector"])
    e1 = sh.emitter(q1, r["RE"], r["RE_BYP"], r["C_BYP"], n["emitter"], jn[0])
    b1 = (-DIVIDER_DX, 0.0)
    sh.add(elm.Line().at(q1.base).tox(b1[0]))
    sh.divider(b1, r["R1"], r["R2"], r["C_B"], n["base"])
    right = q1.emitter[0] + C_BYP_DX + 1.9 if sh.has(r["C_BYP"]) else q1.collector[0] + 2.2
    if mods[0].INPUT == "emitter":
        x_src = sh.source_at_emitter(e1, r["C_IN"], n["emitter"])
        right = max(right, x_src + 1.9)
        x_left = b1[0] - (C_B_DX + 0.8 if sh.has(r["C_B"]) else 0.8)
    else:
        x_left = sh.source_at_base(b1, r["C_IN"], n["base"])
    out1 = c1 if mods[0].OUTPUT == "collector" else e1
    side = "above" if mods[0].OUTPUT == "collector" else "below"
    sh.add(elm.Dot().at(out1))
    sh.add(elm.Line().at(out1).right(2.0))
    cc = sh.cap("C_COUPLE", n[mods[0].OUTPUT], sh.dw.here, "right", side)
    x_v = max(right, cc.end[0]) + 0.8

    # --- the second stage -----------------------------------------------------
    r, n = roles[1], nodes[1]
    x_div2 = x_v + 1.2 + (C_B_DX + 2.0 if sh.has(r["C_B"]) else 0.0)
    x2 = x_div2 + DIVIDER_DX
    q2 = sh.transistor(1, (x2, 0.0))
    c2 = sh.collector(q2, r["RC"], n["collector"])
    e2 = sh.emitter(q2, r["RE"], r["RE_BYP"], r["C_BYP"], n["emitter"], jn[1], fed=fed2)
    b2 = (x_div2, 0.0)
    sh.add(elm.Line().at(q2.base).tox(b2[0]))
    sh.divider(b2, r["R1"], r["R2"], r["C_B"], n["base"], local_ground=fed2)
    sh.add(elm.Line().at(cc.end).tox(x_v))
    if fed2:
        # under the divider, then up into the emitter from its left
        x_up = x2 - 2.3
        sh.add(elm.Line().at((x_v, out1[1])).toy(y_route))
        sh.add(elm.Line().tox(x_up))
        sh.add(elm.Line().toy(e2[1]))
        sh.add(elm.Line().tox(e2[0]))
        sh.add(elm.Dot().at(e2))
    else:
        sh.add(elm.Line().at((x_v, out1[1])).toy(b2[1]))
        sh.add(elm.Line().tox(b2[0]))
    out2 = c2 if mods[1].OUTPUT == "collector" else e2
    x_load = sh.output(out2, r["C_OUT"], n[mods[1].OUTPUT], mods[1].OUTPUT == "collector",
                       q2.emitter[0] + C_BYP_DX + 3.0 if sh.has(r["C_BYP"]) else None)
    sh.rails(x_left, x_load, (b1[0] + q1.collector[0]) / 2)


@pair_drawing("direct")
def _direct(sh: _Sheet) -> None:
    """A common-emitter stage whose collector holds the follower's base."""
    form = sh.form
    r1, r2 = _roles("S1"), _roles("S2")
    (b_1, e_1, c_1), (_, e_2, c_2) = form.devices
    stack = max(_stack_height(sh, (r1["RE"], r1["RE_BYP"])),
                _stack_height(sh, (r2["RE"], r2["RE_BYP"])))
    sh.y_gnd = -0.7 - stack - 0.4
    sh.y_top = 0.7 + L + 1.2
    q1 = sh.transistor(0, (0.0, 0.0))
    c1 = sh.collector(q1, r1["RC"], c_1)
    sh.emitter(q1, r1["RE"], r1["RE_BYP"], r1["C_BYP"], e_1, "S1.junction")
    b1 = (-DIVIDER_DX, 0.0)
    sh.add(elm.Line().at(q1.base).tox(b1[0]))
    sh.divider(b1, r1["R1"], r1["R2"], None, b_1)
    x_left = sh.source_at_base(b1, r1["C_IN"], b_1)
    x2 = q1.emitter[0] + C_BYP_DX + 4.2
    x_j = x2 - 2.2
    sh.add(elm.Dot().at(c1))
    sh.add(elm.Line().at(c1).tox(x_j))
    sh.add(elm.Line().toy(0.0))
    sh.add(elm.Line().tox(x2))
    q2 = sh.transistor(1, (x2, 0.0))
    sh.collector(q2, r2["RC"], c_2)
    e2 = sh.emitter(q2, r2["RE"], None, None, e_2, None)
    x_load = sh.output(e2, r2["C_OUT"], e_2, False)
    sh.rails(x_left, x_load, (b1[0] + q1.collector[0]) / 2)


@pair_drawing("cascode")
def _cascode(sh: _Sheet) -> None:
    """The upper (common-base) transistor above the lower (common-emitter) one."""
    form = sh.form
    (b_1, e_1, mid), (b_2, _, c_2) = form.devices
    y2 = 0.5 + L + 0.64 + 2.3                 # C_B's ground symbol clear of C_IN's label
    sh.y_gnd = -0.7 - _stack_height(sh, ("RE", "RE_BYP")) - 0.4
    sh.y_top = y2 + 0.7 + 0.6 + L + 0.6
    q1 = sh.transistor(0, (0.0, 0.0))
    q2 = sh.transistor(1, (0.0, y2))
    sh.emitter(q1, "RE", "RE_BYP", "C_BYP", e_1, "S1.junction")
    sh.add(elm.Line().at(q1.collector).to(q2.emitter))
    sh.probe_at(mid, (q1.collector[0] - 0.5, q1.collector[1] + 0.6), "right", "center")
    c2 = sh.collector(q2, "RC", c_2)
    x_div = -DIVIDER_DX
    b2, b1 = (x_div, y2), (x_div, 0.0)
    sh.add(elm.Line().at(q2.base).tox(x_div))
    sh.add(elm.Line().at(q1.base).tox(x_div))
    # R1 up to the rail, R2 down to the lower base, C_B on its own ground symbol
    sh.add(elm.Dot().at(b2))
    sh.probe_at(b_2, (x_div + 0.25, y2 + GAP + 0.2 * LINE_U), "left", "bottom")
    sh.part(elm.Resistor().at(b2).up(L), sh.label("R1"), "right")
    sh.add(elm.Line().toy(sh.y_top))
    sh.top_x.append(x_div)
    sh.part(elm.Resistor().at(b2).down(L), sh.label("R2"), "right")
    sh.add(elm.Line().toy(0.0))
    sh.add(elm.Line().at(b2).down(0.5))
    sh.add(elm.Dot())
    sh.add(elm.Line().left(C_B_DX))
    sh.cap("C_B", b_2, sh.dw.here, "down", "left")
    sh.add(elm.Ground())
    sh.add(elm.Dot().at(b1))
    sh.probe_at(b_1, (x_div + 0.25, GAP + 0.2 * LINE_U), "left", "bottom")
    sh.part(elm.Resistor().at(b1).down(L), sh.label("R3"), "right")
    sh.ground_end(False)
    x_left = sh.source_at_base(b1, "C_IN", b_1)
    x_load = sh.output(c2, "C_OUT", c_2, True,
                       q1.emitter[0] + C_BYP_DX + 3.0 if sh.has("C_BYP") else None)
    sh.rails(x_left, x_load, (x_div + q1.collector[0]) / 2)
