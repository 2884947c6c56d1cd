"""Skeletons: a transistor and resistor values with the capacitors still open, the
roles of each topology's forms and the capacitor-independent figures the search
and its checks share."""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from inventory.parts import Transistor
from optimiser.ac import small_signal
from optimiser.dc import operating_point
from optimiser.device import device_from_transistor
from optimiser.evaluate import corner_points
from optimiser.prune import midband_estimate
from optimiser.request import Request
from optimiser.score import degeneration, hd2_pct
from optimiser.stage import StageBatch
from optimiser.stages import NAMES, module

#: Capacitance standing for "shorted" in the skeleton pass (F).
SHORT_F = 1.0
#: Each topology's forms (its module's ``FORMS``), by name.
FORMS = {name: module(name).FORMS for name in NAMES}


@dataclass
class Skeletons:
    """Candidate stages without capacitors, as parallel arrays of shape (n,)."""

    topology: str
    transistor: Transistor
    form: str | None
    R1: np.ndarray
    R2: np.ndarray
    RC: np.ndarray
    RE: np.ndarray
    RE_BYP: np.ndarray

    @property
    def n(self) -> int:
        return int(self.R1.size)

    def take(self, idx) -> "Skeletons":
        return replace(self, R1=self.R1[idx], R2=self.R2[idx], RC=self.RC[idx],
                       RE=self.RE[idx], RE_BYP=self.RE_BYP[idx])

    def batch(self, caps: dict[str, np.ndarray] | None = None) -> StageBatch:
        caps = caps or {}
        vals = dict(R1=self.R1, R2=self.R2, RC=self.RC, RE=self.RE, RE_BYP=self.RE_BYP)
        for role in cap_roles(self.topology, self.form):
            vals[role] = caps.get(role, SHORT_F)
        return StageBatch.from_values(self.topology, **vals)


def cap_roles(topology: str, form: str | None) -> tuple[str, ...]:
    """The capacitor roles of ``form``, in the order the leaves choose them
    (the topology's ``SEARCH.capacitors``)."""
    return module(topology).SEARCH.capacitors[form]


def resistor_roles(topology: str, form: str | None, rc) -> tuple[str, ...]:
    """The resistor roles a skeleton of ``form`` uses: R1, R2, RC (unless the
    topology lets RC be absent and ``rc`` is 0), then the form's emitter roles."""
    mod = module(topology)
    has_rc = rc > 0 or "RC" in mod.REQUIRED
    return ("R1", "R2") + (("RC",) if has_rc else ()) + mod.SEARCH.emitter[form]


def _emitter_options(topology: str, form: str | None, rv: np.ndarray):
    """(RE, RE_BYP) arrays of the emitter side of one form: every value in the
    one emitter role the form fills (the other 0), or every pair of values."""
    z = np.zeros_like(rv)
    roles = module(topology).SEARCH.emitter[form]
    if roles == ("RE",):
        return rv.copy(), z
    if roles == ("RE_BYP",):
        return z, rv.copy()
    a, b = np.meshgrid(rv, rv, indexing="ij")
    return a.ravel(), b.ravel()


def _take_all(c: Skeletons, idx) -> Skeletons:
    sub = c.take(idx)
    for k in ("lb", "gdb", "hd2", "supply", "stock_lb"):
        setattr(sub, k, getattr(c, k)[idx])
    return sub


def skeleton_figures(request: Request, batch: StageBatch, transistor: Transistor) -> dict:
    """The capacitor-independent inputs of the score for ``batch``, as arrays.

    ``gain_inf_db`` (midband gain with capacitors shorted), ``hd2_pct``,
    ``supply_a`` (through R1 plus I_C), ``drift_pct`` (the engine's four
    corners).  The search and any check of it use this one function.
    """

    model = device_from_transistor(transistor)
    op = operating_point(batch.topology, request.supply_v, batch, model)
    ss = small_signal(op, model)
    g, drive = midband_estimate(batch.topology, r1=batch.R1, r2=batch.R2, rc=batch.RC,
                                re=batch.RE, source_ohm=request.source_ohm,
                                load_ohm=request.load_ohm, mid_hz=request.mid_hz, ss=ss)
    cop, _, _ = corner_points(request, batch, model)
    with np.errstate(divide="ignore", invalid="ignore"):
        drift = 100.0 * np.max(np.abs(cop.ic - op.ic[:, None]), axis=1) / op.ic
    return {"gain_inf_db": 20 * np.log10(np.maximum(g, 1e-300)),
            "hd2_pct": hd2_pct(request.input_vpk, drive, np.asarray(ss["gm"]) * degeneration(
                batch.topology, batch.RE, request.source_ohm, request.load_ohm)),
            "supply_a": (request.supply_v - op.vb) / batch.R1 + op.ic,
            "drift_pct": drift,
            "vce_v": op.vce}
