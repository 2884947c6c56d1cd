"""How near a stock design comes to a request, and the pool of rejected stock designs
a search keeps for the nearest misses (docs/answers.md, "Nearest misses").

Pure: figures in, order out; the pool holds designs, it evaluates nothing."""

from __future__ import annotations

import heapq
import itertools
import math

from optimiser.design import Design
from optimiser.request import Request

__all__ = ["TARGETS", "UNITS", "POOL_DESIGNS", "MissPool", "shortfalls", "miss_distance",
           "miss_order", "miss_rank", "values_key"]

#: Targets of a request: key, metric, sense ("max": metric ≤ limit, "min": ≥).
TARGETS = (("f_low_max_hz", "f_low_hz", "max"), ("f_high_min_hz", "f_high_hz", "min"),
           ("zin_min_ohm", "zin_ohm", "min"), ("ic_drift_max_pct", "ic_drift_pct", "max"),
           ("thd_max_pct", "thd_pct", "max"), ("ic_min_a", "ic_a", "min"))
UNITS = {"f_low_max_hz": "Hz", "f_high_min_hz": "Hz", "zin_min_ohm": "Ω",
         "ic_drift_max_pct": "%", "thd_max_pct": "%", "ic_min_a": "A", "zout_max_ohm": "Ω"}
#: Distance an invalid design (one failing a validity rule) adds to its shortfalls.
INVALID_DISTANCE = 10.0
#: Rejected stock designs one search keeps, the nearest by :func:`miss_rank` (a
#: nearer one displaces the farthest): more give the nearest misses more to choose
#: from, and cost a stock allocation each while the pool is filling.
POOL_DESIGNS = 40


def shortfalls(request: Request, m: dict) -> dict[str, float]:
    """Target key -> relative shortfall (> 0 means missed)."""
    out = {}
    if request.gain is not None and m.get("gain_db") is not None:
        d = abs(m["gain_db"] - request.gain_db) - request.gain_tol_db
        if d > 1e-12:
            out["gain_db"] = d / max(request.gain_tol_db, 1e-3)
    for key, metric, sense in TARGETS:
        lim = getattr(request, key)
        v = m.get(metric)
        if lim is None:
            continue
        if v is None or not math.isfinite(v):
            continue
        if sense == "max" and v > lim:
            out[key] = v / lim - 1.0
        elif sense == "min" and v < lim:
            out[key] = lim / max(v, 1e-300) - 1.0
    return out


def miss_distance(request: Request, metrics: dict, valid: bool = True) -> float:
    """Distance of a design's figures to the request (0 when it meets every target).

    The sum over the targets missed of the normalised shortfall: the gain's dB
    outside the window divided by gain_tol_db; an upper limit's value/limit − 1;
    a lower limit's limit/value − 1.  An invalid design adds INVALID_DISTANCE.
    """
    return sum(shortfalls(request, metrics).values()) + (0.0 if valid else INVALID_DISTANCE)


def miss_order(d: Design) -> tuple:
    """Sort key of the nearest misses: fewest violations, then the smallest distance."""
    return (len(d.violations), d.extra.get("miss_distance", math.inf))


def miss_rank(request: Request, ev, j: int) -> tuple[int, float]:
    """:func:`miss_order` of candidate ``j`` of the evaluation ``ev`` against ``request``
    (as far as ``ev`` judged it: an evaluation without band edges or THD leaves those
    targets out)."""
    return (len(ev.failed_keys(j)), miss_distance(request, ev.metrics_of(j), bool(ev.valid[j])))


def values_key(d: Design) -> tuple:
    """A design's transistor, form and every role's value (capacitors included)."""
    return (d.transistor, d.form, tuple(sorted((r, p.value) for r, p in d.parts.items())))


class MissPool:
    """The nearest (by :func:`miss_rank`) of the stock designs a search evaluated and
    rejected, at most ``limit``, each design once (:func:`values_key`).

    One pool lives through every round of a search (its aspiration levels) and takes
    in the pools of the other processes of a split search (:meth:`merge`)."""

    def __init__(self, limit: int = POOL_DESIGNS):
        self.limit = limit
        self._heap: list[tuple] = []        # (−count, −distance, −seq, key, rank, design)
        self._keys: set[tuple] = set()
        self._seq = itertools.count()

    def __len__(self) -> int:
        return len(self._heap)

    def admits(self, rank: tuple[int, float]) -> bool:
        """Whether a design of this rank would be kept (so is worth building)."""
        if len(self._heap) < self.limit:
            return True
        worst = self._heap[0]
        return rank < (-worst[0], -worst[1])

    def add(self, rank: tuple[int, float], design: Design) -> None:
        """Keep ``design`` (of ``rank``) if it is new and near enough."""
        key = values_key(design)
        if key in self._keys or not self.admits(rank):
            return
        self._keys.add(key)
        heapq.heappush(self._heap, (-rank[0], -rank[1], -next(self._seq), key, rank, design))
        if len(self._heap) > self.limit:
            self._keys.discard(heapq.heappop(self._heap)[3])

    def items(self) -> list[tuple[tuple[int, float], Design]]:
        """(rank, design), nearest first (then in the order they came)."""
        return [(e[4], e[5]) for e in sorted(self._heap, key=lambda e: (e[4], -e[2]))]

    def designs(self) -> list[Design]:
        """The designs, nearest first."""
        return [d for _, d in self.items()]

    def merge(self, items) -> None:
        """Take in (rank, design) pairs (another pool's :meth:`items`)."""
        for rank, d in items:
            self.add(rank, d)
