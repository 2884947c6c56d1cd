"""What a topology module provides: the protocol every layer outside the search asks.

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
  none (``None``: no target).

Adding a topology is one module here (listed in :data:`optimiser.stages.NAMES`),
its schematic drawing in :mod:`drawerfit.sheet.schematic` and its tests; the
conformance test (tests/optimiser/test_topology_seam.py) checks every listed
module against this protocol.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Protocol, runtime_checkable

__all__ = ["Role", "OneOf", "Together", "Topology", "NODE_WORDS", "role_names",
           "required_names", "role_problems", "capacitor_sides"]

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
