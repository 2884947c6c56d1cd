"""The pricing search by price levels: the drawer cut down to the rows priced at
most ``U_k``, for rising ``U_k``.

A design not within level ``k − 1`` uses a row priced above ``U_{k−1}``, so its
value is at least the least such price (the ``floor`` of level ``k``): the search
of level ``k`` then only needs designs whose mapped score fits below the value to
beat minus that floor, which prunes by score again even where the prices alone
exceed the score's whole range.  Once ``top`` designs are known of value at most
the least price above ``U_k``, no design outside the level can rank among them
and the search stops.
Capacitors are cut by level like the other rows, so that the search, which
chooses them by its own rule, draws on the cheaper ones first; the value it ranks
by may leave them out (a lower bound, see :mod:`optimiser.planning.colgen`): the
least value found, or the least price beyond the last level searched, still
bounds every design's value from below.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import replace

from inventory.errors import InputError
from inventory.parts import StockSnapshot
from optimiser.design import Design
from optimiser.request import Request
from optimiser.search.pricing import PiecePrices, Pricing
from optimiser.search.tree import search_designs

__all__ = ["MAX_LEVELS", "priced_search"]

#: Price levels at most: more cut the drawer finer (smaller searches, each with
#: a higher floor) at the price of more searches.
MAX_LEVELS = 12
#: Seconds each level's search may take in a quick search (``Pricing.quick``),
#: which proves nothing: long enough to find designs where they are easy to
#: find, short enough that one level without any does not hold up the round.
QUICK_LEVEL_S = 1.0


def _levels(prices: list[float]) -> list[float]:
    distinct = sorted(set(prices))
    if not distinct:
        return [0.0]
    m = len(distinct)
    picks = {distinct[0], distinct[-1]}
    picks.update(distinct[round(i * (m - 1) / (MAX_LEVELS - 1))] for i in range(MAX_LEVELS))
    return sorted(picks)


def _key(d: Design) -> tuple:
    """A design's transistor, form, values and rows (the same design found at two levels)."""
    return (d.transistor, d.form, tuple(sorted(
        (role, p.value, tuple(q.id for q in p.pieces)) for role, p in d.parts.items())))


def priced_search(request: Request, snapshot: StockSnapshot, pricing: Pricing,
                  row_price: Callable[[int], float], top: int, budget_s: float | None,
                  search_fn: Callable | None = None) -> tuple[list[Design], bool]:
    """The ``top`` designs of least priced value below the cutoff; and whether
    the searches behind them ran to their end (the ranking is then exact).

    ``row_price(id)`` is the price of one piece of a row (≥ 0); ``pricing.price``
    must charge each piece of a design at least its row's price (capacitors may
    count 0), since the search prunes skeletons by the sum of their pieces'
    prices (:class:`~optimiser.search.pricing.PiecePrices`).
    """
    search_fn = search_fn or search_designs
    t0 = time.perf_counter()
    price = {r.id: row_price(r.id)
             for r in (*snapshot.resistors, *snapshot.capacitors, *snapshot.transistors)
             if r.id is not None}
    found: list[Design] = []
    complete = True
    prev = -math.inf
    for upper in _levels(list(price.values())):
        floor = 0.0 if prev == -math.inf else min(p for p in price.values() if p > prev)
        if floor >= pricing.cutoff:
            break
        left = None if budget_s is None else budget_s - (time.perf_counter() - t0)
        if left is not None and left <= 0:
            complete = False
            break
        if pricing.quick:
            left = QUICK_LEVEL_S if left is None else min(left, QUICK_LEVEL_S)
        def keep(r, upper=upper):
            return r.id is None or price.get(r.id, 0.0) <= upper

        snap = replace(snapshot, resistors=tuple(r for r in snapshot.resistors if keep(r)),
                       capacitors=tuple(c for c in snapshot.capacitors if keep(c)),
                       transistors=tuple(t for t in snapshot.transistors if keep(t)))
        stats: dict = {"pruned": {}}
        pieces = PiecePrices.of([(r.value, price.get(r.id, 0.0)) for r in snap.resistors],
                                [(t.label, price.get(t.id, 0.0)) for t in snap.transistors],
                                combos=request.allow_combos)
        level = replace(pricing, floor=floor, pieces=pieces, _values={})
        try:
            designs, _ = search_fn(request, snap, top, stats, budget_s=left, given=[],
                                   workers=1, pricing=level)
        except InputError:
            designs = []            # the request's transistor is priced above this level
        if stats.get("stopped_at_budget") or stats.get("stopped_quick"):
            complete = False
        found.extend(designs)
        ranked = pricing.rank(found)
        prev = upper
        if pricing.quick and len(ranked) >= top:
            complete = False        # enough found, none ranked against the rest
            break
        # every design outside this level takes a row priced at least `beyond`
        beyond = min((p for p in price.values() if p > upper), default=math.inf)
        if len(ranked) >= top and pricing.value(ranked[top - 1]) <= beyond:
            break
    out, seen = [], set()
    for d in pricing.rank(found):
        k = _key(d)
        if k not in seen:
            seen.add(k)
            out.append(d)
    return out[:top], complete
