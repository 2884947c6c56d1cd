"""Common-collector stage (emitter follower): divider bias, RE from emitter to
ground, collector to the supply directly (RC = 0) or through RC; input at the base
through C_IN, output from the emitter through C_OUT.

Nodes: b (base), e (emitter), c (collector; at AC ground when RC = 0).
"""

from __future__ import annotations

import numpy as np

from ..stage import StageBatch
from .base import (
    FOLLOWER,
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

NAME = "cc"
LONG_NAME = "common collector"
ALSO_CALLED = "emitter follower"

ROLES = (Role("R1"), Role("R2"), Role("RC", False), Role("RE"), Role("C_IN"), Role("C_OUT"))
ROLE_NAMES = role_names(ROLES)
REQUIRED = required_names(ROLES)
RULES = ()
FORMS = (None,)


def form_of(values) -> None:
    """One form only (with or without RC)."""
    return None


#: The transistor terminals the source branch drives and the load branch hangs from.
INPUT = "base"
OUTPUT = "emitter"
DEFAULT_GAIN_DB = None


def degeneration(re, source_ohm, load_ohm):
    """R_deg of the score's distortion term: RE in parallel with R_L (ohm)."""
    re = np.asarray(re, dtype=float)
    if load_ohm:
        return re * load_ohm / (re + load_ohm)
    return re


def score_gain_target():
    """Unity (0 dB) within FOLLOWER_TOL_DB: a follower is scored as a buffer."""
    from ..score import FOLLOWER_TOL_DB
    return 0.0, FOLLOWER_TOL_DB


#: The stage's full wiring, for a netlist of the whole stage (supply included):
#: role, then its two nodes, the transistor's side first.  A resistor role that is
#: absent (or 0) joins its two nodes (no RC: the collector on the supply); an
#: absent capacitor leaves them open.
WIRING = (
    ("R1", "supply", "base"),
    ("R2", "base", "ground"),
    ("RC", "supply", "collector"),
    ("RE", "emitter", "junction"),
    ("RE_BYP", "junction", "ground"),
    ("C_IN", "base", "source"),
    ("C_OUT", "emitter", "load"),
)


def network(batch: StageBatch) -> Network:
    els = (
        Element("R", "R1", "b", GROUND, batch.R1),
        Element("R", "R2", "b", GROUND, batch.R2),
        Element("R", "RE", "e", GROUND, batch.RE + batch.RE_BYP),
        Element("R", "RC", "c", GROUND, batch.RC),
    )
    return Network(("b", "e", "c"), els, "b", "e", "c", "b", "e",
                   c_in=batch.C_IN, c_out=batch.C_OUT)


def quasi_static(batch: StageBatch, supply_v, source_ohm, load_ohm, op, emf):
    col = lambda a: np.asarray(a, dtype=float)[:, None]  # noqa: E731
    vb, rb = par_thevenin([(supply_v, col(batch.R1)), (0.0, col(batch.R2)),
                           (col(op.vb) + emf, source_ohm)])
    ve, re = par_thevenin([(0.0, col(batch.RE + batch.RE_BYP)),
                           (col(op.ve), np.inf if load_ohm is None else load_ohm)])
    vc = np.full_like(vb, supply_v)
    rc = col(batch.RC) + 0.0 * vb
    v0 = col(op.ve)
    return (vb, rb, ve + 0.0 * vb, re + 0.0 * vb, vc, rc), (lambda vb_, ve_, vc_: ve_ - v0)


def capacitors(batch: StageBatch, op):
    return {
        "C_IN": (op.vb, "base", "source"),
        "C_OUT": (op.ve, "emitter", "load"),
    }


#: What the stock search asks (:class:`.base.SearchRules`): RE from every value
#: (RC, optional, from every value or none), the follower's gain law.
SEARCH = SearchRules(emitter={None: ("RE",)}, capacitors={None: ("C_IN", "C_OUT")},
                     gain_law=FOLLOWER)
