"""Common-emitter stage: divider bias, emitter resistance RE (unbypassed) in series
with RE_BYP (bypassed by C_BYP), collector resistor RC; input at the base through
C_IN, output from the collector through C_OUT.

Nodes: b (base), e (emitter), x (junction of RE and RE_BYP), c (collector).
RE = 0 joins e and x; RE_BYP = 0 puts x at ground.
"""

from __future__ import annotations

import numpy as np

from ..stage import StageBatch
from .base import (
    DEGENERATED,
    NODE_WORDS,
    OneOf,
    Role,
    SearchRules,
    Together,
    required_names,
    role_names,
)
from .common import GROUND, Element, Network, par_thevenin

__all__ = ["NAME", "LONG_NAME", "ALSO_CALLED", "ROLES", "ROLE_NAMES", "REQUIRED", "RULES",
           "FORMS", "form_of", "WIRING", "NODE_WORDS", "INPUT", "OUTPUT", "DEFAULT_GAIN_DB",
           "network", "quasi_static", "capacitors", "degeneration", "score_gain_target",
           "SEARCH"]

NAME = "ce"
LONG_NAME = "common emitter"
ALSO_CALLED = None

ROLES = (Role("R1"), Role("R2"), Role("RC"), Role("RE", False), Role("RE_BYP", False),
         Role("C_BYP", False), Role("C_IN"), Role("C_OUT"))
ROLE_NAMES = role_names(ROLES)
REQUIRED = required_names(ROLES)
RULES = (OneOf(("RE", "RE_BYP")), Together(("RE_BYP", "C_BYP"), "C_BYP bypasses RE_BYP"))

#: The emitter forms: RE only, RE_BYP (with C_BYP) only, or both.
FORMS = ("unbypassed", "fully bypassed", "partly bypassed")


def form_of(values) -> str:
    """The emitter form of ``values`` (role -> value) from which emitter roles are used."""
    re_, byp = values.get("RE", 0.0) or 0.0, values.get("RE_BYP", 0.0) or 0.0
    if byp <= 0:
        return "unbypassed"
    return "partly bypassed" if re_ > 0 else "fully bypassed"


#: The transistor terminals the source branch drives and the load branch hangs from.
INPUT = "base"
OUTPUT = "collector"

#: The gain target (dB) a request to design a ce stage gets when it names none: a
#: stage of the kind asked for amplifies, and x10 (20 dB) is the usual single ce
#: stage (common practice).  Without a target the ranking would favour stages that
#: do not amplify at all.  ``gain_db = "none"`` asks for no gain target.
DEFAULT_GAIN_DB = 20.0


def degeneration(re, source_ohm, load_ohm):
    """R_deg of the score's distortion term: the unbypassed RE (ohm)."""
    return np.asarray(re, dtype=float)


def score_gain_target():
    """No gain term in the score when the request sets no gain."""
    return None


#: The stage's full wiring, for a netlist of the whole stage (supply included):
#: role, then its two nodes, the transistor's side first.  A resistor role that is
#: absent (or 0) joins its two nodes; an absent capacitor leaves them open.
WIRING = (
    ("R1", "supply", "base"),
    ("R2", "base", "ground"),
    ("RC", "supply", "collector"),
    ("RE", "emitter", "junction"),
    ("RE_BYP", "junction", "ground"),
    ("C_BYP", "junction", "ground"),
    ("C_IN", "base", "source"),
    ("C_OUT", "collector", "load"),
)


def network(batch: StageBatch) -> Network:
    """Small-signal netlist (supply at AC ground)."""
    els = (
        Element("R", "R1", "b", GROUND, batch.R1),
        Element("R", "R2", "b", GROUND, batch.R2),
        Element("R", "RC", "c", GROUND, batch.RC),
        Element("R", "RE", "e", "x", batch.RE),
        Element("R", "RE_BYP", "x", GROUND, batch.RE_BYP),
        Element("C", "C_BYP", "x", GROUND, batch.C_BYP),
    )
    return Network(("b", "e", "x", "c"), els, "b", "e", "c", "b", "c",
                   c_in=batch.C_IN, c_out=batch.C_OUT)


def quasi_static(batch: StageBatch, supply_v, source_ohm, load_ohm, op, emf):
    """Terminal Thevenins with every capacitor a DC source at its operating voltage.

    ``emf`` has shape (n, k) (k phase points); returns (vb, rb, ve, re, vc, rc)
    broadcast to (n, k) and a function giving v_load from (vb, ve, vc).
    """
    col = lambda a: np.asarray(a, dtype=float)[:, None]  # noqa: E731
    vb, rb = par_thevenin([(supply_v, col(batch.R1)), (0.0, col(batch.R2)),
                           (col(op.vb) + emf, source_ohm)])
    held = (batch.RE_BYP > 0) & (batch.C_BYP > 0)
    ve = np.where(held, op.vx, 0.0)[:, None]
    re = np.where(held, batch.RE, batch.RE + batch.RE_BYP)[:, None]
    vc, rc = par_thevenin([(supply_v, col(batch.RC)),
                           (col(op.vc), np.inf if load_ohm is None else load_ohm)])
    v0 = col(op.vc)
    return (vb, rb, ve, re, vc, rc), (lambda vb_, ve_, vc_: vc_ - v0)


def capacitors(batch: StageBatch, op) -> dict[str, tuple[np.ndarray, str, str]]:
    """role -> (DC voltage from its first-named to its second-named side, names)."""
    return {
        "C_IN": (op.vb, "base", "source"),
        "C_OUT": (op.vc, "collector", "load"),
        "C_BYP": (op.vx, "emitter", "ground"),
    }


#: What the stock search asks (:class:`.base.SearchRules`): each form's emitter
#: options fill RE, RE_BYP or both; C_BYP only where RE_BYP is bypassed; the
#: degenerated gain law; the drift bound first (three closed-form solves, cheaper
#: here than the emitter and junction bounds and on fine runs of emitter options the
#: one that discards the most: measured, a tenth off the E96 search).
SEARCH = SearchRules(
    emitter={"unbypassed": ("RE",), "fully bypassed": ("RE_BYP",),
             "partly bypassed": ("RE", "RE_BYP")},
    capacitors={"unbypassed": ("C_IN", "C_OUT"), "fully bypassed": ("C_IN", "C_OUT", "C_BYP"),
                "partly bypassed": ("C_IN", "C_OUT", "C_BYP")},
    gain_law=DEGENERATED, drift_first=True)
