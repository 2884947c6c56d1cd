"""Copies carried together: what a column serving ``k`` copies of one design may use.

A build of ``identical = true`` puts all its ``count`` copies on one design, so each
of that design's values must give ``pieces per copy × count`` pieces; a build of
``identical = false`` may spread its copies, one design per copy at least.  The
search is asked for designs that serve :func:`carried` copies (the request's
``builds``): it then takes only values that hold enough for all of them, and
chooses capacitors for that many copies, not for one.

The drawer handed to that search (:func:`copies_drawer`) counts each value by its
pool — every real row of the same kind and value (transistors: label) — since the
programme may take a value's pieces from any of its rows; rows whose pool holds
fewer than ``k`` pieces cannot serve a single role of ``k`` copies and are left
out.  The search checks each role against one row's (pooled) count; two roles of
one value may then together overdraw the pool, which :func:`fits` catches.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Mapping
from dataclasses import replace

from inventory.parts import StockSnapshot
from optimiser.options import value_key

__all__ = ["carried", "copies_drawer", "fits"]


def carried(count: int, identical: bool) -> int:
    """Copies one column of a build carries at once: all of them when the copies
    must be identical, else one (they may spread over designs)."""
    return max(int(count), 1) if identical else 1


def _real(row) -> bool:
    return row.id is None or row.id >= 0


def copies_drawer(snapshot: StockSnapshot, k: int) -> StockSnapshot:
    """The drawer as a search for ``k`` copies should see it.

    Each real row holds its pool's pieces (all real rows of its kind and value;
    transistors of its label), and rows whose pool holds fewer than ``k`` are
    dropped.  Purchasable (virtual) rows stay as they are.  ``k ≤ 1`` returns the
    drawer unchanged.
    """
    if k <= 1:
        return snapshot
    pool: dict[tuple, int] = defaultdict(int)

    def key(row) -> tuple:
        if row.kind in ("resistor", "capacitor"):
            return (row.kind, value_key(row.value))
        return ("transistor", row.label)

    rows = (*snapshot.resistors, *snapshot.capacitors, *snapshot.transistors)
    for r in rows:
        if _real(r):
            pool[key(r)] += max(int(r.qty), 0)

    def cut(group):
        out = []
        for r in group:
            if not _real(r):
                out.append(r)
            elif pool[key(r)] >= k:
                out.append(r if r.qty == pool[key(r)] else replace(r, qty=pool[key(r)]))
        return tuple(out)

    return replace(snapshot, resistors=cut(snapshot.resistors),
                   capacitors=cut(snapshot.capacitors), transistors=cut(snapshot.transistors))


def fits(pieces: Mapping[tuple, int], k: int, held: Mapping[tuple, int],
         buyable: Mapping[tuple, object]) -> bool:
    """True when ``k`` copies of a column (``pieces`` per pool for one copy) fit the
    pools: every pool either may be bought or holds ``k × pieces``."""
    return all(p in buyable or n * k <= held.get(p, 0) for p, n in pieces.items())
