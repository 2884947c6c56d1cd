"""Common-base stage: divider bias with the base held at AC ground by C_B, RE from
emitter to ground, RC to the supply; input at the emitter through C_IN, output from
the collector through C_OUT.

Nodes: b (base), e (emitter), c (collector).
"""

from __future__ import annotations

import numpy as np

from ..stage import StageBatch
from .base import (
    EMITTER_DRIVEN,
    NODE_WORDS,
    Role,
    SearchRules,
    required_names,
    role_names,
)
from .common import GROUND, Element, Network, par_thevenin

__all__ = ["NAME", "LONG_NAME", "ALSO_CALLED", "ROLES", "ROLE_NAMES", "REQUIRED", "RULES",
           "FORMS", "form_of", "WIRING", "NODE_WORDS", "INPUT", "OUTPUT", "DEFAULT_GAIN_DB",
           "network", "quasi_static", "capacitors", "degeneration", "score_gain_target",
           "SEARCH"]

NAME = "cb"
LONG_NAME = "common base"
ALSO_CALLED = None

ROLES = (Role("R1"), Role("R2"), Role("RC"), Role("RE"), Role("C_B"), Role("C_IN"),
         Role("C_OUT"))
ROLE_NAMES = role_names(ROLES)
REQUIRED = required_names(ROLES)
RULES = ()
FORMS = (None,)


def form_of(values) -> None:
    """One form only."""
    return None


#: The transistor terminals the source branch drives and the load branch hangs from.
INPUT = "emitter"
OUTPUT = "collector"
#: The gain target (dB) a request to design a cb stage gets when it names none: a
#: common-base stage is a voltage amplifier from a low-impedance source, and without
#: a target the ranking favours stages that attenuate (measured: from 50 Ω into
#: 2k2 the best-scored stage had −15 dB).  ×10 (20 dB), as for ce (common practice).
#: ``gain_db = "none"`` asks for no gain target.
DEFAULT_GAIN_DB = 20.0


def degeneration(re, source_ohm, load_ohm):
    """R_deg of the score's distortion term: R_S in parallel with RE (ohm)."""
    re = np.asarray(re, dtype=float)
    rs = float(source_ohm or 0.0)
    return np.where(re > 0, rs * re / np.maximum(rs + re, 1e-300), rs) if rs > 0 else 0.0 * re


def score_gain_target():
    """No gain term in the score when the request sets no gain."""
    return None


#: The stage's full wiring, for a netlist of the whole stage (supply included):
#: role, then its two nodes, the transistor's side first.  A resistor role that is
#: absent (or 0) joins its two nodes; an absent capacitor leaves them open.
WIRING = (
    ("R1", "supply", "base"),
    ("R2", "base", "ground"),
    ("C_B", "base", "ground"),
    ("RC", "supply", "collector"),
    ("RE", "emitter", "junction"),
    ("RE_BYP", "junction", "ground"),
    ("C_IN", "emitter", "source"),
    ("C_OUT", "collector", "load"),
)


def network(batch: StageBatch) -> Network:
    els = (
        Element("R", "R1", "b", GROUND, batch.R1),
        Element("R", "R2", "b", GROUND, batch.R2),
        Element("C", "C_B", "b", GROUND, batch.C_B),
        Element("R", "RE", "e", GROUND, batch.RE + batch.RE_BYP),
        Element("R", "RC", "c", GROUND, batch.RC),
    )
    return Network(("b", "e", "c"), els, "b", "e", "c", "e", "c",
                   c_in=batch.C_IN, c_out=batch.C_OUT)


def quasi_static(batch: StageBatch, supply_v, source_ohm, load_ohm, op, emf):
    col = lambda a: np.asarray(a, dtype=float)[:, None]  # noqa: E731
    held = col(batch.C_B > 0)
    vb_div, rb_div = par_thevenin([(supply_v, col(batch.R1)), (0.0, col(batch.R2))])
    vb = np.where(held, col(op.vb), vb_div) + 0.0 * emf
    rb = np.where(held, 0.0, rb_div) + 0.0 * emf
    ve, re = par_thevenin([(0.0, col(batch.RE + batch.RE_BYP)), (col(op.ve) + emf, source_ohm)])
    vc, rc = par_thevenin([(supply_v, col(batch.RC)),
                           (col(op.vc), np.inf if load_ohm is None else load_ohm)])
    v0 = col(op.vc)
    return (vb, rb, ve, re, vc, rc), (lambda vb_, ve_, vc_: vc_ - v0)


def capacitors(batch: StageBatch, op):
    return {
        "C_IN": (op.ve, "emitter", "source"),
        "C_OUT": (op.vc, "collector", "load"),
        "C_B": (op.vb, "base", "ground"),
    }


#: What the stock search asks (:class:`.base.SearchRules`): RE from every value,
#: C_B holding the base, the emitter-driven gain law.
SEARCH = SearchRules(emitter={None: ("RE",)}, capacitors={None: ("C_IN", "C_OUT", "C_B")},
                     gain_law=EMITTER_DRIVEN)
