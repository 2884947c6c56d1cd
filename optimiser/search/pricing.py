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

Once a skeleton's resistor values and transistor are fixed, its pieces' prices
are known too (:class:`PiecePrices`): each role takes one piece of its value (at
least the least price of a row of that value) or a joined pair (two pieces, at
least twice the least price of any resistor row), and the stage one piece of its
transistor.  ``Σ`` of those per-piece prices bounds the design's price from below
whenever ``price`` charges each piece at least its row's price (the planner's
does: see :mod:`optimiser.planning.colgen`), so a skeleton whose
``weight · score_map(bound) + piece prices`` reaches the value to beat holds no
design worth keeping (:func:`skeleton_score_to_beat`).  This is what lets the
search prune when prices dwarf the score's whole range (purchases).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np

from optimiser.design import Design

__all__ = ["PiecePrices", "Pricing", "node_price", "score_to_beat", "skeleton_price",
           "skeleton_score_to_beat"]

#: The resistor roles of a skeleton (a value of 0: the role is absent).
_ROLES = ("R1", "R2", "RC", "RE", "RE_BYP")


@dataclass(frozen=True)
class PiecePrices:
    """Per-piece price lower bounds of the rows a search sees.

    Attributes
    ----------
    values, prices : ndarray
        Resistor values (sorted) and the least price of one piece of a row of each.
    transistor : dict
        Least price of one piece per transistor label.
    joined : float
        A lower bound of any value made of two joined pieces: twice the least
        resistor price; inf where no role may be a joined pair (a role's value is
        then always one piece of a row of that value).
    """

    values: np.ndarray
    prices: np.ndarray
    transistor: dict
    joined: float

    @classmethod
    def of(cls, resistors: Sequence[tuple[float, float]],
           transistors: Sequence[tuple[str, float]], combos: bool = True) -> "PiecePrices":
        """From (value, price) per resistor row and (label, price) per transistor row;
        ``combos``: whether a role may be two joined pieces (the request's
        ``allow_combos``; without them one free row no longer bounds every role by 0)."""
        least: dict[float, float] = {}
        for v, pr in resistors:
            least[float(v)] = min(least.get(float(v), math.inf), float(pr))
        vals = np.array(sorted(least), dtype=float)
        prices = np.array([least[v] for v in vals], dtype=float)
        tp: dict[str, float] = {}
        for label, pr in transistors:
            tp[label] = min(tp.get(label, math.inf), float(pr))
        joined = 2.0 * float(prices.min()) if prices.size and combos else math.inf
        return cls(vals, prices, tp, joined)

    def value_price(self, v: np.ndarray) -> np.ndarray:
        """Least price of a role of value ``v`` (0 where the role is absent)."""
        v = np.asarray(v, dtype=float)
        out = np.full(v.shape, self.joined)
        if self.values.size:
            i = np.clip(np.searchsorted(self.values, v), 0, self.values.size - 1)
            hit = np.isclose(self.values[i], v, rtol=1e-9, atol=0.0)
            out = np.where(hit, np.minimum(self.prices[i], self.joined), out)
        return np.where(v > 0, out, 0.0)


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
    pieces : PiecePrices, optional
        Each piece's least price: ``price(d)`` must be at least the sum over the
        pieces of ``d`` (capacitors may count 0) for the skeleton bound to hold.
    """

    weight: float
    score_map: Callable[[float | None], float]
    score_map_inverse: Callable[[float], float]
    price: Callable[[Design], float]
    cutoff: float
    floor: float = 0.0
    #: Per-piece price lower bounds of the drawer searched (None: not known, and
    #: the skeleton level prunes by ``floor`` alone).
    pieces: PiecePrices | None = None
    #: Stop as soon as ``top`` designs below the cutoff are found, ranked or not
    #: (column generation's quick rounds: any negative reduced cost will do; such a
    #: search proves nothing and is reported as not complete).
    quick: bool = False
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


def _target(pricing: Pricing, found: Sequence[Design], top: int) -> float:
    """The value to beat: the cutoff, or the ``top``-th least value found if lower."""
    target = pricing.cutoff
    if len(found) >= top:
        target = min(target, sorted(pricing.value(d) for d in found)[top - 1])
    return target


def score_to_beat(pricing: Pricing, found: Sequence[Design], top: int) -> float:
    """The score bound from which no node can hold a design worth keeping: one of
    value below both the cutoff and the ``top``-th least value found so far."""
    target = _target(pricing, found, top)
    room = target - pricing.floor       # what is left for the score term
    if room <= 0:
        return -math.inf
    if pricing.weight <= 0:
        return math.inf
    return pricing.score_map_inverse(room / pricing.weight)


def skeleton_price(pricing: Pricing, sk, transistor: str) -> np.ndarray | None:
    """Per skeleton of ``sk`` (arrays R1 … RE_BYP), a lower bound of its pieces'
    price: each role's value and one transistor (None: no piece prices known)."""
    pp = pricing.pieces
    if pp is None:
        return None
    total = np.full(np.asarray(sk.R1).shape, pp.transistor.get(transistor, 0.0), dtype=float)
    for role in _ROLES:
        total = total + pp.value_price(getattr(sk, role))
    return total


def node_price(pricing: Pricing, transistor: str, fixed: dict, open_values: dict
               ) -> np.ndarray | None:
    """Per node, a lower bound of the pieces' price of every skeleton below it
    (None: no piece prices known).

    ``fixed`` maps each role already fixed at the node to an array of its values
    (one per node; 0: the role is absent); ``open_values`` maps each role not yet
    fixed to the values it may still take below any node (0 among them where it
    may be absent; a superset will do).  The bound is one piece of ``transistor``,
    plus each fixed role's least price (:meth:`PiecePrices.value_price`), plus for
    each open role the least price over its possible values.

    Claim: for every skeleton whose fixed roles have the node's values and whose
    open roles take values among ``open_values``, the bound is at most its
    :func:`skeleton_price` — each term is at most that skeleton's term for the same
    role, the open ones being minima over a set holding its value.  With every
    role fixed it is :func:`skeleton_price` itself.
    """
    pp = pricing.pieces
    if pp is None:
        return None
    shape = np.asarray(next(iter(fixed.values()))).shape if fixed else ()
    total = np.full(shape, pp.transistor.get(transistor, 0.0), dtype=float)
    for role in _ROLES:
        if role in fixed:
            total = total + pp.value_price(fixed[role])
        elif role in open_values:
            vals = np.asarray(open_values[role], dtype=float)
            total = total + (float(pp.value_price(vals).min()) if vals.size else 0.0)
    return total


def skeleton_score_to_beat(pricing: Pricing, found: Sequence[Design], top: int,
                           price_lb: np.ndarray) -> np.ndarray:
    """Per skeleton, the score bound from which it holds no design worth keeping,
    given ``price_lb`` (a lower bound of each one's price, :func:`skeleton_price`)."""
    room = _target(pricing, found, top) - np.maximum(price_lb, pricing.floor)
    out = np.full(room.shape, -math.inf)
    pos = room > 0
    if pricing.weight <= 0:
        out[pos] = math.inf
    else:
        out[pos] = [pricing.score_map_inverse(r / pricing.weight) for r in room[pos]]
    return out
