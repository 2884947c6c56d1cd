"""The search as the pricing problem of column generation: designs ranked by a
priced value instead of the score alone.

The value of a design is ``weight · score_map(score) + price(design)``: its cost
as a column (``weight`` times a monotone map of its score) plus the dual prices
of the pieces one copy takes.  Prices are never negative, so ``price ≥ 0`` and
every bound of the search (a lower bound ``L`` of the score below a node) still
bounds the value from below: ``weight · score_map(L)``.  A node can then hold a
design of value below ``V`` only if its score bound lies below
``score_map_inverse((V − floor) / weight)`` — that is the score to beat the tree
uses (:func:`score_to_beat`), ``floor`` being a lower bound of the price (0, or
what :mod:`optimiser.search.priced` knows).  Only designs of value below ``cutoff`` are wanted
(columns of negative reduced cost).  The search knows nothing of the planner:
the map, its inverse and the pieces' prices are handed in.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

from optimiser.design import Design

__all__ = ["Pricing", "score_to_beat"]


@dataclass(frozen=True)
class Pricing:
    """What turns a design into its priced value, and the value to stay below.

    Attributes
    ----------
    weight : float
        Weight of the mapped score (0: the score does not count, only prices).
    score_map, score_map_inverse : callable
        Monotone map of a score and the least score reaching a mapped value.
    price : callable
        Σ price × pieces of one copy of a design (≥ 0).
    cutoff : float
        Designs of value at or above it are not wanted.
    floor : float
        The least price of any design still wanted (the priced search by
        levels, :mod:`optimiser.search.priced`, knows that every design it has
        not yet covered uses a piece at least this dear); 0 when nothing is known.
    """

    weight: float
    score_map: Callable[[float | None], float]
    score_map_inverse: Callable[[float], float]
    price: Callable[[Design], float]
    cutoff: float
    floor: float = 0.0
    _values: dict = field(default_factory=dict, compare=False, repr=False)

    def value(self, design: Design) -> float:
        """``weight · score_map(score) + price`` (kept per design object)."""
        v = self._values.get(id(design))
        if v is None or v[0] is not design:
            v = (design, self.weight * self.score_map(design.score) + self.price(design))
            self._values[id(design)] = v
        return v[1]

    def rank(self, designs: Sequence[Design]) -> list[Design]:
        """The designs of value below the cutoff, least value first."""
        valued = sorted(((self.value(d), i, d) for i, d in enumerate(designs)))
        return [d for v, _, d in valued if v < self.cutoff]


def score_to_beat(pricing: Pricing, found: Sequence[Design], top: int) -> float:
    """The score bound from which no node can hold a design worth keeping: one of
    value below both the cutoff and the ``top``-th least value found so far."""
    target = pricing.cutoff
    if len(found) >= top:
        key = (id(found), len(found))
        hit = pricing._values.get(key)
        if hit is None:         # (found only grows: its top-th value is kept per length)
            hit = pricing._values[key] = sorted(pricing.value(d) for d in found)[top - 1]
        target = min(target, hit)
    room = target - pricing.floor       # what is left for the score term
    if room <= 0:
        return -math.inf
    if pricing.weight <= 0:
        return math.inf
    return pricing.score_map_inverse(room / pricing.weight)
