"""Capacitor-coupled chains: two single stages (ce, cb or cc, any order), each with its
own divider bias, the first stage's output joined to the second stage's input by one
coupling capacitor ``C_COUPLE``.

Roles are the two stages' own, namespaced ``S1.`` and ``S2.`` (``S1.RC``,
``S2.RE``), except that the first stage's C_OUT and the second stage's C_IN are
the one capacitor ``C_COUPLE``; the chain's input capacitor is ``S1.C_IN`` and its
output capacitor ``S2.C_OUT``.  Nodes are the stages' own ``WIRING`` nodes with the
same prefix (``S1.base``, ``S2.emitter``); supply and ground are shared.  The rules
of each stage (a ce stage's RE or RE_BYP, RE_BYP with C_BYP) hold for its roles.
"""

from __future__ import annotations

from functools import cache

from . import module as stage_module
from .base import OneOf, Together
from .pair import PairForm, PairRole

__all__ = ["form", "KINDS", "COUPLING"]

#: The single stages a chain may join.
KINDS = ("ce", "cb", "cc")
COUPLING = "capacitor"
#: Where each single stage's nodes go in a chain's wording.
_SHARED = ("supply", "ground", "source", "load")


def _prefixed(stage: str, node: str) -> str:
    return node if node in _SHARED else f"{stage}.{node}"


def _rule(rule, stage):
    names = tuple(f"{stage}.{r}" for r in rule.roles)
    return OneOf(names) if isinstance(rule, OneOf) else Together(names, rule.why)


@cache
def form(first: str, second: str) -> PairForm:
    """The chain ``first`` → ``second`` (each one of :data:`KINDS`)."""
    from ..stage import RESISTOR_ROLES

    roles, wiring, rules, words = [], [], [], {}
    mods = (stage_module(first), stage_module(second))
    devices = []
    for stage, mod in zip(("S1", "S2"), mods, strict=True):
        for role in mod.ROLES:
            if (stage, role.name) in (("S1", "C_OUT"), ("S2", "C_IN")):
                continue
            kind = "resistor" if role.name in RESISTOR_ROLES else "capacitor"
            roles.append(PairRole(f"{stage}.{role.name}", kind, role.required))
        for role, a, b in mod.WIRING:
            if (stage, role) == ("S1", "C_OUT") or (stage, role) == ("S2", "C_IN"):
                continue
            wiring.append((f"{stage}.{role}", _prefixed(stage, a), _prefixed(stage, b)))
        rules += [_rule(r, stage) for r in mod.RULES]
        for node, text in mod.NODE_WORDS.items():
            if node not in _SHARED:
                words[_prefixed(stage, node)] = f"{text} of {stage}"
        devices.append(tuple(f"{stage}.{t}" for t in ("base", "emitter", "collector")))
        if stage == "S1":
            roles.append(PairRole("C_COUPLE", "capacitor"))
    out1 = f"S1.{mods[0].OUTPUT}"
    in2 = f"S2.{mods[1].INPUT}"
    wiring.append(("C_COUPLE", out1, in2))
    words.update({"source": "the source", "load": "the load", "ground": "ground"})
    return PairForm(
        name=f"{first}→{second}",
        long_name=f"{mods[0].LONG_NAME} → {mods[1].LONG_NAME}, capacitor-coupled",
        topology=[first, second], coupling=COUPLING, stage_kinds=(first, second),
        roles=tuple(roles), rules=tuple(rules), wiring=tuple(wiring),
        devices=tuple(devices), input=f"S1.{mods[0].INPUT}", output=f"S2.{mods[1].OUTPUT}",
        node_words=words)
