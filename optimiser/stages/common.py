"""What the three topologies share: the small-signal netlist shape and DC bookkeeping.

A stage module (ce, cb, cc) describes its small-signal network as a
:class:`Network`: the nodes besides ground, the passive elements among them,
where the transistor's terminals sit, and where the source branch
(``source_ohm`` in series with C_IN) and the load branch (C_OUT in series with
``load_ohm``) attach.  The supply is AC ground.  :mod:`optimiser.ac` turns a
Network into nodal equations by stamps.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..stage import StageBatch

__all__ = ["Element", "Network", "resistor_voltages", "GROUND", "par_thevenin"]

GROUND = "0"


@dataclass(frozen=True)
class Element:
    """A two-terminal passive element of the small-signal network.

    ``kind`` is ``"R"`` (resistance in ohm; 0 is a short, inf an open) or
    ``"C"`` (capacitance in farad; 0 is an open).  ``value`` has shape (n,).
    """

    kind: str
    role: str
    a: str
    b: str
    value: np.ndarray


@dataclass(frozen=True)
class Network:
    """Small-signal netlist of ``n`` circuits of one form (transistors aside)."""

    nodes: tuple[str, ...]
    elements: tuple[Element, ...]
    base: str
    emitter: str
    collector: str
    input: str                 # node the source branch (R_S + C_IN) drives
    output: str                # node the load branch (C_OUT + R_L) hangs from
    c_in: np.ndarray = field(repr=False, default=None)
    c_out: np.ndarray = field(repr=False, default=None)
    #: every transistor as (base, emitter, collector) nodes; ``None``: the one
    #: transistor of ``base``, ``emitter``, ``collector`` (a single stage)
    devices: tuple[tuple[str, str, str], ...] | None = None

    @property
    def transistors(self) -> tuple[tuple[str, str, str], ...]:
        """(base, emitter, collector) of each transistor, in the order of their SmallSignals."""
        return self.devices or ((self.base, self.emitter, self.collector),)


def resistor_voltages(batch: StageBatch, supply_v: float, op) -> dict[str, np.ndarray]:
    """DC voltage across each resistor role (V), the same network for every topology."""
    return {
        "R1": supply_v - op.vb,
        "R2": op.vb,
        "RC": supply_v - op.vc,
        "RE": op.ve - op.vx,
        "RE_BYP": op.vx,
    }


def par_thevenin(sources):
    """Thevenin equivalent of branches (voltage, resistance) meeting at one node.

    A branch of resistance 0 forces the node (its voltage wins; two forcing
    branches are not expected).  Returns (v_th, r_th); arrays broadcast.
    """
    g_sum = 0.0
    i_sum = 0.0
    forced = None
    forced_v = 0.0
    for v, r in sources:
        r = np.asarray(r, dtype=float)
        v = np.asarray(v, dtype=float)
        zero = r == 0
        with np.errstate(divide="ignore", invalid="ignore"):
            g = np.where(zero | ~np.isfinite(r), 0.0, 1.0 / np.where(zero, 1.0, r))
        g_sum = g_sum + g
        i_sum = i_sum + g * v
        forced = zero if forced is None else (forced | zero)
        forced_v = np.where(zero, v, forced_v)
    with np.errstate(divide="ignore", invalid="ignore"):
        v_th = np.where(forced, forced_v, i_sum / np.where(g_sum > 0, g_sum, 1.0))
        r_th = np.where(forced, 0.0, 1.0 / g_sum)
    return v_th, r_th
