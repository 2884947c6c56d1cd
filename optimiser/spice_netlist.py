"""A plain SPICE netlist of one designed stage, as text (no I/O).

:func:`spice_netlist` writes the stage the engine evaluated as a deck any SPICE
simulator reads: a title line, comments naming each node, the supply, the
signal source (``AC 1`` behind its source resistance; a ``SIN`` of
``input_vpk`` at ``mid_hz`` when the request gives a level), every part under
its role name, the load, the transistor with the device model's ``.model``
line (:func:`optimiser.device.spice_model_line`, nominal β), ``.options TEMP=25
TNOM=25`` (the engine's nominal figures are at 25 °C) with a tighter ``RELTOL``,
``.op`` and an ``.ac dec`` sweep over the engine's own frequency range.  No
``.control`` block.

Where each part sits is the topology's ``WIRING`` (:mod:`optimiser.stages`).
Values are written with SPICE's own suffixes (``4.7k``, ``100n``, ``1Meg``),
because SPICE reads ``4k7`` as 4 kΩ and ``1M`` as 1 mΩ; the comment line above
each part gives the value as a technician writes it (``4k7``) and its bin.
"""

from __future__ import annotations

import math

from inventory.values import format_si, format_value

from . import stages
from .ac import F_MAX_HZ, F_MIN_HZ, GRID_PER_DECADE
from .design import Design
from .device import device_from_transistor, spice_model_line
from .request import Request

__all__ = ["spice_netlist", "pair_spice_netlist", "spice_number", "NODE_MEANING", "NO_LOAD_OHM",
           "RELTOL"]

#: What each node of a stage is, for the netlist's comments.
NODE_MEANING = {
    "supply": "the positive supply rail",
    "base": "the transistor's base",
    "emitter": "the transistor's emitter",
    "collector": "the transistor's collector",
    "junction": "between RE and RE_BYP (the bypassed part of the emitter resistance)",
    "source": "the source side of C_IN (after the source resistance)",
    "emf": "the signal source's open-circuit voltage",
    "load": "the load side of C_OUT: the output",
}

#: A request without a load leaves the output open; the netlist gives the node a DC
#: path with this resistance (ohm), which no stage in range notices.
NO_LOAD_OHM = 1e12

#: SPICE's relative convergence tolerance in the deck.  The default (1e-3) lets the
#: operating point stop up to about 0.5 % from the solution; 1e-6 brings ngspice's
#: I_C within 0.01 % of the engine's on the random reference stages.
RELTOL = 1e-6

_SUFFIXES = ((1e12, "T"), (1e9, "G"), (1e6, "Meg"), (1e3, "k"), (1.0, ""),
             (1e-3, "m"), (1e-6, "u"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f"))


def spice_number(x: float, digits: int = 6) -> str:
    """A number with a SPICE scale suffix: ``4.7k``, ``100n``, ``1Meg``, ``2.2u``, ``12``.

    ``digits`` significant figures, trailing zeros dropped.  SPICE's ``M`` is
    milli, so mega is written ``Meg``.
    """
    x = float(x)
    if not math.isfinite(x):
        raise ValueError(f"cannot write {x!r} in a netlist")
    if x == 0:
        return "0"
    mag = abs(x)
    for scale, suffix in _SUFFIXES:  # noqa: B007 (the pair found is used below)
        if mag >= scale * (1 - 0.5 * 10 ** (1 - digits)):
            break
    m = f"{x / scale:.{digits}g}"
    if "e" in m:                                   # below 1 fF: plain exponent
        return f"{x:.{digits}g}"
    return m + suffix


def _comment(text: str) -> str:
    """Free text (labels, bins) made safe for one line of a deck: one line, plain ASCII."""
    text = " ".join(str(text).split()).replace("µ", "u")
    return text.encode("ascii", "replace").decode("ascii")


class _Nodes:
    """Node names with joins (a short joins two nodes; ground and supply win)."""

    _RANK = {"ground": 0, "supply": 1}

    def __init__(self):
        self.parent: dict[str, str] = {}

    def find(self, n: str) -> str:
        while self.parent.get(n, n) != n:
            n = self.parent[n]
        return n

    def join(self, a: str, b: str) -> None:
        a, b = self.find(a), self.find(b)
        if a == b:
            return
        if self._RANK.get(b, 9) < self._RANK.get(a, 9):
            a, b = b, a
        self.parent[b] = a

    def spice(self, n: str) -> str:
        n = self.find(n)
        return "0" if n == "ground" else n


class _Deck:
    """A deck being written: node joins, the element lines with their comments, and
    the nodes they use; the supply, signal source and load every deck has; the
    closing options and analyses."""

    def __init__(self, wiring, is_resistor, values: dict[str, float], request: Request):
        self.nodes = _Nodes()
        for role, a, b in wiring:
            if is_resistor(role) and values.get(role, 0.0) == 0.0:
                self.nodes.join(a, b)
        if not request.source_ohm:
            self.nodes.join("emf", "source")
        self.parts: list[str] = []
        self.used: set[str] = set()

    def node(self, n: str) -> str:
        """SPICE name of node ``n`` (0 for ground; no dot, as SPICE names carry none)."""
        return self.nodes.spice(n).replace(".", "_")

    def element(self, name: str, a: str, b: str, value: str, note: str) -> None:
        na, nb = self.node(a), self.node(b)
        self.parts.append(f"* {_comment(note)}")
        self.parts.append(f"{name} {na} {nb} {value}")
        self.used.update((na, nb))

    def sources(self, request: Request) -> None:
        """The supply, the signal source and its resistance."""
        self.element("VSUPPLY", "supply", "ground", f"DC {spice_number(request.supply_v)}",
                     f"supply: {format_si(request.supply_v, 'V')}")
        src = "DC 0 AC 1"
        if request.input_vpk:
            src += f" SIN(0 {spice_number(request.input_vpk)} {spice_number(request.mid_hz)})"
        self.element("VSIGNAL", "emf", "ground", src,
                     "signal source: AC 1 V for the response"
                     + (f"; a {format_si(request.input_vpk, 'V')} peak sine at "
                        f"{format_si(request.mid_hz, 'Hz')} for a transient"
                        if request.input_vpk else ""))
        if request.source_ohm:
            self.element("RSOURCE", "emf", "source", spice_number(request.source_ohm),
                         f"source resistance: {format_value(request.source_ohm, 'resistor')}")

    def load(self, request: Request) -> None:
        if request.load_ohm:
            self.element("RLOAD", "load", "ground", spice_number(request.load_ohm),
                         f"load: {format_value(request.load_ohm, 'resistor')}")
        else:
            self.element("RLOAD", "load", "ground", spice_number(NO_LOAD_OHM),
                         f"no load: {spice_number(NO_LOAD_OHM)} ohm only gives the open "
                         "output a DC path")

    def transistor(self, name: str, model: str, b: str, e: str, c: str, note: str) -> None:
        self.parts.append(f"* {name}: {_comment(note)} (nominal hFE, 25 degC)")
        cc, bb, ee = (self.node(n) for n in (c, b, e))
        self.parts.append(f"{name} {cc} {bb} {ee} {model}")
        self.used.update((cc, bb, ee))

    def text(self, head: list[str], node_meaning, models: list[str]) -> str:
        """The whole deck: ``head`` (title lines), the nodes used with what they are
        (``node_meaning(name)`` or None), the elements, the models, the analyses."""
        lines = list(head)
        lines.append("* nodes (0 is ground):")
        for n in sorted(self.used, key=_node_order):
            meaning = None if n == "0" else node_meaning(n)
            if meaning:
                lines.append(f"*   {n}: {meaning}")
        lines.append("*")
        lines += self.parts
        lines += models
        lines.append(f".options TEMP=25 TNOM=25 RELTOL={RELTOL:g}")
        lines.append(".op")
        lines.append(f".ac dec {GRID_PER_DECADE} {spice_number(F_MIN_HZ)} "
                     f"{spice_number(F_MAX_HZ)}")
        lines.append(".end")
        return "\n".join(lines) + "\n"


def _node_order(n: str) -> tuple:
    """Nodes listed in the order of NODE_MEANING, then by name."""
    order = list(NODE_MEANING)
    return (order.index(n), "") if n in order else (len(order), n)


def spice_netlist(design: Design, request: Request, transistor) -> str:
    """The SPICE deck of ``design`` as text (lines end with ``\\n``, last line ``.end``).

    Parameters
    ----------
    design : Design
        The stage: topology, role values (ohm, farad), bins, the + side of
        polarised capacitors.
    request : Request
        Supply, source resistance, load, mid_hz and input_vpk.
    transistor : inventory.parts.Transistor
        Gives the ``.model`` line (the engine's device model, nominal β).
    """
    wiring = stages.module(design.topology).WIRING
    values = {role: float(pick.value) for role, pick in design.parts.items()}
    deck = _Deck(wiring, lambda role: role.startswith("R"), values, request)
    title = (f"drawerfit {design.topology} stage"
             + (f", rank {design.rank}" if design.rank else "")
             + f", transistor {design.transistor}, supply {format_si(request.supply_v, 'V')}")
    deck.sources(request)

    # The stage's parts under their role names.
    for role, a, b in wiring:
        pick = design.parts.get(role)
        v = values.get(role, 0.0)
        if pick is None or v == 0.0 or deck.nodes.find(a) == deck.nodes.find(b):
            continue
        kind = "resistor" if role.startswith("R") else "capacitor"
        note = f"{role}: {format_value(v, kind)}"
        if pick.joined:
            sep = " + " if pick.joined == "series" else " || "
            note += " = " + sep.join(format_value(pc.value, kind)
                                     for pc in pick.pieces for _ in range(pc.count))
        bins = [pc.location for pc in pick.pieces if pc.location]
        if bins:
            note += ", bin " + " + ".join(dict.fromkeys(bins))
        if kind == "capacitor" and pick.plus:
            if pick.plus == b:                           # + side first
                a, b = b, a
            note += f", polarised: + on {a}"
        deck.element(role, a, b, spice_number(v), note)
    deck.load(request)
    deck.transistor("Q", "Q", "base", "emitter", "collector", design.transistor)
    return deck.text([_comment(title), "*"], NODE_MEANING.get,
                     [spice_model_line(device_from_transistor(transistor), "Q")])


def pair_spice_netlist(circuit, transistors) -> str:
    """The SPICE deck of a two-transistor circuit (a chain or a cascode) as text.

    ``circuit`` is a :class:`optimiser.circuit_file.PairCircuit`: its form gives where
    every part sits (``WIRING``) and where the two transistors are; parts under their
    role names (``RS1_RC``, ``C_COUPLE``: SPICE names carry no dot and begin with the
    element's letter), one ``.model`` line
    for each transistor type, then the same options and analyses as a single stage.
    """
    form = circuit.form
    request = circuit.request
    values = dict(circuit.values)
    deck = _Deck(form.wiring, lambda role: form.kind(role) == "resistor", values, request)
    labels = " and ".join(dict.fromkeys(t.label for t in transistors))
    title = (f"drawerfit {form.name} circuit ({form.long_name}), transistors {labels}, "
             f"supply {format_si(request.supply_v, 'V')}")
    deck.sources(request)
    for role, a, b in form.wiring:
        v = values.get(role, 0.0)
        if v == 0.0 or deck.nodes.find(a) == deck.nodes.find(b):
            continue
        kind = form.kind(role)
        note = f"{role}: {format_value(v, kind)}"
        letter = "R" if kind == "resistor" else "C"
        name = role.replace(".", "_")
        if "." in role or not name.startswith(letter):
            name = letter + name                 # SPICE reads the kind from the first letter
        deck.element(name, a, b, spice_number(v), note)
    deck.load(request)
    models = []
    for stage, (b, e, c), t in zip(form.stages, form.devices, transistors, strict=True):
        deck.transistor(f"Q{stage}", f"Q{stage}", b, e, c, t.label)
        models.append(spice_model_line(device_from_transistor(t), f"Q{stage}"))

    def meaning(n: str) -> str | None:
        return (NODE_MEANING.get(n) or form.node_words.get(n.replace("_", ".", 1))
                or form.node_words.get(n))
    return deck.text([_comment(title.replace("→", "->")), "*"], meaning, models)
