"""Seed searches: the drawer thinned to every k-th resistor value, then polished
around its best designs; what they find is the score the full search starts to beat."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from inventory.parts import StockSnapshot
from optimiser.design import Design
from optimiser.request import Request
from optimiser.search.workers import worker_count

#: Drawers with more distinct resistor values than this are first searched thinned
#: to about SEED_VALUES of them (every k-th value): the designs found there are
#: designs of the whole drawer too and give the full search its score to beat.
SEED_ABOVE = 160
SEED_VALUES = 100
#: ... and then around the best POLISH_AROUND designs found there, within
#: POLISH_STEPS values of theirs (around the best 3 rather than all 10: E96 medians
#: ce 12.0 -> 10.2 s, cb 2.28 -> 2.12 s).
POLISH_STEPS = 2
POLISH_AROUND = 3


def _seed_designs(request: Request, snapshot: StockSnapshot, top: int, stats: dict,
                  search_designs,
                  budget_s: float | None) -> list[Design]:
    """The best designs of the drawer thinned to every k-th resistor value (or none).

    Every row of a kept value is kept, so each design found is buildable from
    the whole drawer with the same pieces and the same score; the full search
    then starts with these as the ``top`` to beat (exactness is untouched: a
    node is only dropped when its bound reaches the score of ``top`` real
    designs).  ``search_designs`` is :func:`optimiser.search.tree.search_designs`,
    passed in by it.
    """
    values = np.unique([r.value for r in snapshot.resistors])
    if values.size <= SEED_ABOVE:
        return []
    k = -(-values.size // SEED_VALUES)
    keep = set(values[::k].tolist())
    thin = replace(snapshot, resistors=tuple(r for r in snapshot.resistors if r.value in keep))
    sub = {"pruned": {}}
    workers = worker_count(values.size)
    seeds, _ = search_designs(request, thin, top, sub, None,
                              None if budget_s is None else budget_s / 4, workers=workers,
                              finish=False)
    stats["seed_designs"] = len(seeds)
    stats["seed_values"] = len(keep)
    if len(seeds) >= top:
        # then the drawer around the best of them: every value within POLISH_STEPS
        # of a value they use, searched with all the seeds as the score to beat
        # (each is a design of the whole drawer, in that drawer or not)
        used = np.array(sorted({v for d in seeds[:POLISH_AROUND]
                                for r, v in d.values().items() if not r.startswith("C")}))
        at = np.searchsorted(values, used)
        near = set()
        for i in at:
            near.update(values[max(i - POLISH_STEPS, 0):i + POLISH_STEPS + 1].tolist())
        if len(near) < values.size:
            local = replace(snapshot, resistors=tuple(r for r in snapshot.resistors
                                                      if r.value in near))
            seeds, _ = search_designs(request, local, top, {"pruned": {}}, None,
                                      None if budget_s is None else budget_s / 4, given=seeds,
                                      workers=workers, finish=False)
            stats["seed_polish_values"] = len(near)
    return seeds
