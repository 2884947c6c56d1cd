"""Direct-coupled ce→cc: a common-emitter stage whose collector drives the base of an
emitter follower with no coupling capacitor and no second divider; one DC network.

Roles: the ce stage's (``S1.R1``, ``S1.R2``, ``S1.RC``, ``S1.RE``, ``S1.RE_BYP``,
``S1.C_BYP``, ``S1.C_IN``), the follower's emitter resistor ``S2.RE``, its optional
collector resistor ``S2.RC`` and the output capacitor ``S2.C_OUT``.  The follower's
base node is the first collector (``S1.collector``).
"""

from __future__ import annotations

from functools import cache

from . import ce
from .base import OneOf, Together
from .pair import PairForm, PairRole

__all__ = ["form", "COUPLING"]

COUPLING = "direct"


@cache
def form() -> PairForm:
    roles = (PairRole("S1.R1", "resistor"), PairRole("S1.R2", "resistor"),
             PairRole("S1.RC", "resistor"), PairRole("S1.RE", "resistor", False),
             PairRole("S1.RE_BYP", "resistor", False), PairRole("S1.C_BYP", "capacitor", False),
             PairRole("S1.C_IN", "capacitor"), PairRole("S2.RC", "resistor", False),
             PairRole("S2.RE", "resistor"), PairRole("S2.C_OUT", "capacitor"))
    wiring = (
        ("S1.R1", "supply", "S1.base"),
        ("S1.R2", "S1.base", "ground"),
        ("S1.RC", "supply", "S1.collector"),
        ("S1.RE", "S1.emitter", "S1.junction"),
        ("S1.RE_BYP", "S1.junction", "ground"),
        ("S1.C_BYP", "S1.junction", "ground"),
        ("S1.C_IN", "S1.base", "source"),
        ("S2.RC", "supply", "S2.collector"),
        ("S2.RE", "S2.emitter", "ground"),
        ("S2.C_OUT", "S2.emitter", "load"),
    )
    words = {f"S1.{k}": f"{v} of S1" for k, v in ce.NODE_WORDS.items()
             if k not in ("source", "load", "ground")}
    words.update({"S2.emitter": "the emitter of S2", "S2.collector": "the collector of S2",
                  "source": "the source", "load": "the load", "ground": "ground"})
    return PairForm(
        name="ce→cc direct", long_name="common emitter → emitter follower, direct-coupled",
        topology=["ce", "cc"], coupling=COUPLING, stage_kinds=("ce", "cc"), roles=roles,
        rules=(OneOf(("S1.RE", "S1.RE_BYP")),
               Together(("S1.RE_BYP", "S1.C_BYP"), "S1.C_BYP bypasses S1.RE_BYP")),
        wiring=wiring,
        devices=(("S1.base", "S1.emitter", "S1.collector"),
                 ("S1.collector", "S2.emitter", "S2.collector")),
        input="S1.base", output="S2.emitter", node_words=words)
