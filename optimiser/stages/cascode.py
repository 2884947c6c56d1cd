"""The cascode: a common-emitter transistor (S1, the lower) under a common-base
transistor (S2, the upper), one collector resistor, one three-resistor divider
biasing both bases.

Roles: ``R1`` supply → upper base, ``R2`` upper base → lower base, ``R3`` lower
base → ground, ``C_B`` upper base → ground (holds it at AC ground), ``RC`` supply →
upper collector, the lower emitter's ``RE`` (unbypassed) and ``RE_BYP`` (bypassed by
``C_BYP``) as a ce stage's, ``C_IN`` at the lower base and ``C_OUT`` at the upper
collector.  Nodes: ``S1.base``, ``S1.emitter``, ``S1.junction`` (between RE and
RE_BYP), ``middle`` (the lower collector, which is the upper emitter), ``S2.base``,
``S2.collector``.
"""

from __future__ import annotations

from functools import cache

from .base import OneOf, Together
from .pair import PairForm, PairRole

__all__ = ["form", "NAME", "DEFAULT_GAIN_DB"]

NAME = "cascode"
#: The gain target (dB) a request to design a cascode gets when it names none: the
#: cascode is a gain stage (a ce stage without its Miller loading), and without a
#: target the ranking favours ones that barely amplify (measured: 0.9 dB ranked first
#: on the demo drawer).  ×10 (20 dB), as for ce and cb (common practice).
DEFAULT_GAIN_DB = 20.0


@cache
def form() -> PairForm:
    roles = (PairRole("R1", "resistor"), PairRole("R2", "resistor"), PairRole("R3", "resistor"),
             PairRole("RC", "resistor"), PairRole("RE", "resistor", False),
             PairRole("RE_BYP", "resistor", False), PairRole("C_BYP", "capacitor", False),
             PairRole("C_B", "capacitor"), PairRole("C_IN", "capacitor"),
             PairRole("C_OUT", "capacitor"))
    wiring = (
        ("R1", "supply", "S2.base"),
        ("R2", "S2.base", "S1.base"),
        ("R3", "S1.base", "ground"),
        ("C_B", "S2.base", "ground"),
        ("RC", "supply", "S2.collector"),
        ("RE", "S1.emitter", "S1.junction"),
        ("RE_BYP", "S1.junction", "ground"),
        ("C_BYP", "S1.junction", "ground"),
        ("C_IN", "S1.base", "source"),
        ("C_OUT", "S2.collector", "load"),
    )
    words = {"S1.base": "the lower base", "S1.emitter": "the lower emitter",
             "S1.junction": "the lower emitter side (the RE/RE_BYP junction)",
             "middle": "between the transistors", "S2.base": "the upper base",
             "S2.collector": "the upper collector", "source": "the source", "load": "the load",
             "ground": "ground"}
    return PairForm(
        name="cascode", long_name="cascode (common emitter under common base)",
        topology="cascode", coupling=None, stage_kinds=("ce", "cb"), roles=roles,
        rules=(OneOf(("RE", "RE_BYP")), Together(("RE_BYP", "C_BYP"), "C_BYP bypasses RE_BYP")),
        wiring=wiring,
        devices=(("S1.base", "S1.emitter", "middle"), ("S2.base", "middle", "S2.collector")),
        input="S1.base", output="S2.collector", node_words=words)
