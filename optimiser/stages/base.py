"""What a topology module provides: the protocol every other layer, the search included, asks.

A topology is one module in :mod:`optimiser.stages` (``ce``, ``cb``, ``cc``) whose
module-level names satisfy :class:`Topology` (a :class:`typing.Protocol`; the
module itself is the implementation, so ``stages.module(name)`` is all a caller
needs).  Nothing outside this package decides anything by comparing a topology's
name with a literal: it asks the module.

What a module gives:

* ``NAME``, ``LONG_NAME`` (``"common emitter"``) and ``ALSO_CALLED`` (another
  name the stage goes by, or ``None``);
* ``ROLES``: its :class:`Role` entries in display order (that order is also the
  order of the yield's random draws), each required or optional; a role's kind
  (resistor or capacitor) comes from :data:`optimiser.stage.RESISTOR_ROLES`,
  where it sits from ``WIRING``; ``ROLE_NAMES`` and ``REQUIRED`` are derived;
* ``RULES``: role rules beyond "required" (:class:`OneOf`, :class:`Together`);
* ``FORMS`` and ``form_of(values)``: the named variants of the stage (a ce
  stage's emitter forms) and which one a set of values is; ``(None,)`` and
  ``None`` for a topology with one form;
* ``WIRING``: every role between two named nodes (``supply``, ``base``,
  ``emitter``, ``collector``, ``junction``, ``ground``, ``source``, ``load``),
  the transistor's side first, for the SPICE deck and for the capacitors' sides;
  ``NODE_WORDS`` the words for each node when telling the builder where the +
  of a polarised capacitor goes;
* ``INPUT`` and ``OUTPUT``: the transistor terminals the source branch drives
  and the load branch hangs from;
* ``network(batch)``: the small-signal netlist (:class:`~.common.Network`);
  ``quasi_static(...)``: the terminal Thevenins of the large-signal sweep;
  ``capacitors(batch, op)``: each capacitor's DC voltage and the names of its
  sides as the design's ``plus`` reports them;
* ``degeneration(re, source_ohm, load_ohm)``: R_deg of the score's distortion term;
* ``score_gain_target()``: the score's (target dB, tolerance dB) when the request
  sets no gain, or ``None`` for no gain term;
* ``DEFAULT_GAIN_DB``: the gain target a request to design gets when it names
  none (``None``: no target);
* ``SEARCH``: a :class:`SearchRules`, what the stock search needs beyond the
  names above (the emitter options and capacitors of each form, the gain law
  whose bounds apply, the order of the DC bounds).  The search also reads
  ``REQUIRED`` (an optional RC may be absent), ``INPUT`` and ``OUTPUT`` (which
  resistances the coupling capacitors' loops see, which terminal a midband
  estimate drives and reads), ``WIRING`` (a capacitor from the base to ground
  holds the base at AC ground) and ``capacitors(batch, op)`` (each capacitor's
  DC voltage).

Adding a topology is one module here (listed in :data:`optimiser.stages.NAMES`)
with its ``SEARCH`` rules (a new gain law also needs its bounds in
:mod:`optimiser.prune` and their branch in the search's levels), its schematic
drawing in :mod:`drawerfit.sheet.schematic` and its tests; the conformance test
(tests/test_topology_seam.py) checks every listed module against this protocol.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Protocol, runtime_checkable

__all__ = ["Role", "OneOf", "Together", "Topology", "NODE_WORDS", "SearchRules", "DEGENERATED",
           "EMITTER_DRIVEN", "FOLLOWER", "GAIN_LAWS", "role_names", "required_names",
           "role_problems", "capacitor_sides", "base_held"]

#: How the builder is told where a node is (the + side of a polarised capacitor).
NODE_WORDS: Mapping[str, str] = {
    "base": "the base",
    "emitter": "the emitter",
    "collector": "the collector",
    "junction": "the emitter side (the RE/RE_BYP junction)",
    "ground": "ground",
    "source": "the source",
    "load": "the load",
}


@dataclass(frozen=True)
class Role:
    """One role of a topology: its name and whether every stage must have it."""

    name: str
    required: bool = True

    @property
    def kind(self) -> str:
        """``"resistor"`` or ``"capacitor"`` (:data:`optimiser.stage.RESISTOR_ROLES`)."""
        from ..stage import RESISTOR_ROLES
        return "resistor" if self.name in RESISTOR_ROLES else "capacitor"


@dataclass(frozen=True)
class OneOf:
    """At least one of ``roles`` must be present."""

    roles: tuple[str, ...]

    def problem(self, topology: str, present: set[str]) -> str | None:
        if present.isdisjoint(self.roles):
            return (f"a {topology} stage needs {' or '.join(self.roles)}"
                    f"{' (or both)' if len(self.roles) == 2 else ''}")
        return None


@dataclass(frozen=True)
class Together:
    """``roles`` are all present or all absent; ``why`` says what joins them."""

    roles: tuple[str, ...]
    why: str = ""

    def problem(self, topology: str, present: set[str]) -> str | None:
        have = [r in present for r in self.roles]
        if any(have) and not all(have):
            tail = f" ({self.why})" if self.why else ""
            return f"{' and '.join(self.roles)} go together{tail}"
        return None


#: The gain laws of the search's bounds (docs/search.md, "which bound for which
#: topology"): a stage driven at the base with its output at the collector and an
#: unbypassed emitter resistance RE (gain ≤ k_in·Z'/(V_T/I_C + RE) plus the
#: feed-forward through C_μ; distortion by the junction with RE as feedback) ...
DEGENERATED = "degenerated"
#: ... a stage driven at the emitter with its output at the collector (gain
#: ≤ Z'/(V_T/I_C·(1 + R_S/RE) + R_S); distortion set by I_C and R_S‖RE) ...
EMITTER_DRIVEN = "emitter-driven"
#: ... and a follower, output at the emitter (gain below k_in·R'/(r_e + R'), R' = RE‖R_L).
FOLLOWER = "follower"
GAIN_LAWS = (DEGENERATED, EMITTER_DRIVEN, FOLLOWER)


@dataclass(frozen=True)
class SearchRules:
    """What the stock search asks a topology beyond the protocol's other names.

    ``emitter``: for each form, the emitter roles its emitter options fill —
    ``("RE",)`` (every resistor value as RE), ``("RE_BYP",)`` (as RE_BYP) or
    ``("RE", "RE_BYP")`` (every pair of values).  ``capacitors``: for each form,
    its capacitor roles in the order the leaves choose them.  ``gain_law``: one of
    :data:`GAIN_LAWS`, which gain, distortion and physical-limit lemmas bound the
    stage.  ``drift_first``: whether the drift bound (B2) runs before the top of
    the current bracket (where it discards the most for its cost) or last.
    """

    emitter: Mapping[str | None, tuple[str, ...]]
    capacitors: Mapping[str | None, tuple[str, ...]]
    gain_law: str
    drift_first: bool = False

    def __post_init__(self):
        if self.gain_law not in GAIN_LAWS:
            raise ValueError(f"unknown gain law {self.gain_law!r}")


@runtime_checkable
class Topology(Protocol):
    """The module-level names a topology module defines (see the module docstring)."""

    NAME: str
    LONG_NAME: str
    ALSO_CALLED: str | None
    ROLES: tuple[Role, ...]
    ROLE_NAMES: tuple[str, ...]
    REQUIRED: tuple[str, ...]
    RULES: tuple[OneOf | Together, ...]
    FORMS: tuple[str | None, ...]
    WIRING: tuple[tuple[str, str, str], ...]
    NODE_WORDS: Mapping[str, str]
    INPUT: str
    OUTPUT: str
    DEFAULT_GAIN_DB: float | None
    SEARCH: SearchRules
    form_of: Callable
    network: Callable
    quasi_static: Callable
    capacitors: Callable
    degeneration: Callable
    score_gain_target: Callable


def role_names(roles: tuple[Role, ...]) -> tuple[str, ...]:
    return tuple(r.name for r in roles)


def required_names(roles: tuple[Role, ...]) -> tuple[str, ...]:
    return tuple(r.name for r in roles if r.required)


def role_problems(topology, present) -> list[str]:
    """The first broken rule of ``topology.RULES`` for the roles ``present`` (a list
    of at most one sentence: a later rule is read only when the earlier ones hold)."""
    have = set(present)
    for rule in topology.RULES:
        msg = rule.problem(topology.NAME, have)
        if msg:
            return [msg]
    return []


def capacitor_sides(topology) -> dict[str, tuple[str, str]]:
    """role -> (transistor-side node, other node) of each capacitor role, from ``WIRING``."""
    caps = {r.name for r in topology.ROLES if r.kind == "capacitor"}
    return {role: (a, b) for role, a, b in topology.WIRING if role in caps}


def base_held(topology) -> bool:
    """Whether a capacitor joins the base to ground (``WIRING``): with the
    capacitors shorted the base is then at AC ground."""
    caps = capacitor_sides(topology)
    return any({a, b} == {"base", "ground"} for a, b in caps.values())
