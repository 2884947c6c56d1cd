"""The known roles and the batch of candidate stages the engine evaluates.

Which roles a topology uses, and which it requires, is the topology's own
(:mod:`optimiser.stages`, ``ROLES``); this module names every role there is.

A :class:`StageBatch` holds ``n`` candidate stages of one topology built around
one transistor type, as arrays of shape ``(n,)`` (ohm, farad).  A role that a
stage does not use is 0 in its array, with these meanings:

* ``RC = 0``      collector tied to the supply (cc without RC);
* ``RE = 0``      no unbypassed emitter resistance (ce fully bypassed);
* ``RE_BYP = 0``  no bypassed section (then ``C_BYP`` is 0 too);
* ``C_B = 0``     not a cb stage.

This module is the contract between the engine (dc, ac, distortion, evaluate)
and its users (search, yield, analyse, sheet).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

__all__ = ["RESISTOR_ROLES", "CAPACITOR_ROLES", "StageBatch", "PartRatings"]  # and ROLES, REQUIRED (__getattr__)

RESISTOR_ROLES = ("R1", "R2", "RC", "RE", "RE_BYP")
CAPACITOR_ROLES = ("C_IN", "C_OUT", "C_BYP", "C_B")

_ALL = RESISTOR_ROLES + CAPACITOR_ROLES


def __getattr__(name: str):
    """``ROLES`` and ``REQUIRED``: topology -> role names it may use / must have, read
    from each topology's module (:mod:`optimiser.stages`, which imports this module,
    hence built on first use)."""
    if name in ("ROLES", "REQUIRED"):
        from . import stages
        attr = "ROLE_NAMES" if name == "ROLES" else "REQUIRED"
        return {m.NAME: getattr(m, attr) for m in stages.modules()}
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def _arr(x) -> np.ndarray:
    return np.atleast_1d(np.asarray(x, dtype=float))


@dataclass(frozen=True)
class StageBatch:
    """``n`` candidate stages of one topology; every array has shape ``(n,)``."""

    topology: str
    R1: np.ndarray
    R2: np.ndarray
    RC: np.ndarray
    RE: np.ndarray
    RE_BYP: np.ndarray
    C_IN: np.ndarray
    C_OUT: np.ndarray
    C_BYP: np.ndarray
    C_B: np.ndarray

    @classmethod
    def from_values(cls, topology: str, **values) -> "StageBatch":
        """Build from role=value (scalars or arrays); absent roles are 0, all broadcast."""
        arrays = [_arr(values.get(r, 0.0)) for r in _ALL]
        arrays = np.broadcast_arrays(*arrays)
        return cls(topology, *[np.array(a, dtype=float) for a in arrays])

    @property
    def n(self) -> int:
        return int(self.R1.shape[0])

    def role(self, name: str) -> np.ndarray:
        return getattr(self, name)

    @property
    def re_total(self) -> np.ndarray:
        """DC emitter resistance RE + RE_BYP."""
        return self.RE + self.RE_BYP

    def take(self, index) -> "StageBatch":
        """The sub-batch at ``index`` (an integer array or boolean mask)."""
        return replace(self, **{r: getattr(self, r)[index] for r in _ALL})

    def one(self, i: int) -> dict[str, float]:
        """The values of candidate ``i`` as role -> value, roles in use only."""
        from .stages import module
        out = {}
        for r in module(self.topology).ROLE_NAMES:
            v = float(getattr(self, r)[i])
            if v > 0:
                out[r] = v
        return out


@dataclass(frozen=True)
class PartRatings:
    """Ratings of the pieces that make each role, for the derating rules.

    Arrays broadcast against the batch (shape ``(n,)`` or scalar).

    ``power_w[role]``          rating of each piece of a resistor role, in W;
    ``power_share[role]``      the largest share of the role's dissipation that
                               one piece takes (1 for a single piece, 0.5 for two
                               equal pieces in series or parallel);
    ``voltage_v[role]``        voltage rating of a capacitor role;
    ``polarised[role]``        the capacitor has a + terminal.
    Missing entries take the stock defaults (0.25 W, 50 V, not polarised).
    """

    power_w: dict[str, np.ndarray] = field(default_factory=dict)
    power_share: dict[str, np.ndarray] = field(default_factory=dict)
    voltage_v: dict[str, np.ndarray] = field(default_factory=dict)
    polarised: dict[str, np.ndarray] = field(default_factory=dict)
