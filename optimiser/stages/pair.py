"""Two-transistor forms: what a chain or a cascode is, and the networks built from it.

A form (:class:`PairForm`) is described once, as data: its roles, the rules among
them, its ``WIRING`` (every role between two named nodes, as the single stages'
``WIRING``) and where its two transistors sit (``devices``: base, emitter and
collector node of each).  Everything else is derived from that description here:

* :func:`ac_network`: the small-signal :class:`~.common.Network` with both
  transistors (the supply at AC ground; C_IN and C_OUT become the source and load
  branches);
* :func:`dc_elements`: the DC network (capacitors open) for
  :func:`optimiser.dc.solve_nodes`;
* :func:`qs_elements`: the quasi-static midband network, every capacitor a
  source holding its DC voltage (docs/model.md, "THD and swing");
* :func:`capacitor_volts`: each capacitor's DC voltage from the node voltages.

The forms themselves live in :mod:`.chain` (two single stages joined by a
coupling capacitor), :mod:`.direct` (ce→cc, the follower's base on the first
collector) and :mod:`.cascode`.  Node names: ``supply``, ``ground``,
``source`` (the source side of C_IN), ``load`` (the load side of C_OUT), and
the form's own; a resistor role that is absent (0) joins its two nodes, an
absent capacitor leaves them open.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace

import numpy as np

from .base import OneOf, Together
from .common import GROUND, Element, Network

__all__ = ["PairRole", "PairForm", "PairBatch", "ac_network", "dc_elements", "qs_elements",
           "capacitor_volts", "resistor_volts", "FIXED"]

#: Nodes held by ideal sources in the DC and quasi-static networks.
FIXED = ("ground", "supply", "emf")


@dataclass(frozen=True)
class PairRole:
    """One role of a two-transistor form: its name, kind and whether it is required."""

    name: str
    kind: str                  # "resistor" or "capacitor"
    required: bool = True


@dataclass(frozen=True)
class PairForm:
    """A two-transistor form, described as data (see the module docstring).

    ``stages`` names the two transistors' parts of the form (``"S1"``, ``"S2"``) and
    ``stage_kinds`` what each is (``"ce"``, ``"cb"``, ``"cc"``); ``topology`` is the
    request's ``topology`` value (a list of two names, or ``"cascode"``) and
    ``coupling`` its ``coupling`` (``None`` for the cascode).
    """

    name: str
    long_name: str
    topology: object
    coupling: str | None
    stage_kinds: tuple[str, str]
    roles: tuple[PairRole, ...]
    rules: tuple[OneOf | Together, ...]
    wiring: tuple[tuple[str, str, str], ...]
    devices: tuple[tuple[str, str, str], tuple[str, str, str]]
    input: str
    output: str
    node_words: Mapping[str, str] = field(default_factory=dict)
    stages: tuple[str, str] = ("S1", "S2")

    @property
    def role_names(self) -> tuple[str, ...]:
        return tuple(r.name for r in self.roles)

    @property
    def required(self) -> tuple[str, ...]:
        return tuple(r.name for r in self.roles if r.required)

    def kind(self, role: str) -> str:
        """``"resistor"`` or ``"capacitor"``; a wired role the form does not offer (a
        follower's RE_BYP) is a resistor that is always absent, i.e. a join."""
        from ..stage import RESISTOR_ROLES

        for r in self.roles:
            if r.name == role:
                return r.kind
        return "resistor" if role.split(".")[-1] in RESISTOR_ROLES else "capacitor"

    def problems(self, present) -> list[str]:
        """The first broken role rule for the roles ``present`` (at most one sentence)."""
        have = set(present)
        for rule in self.rules:
            msg = rule.problem(self.name, have)
            if msg:
                return [msg]
        return []

    def nodes(self) -> tuple[str, ...]:
        """The form's own nodes (supply, ground, source and load aside), in wiring order."""
        out = []
        for _, a, b in self.wiring:
            for n in (a, b):
                if n not in ("supply", "ground", "source", "load") and n not in out:
                    out.append(n)
        for d in self.devices:
            for n in d:
                if n not in out:
                    out.append(n)
        return tuple(out)


@dataclass(frozen=True)
class PairBatch:
    """``n`` circuits of one form: role -> array (n,) (ohm, farad; 0 = absent)."""

    form: PairForm
    values: Mapping[str, np.ndarray]

    @classmethod
    def from_values(cls, form: PairForm, **values) -> PairBatch:
        arrays = np.broadcast_arrays(*[np.atleast_1d(np.asarray(values.get(r, 0.0), float))
                                       for r in form.role_names])
        return cls(form, {r: np.array(a, dtype=float) for r, a in
                          zip(form.role_names, arrays, strict=True)})

    @property
    def n(self) -> int:
        return int(next(iter(self.values.values())).shape[0])

    def role(self, name: str) -> np.ndarray:
        """The values of ``name`` (zeros for a wired role the form does not offer)."""
        v = self.values.get(name)
        return np.zeros(self.n) if v is None else v

    def take(self, index) -> PairBatch:
        return replace(self, values={r: v[index] for r, v in self.values.items()})

    def one(self, i: int) -> dict[str, float]:
        """Candidate ``i`` as role -> value, roles in use only."""
        return {r: float(v[i]) for r, v in self.values.items() if v[i] > 0}


def _ac_node(n: str) -> str:
    return GROUND if n in ("supply", "ground") else n


def ac_network(batch: PairBatch) -> Network:
    """The small-signal network of both transistors (supply at AC ground)."""
    form = batch.form
    els = []
    c_in = c_out = None
    for role, a, b in form.wiring:
        v = batch.role(role)
        if "source" in (a, b):
            c_in = v
            continue
        if "load" in (a, b):
            c_out = v
            continue
        kind = "R" if form.kind(role) == "resistor" else "C"
        els.append(Element(kind, role, _ac_node(a), _ac_node(b), v))
    (b1, e1, c1), _ = form.devices
    return Network(form.nodes(), tuple(els), b1, e1, c1, form.input, form.output,
                   c_in=c_in, c_out=c_out, devices=form.devices)


def _dc_node(n: str) -> str:
    return {"ground": "ground", "supply": "supply"}.get(n, n)


def dc_elements(batch: PairBatch, col=False):
    """The DC network (capacitors open) as :class:`optimiser.dc.DCElement` s."""
    from ..dc import DCElement

    form = batch.form
    shape = (lambda a: a[:, None]) if col else (lambda a: a)
    return [DCElement("R", a, b, shape(batch.role(role))) for role, a, b in form.wiring
            if form.kind(role) == "resistor"]


def qs_elements(batch: PairBatch, volts: Mapping[str, np.ndarray], source_ohm: float,
                load_ohm: float | None):
    """The quasi-static midband network, arrays (n, 1): the resistors, every present
    capacitor a source holding its DC voltage (from ``volts``, node -> (n,)), the
    source resistance from the EMF to the source node, the load from the load node."""
    from ..dc import DCElement

    form = batch.form
    els = dc_elements(batch, col=True)
    caps = capacitor_volts(batch, volts)
    for role, (v, a, b) in caps.items():
        present = batch.role(role) > 0
        els.append(DCElement("V", a, b, np.where(present, v, np.nan)[:, None]))
    els.append(DCElement("R", "emf", "source", np.array([[float(source_ohm)]])))
    if load_ohm is not None:
        els.append(DCElement("R", "load", "ground", np.array([[float(load_ohm)]])))
    del form
    return els


def capacitor_volts(batch: PairBatch, volts: Mapping[str, np.ndarray]):
    """role -> (DC voltage from its first-named to its second-named node, names)."""
    form = batch.form
    get = lambda n: np.asarray(volts[n]) if n in volts else 0.0 * volts[form.input]  # noqa: E731
    return {role: (get(a) - get(b), a, b) for role, a, b in form.wiring
            if form.kind(role) == "capacitor"}


def resistor_volts(batch: PairBatch, volts: Mapping[str, np.ndarray]):
    """role -> DC voltage across each resistor role (V)."""
    form = batch.form
    return {role: np.asarray(volts[a]) - np.asarray(volts[b]) for role, a, b in form.wiring
            if form.kind(role) == "resistor"}
