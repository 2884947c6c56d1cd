"""The single-stage requests a chain search puts to :func:`optimiser.search.search`:
the second stage (the follower) with its own divider bias, and the first stage
against the loads the followers' input impedances present (docs/search.md, "Chains").

Pure functions of the chain request; no I/O.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from optimiser.request import Request

__all__ = ["stage_request", "follower_request", "first_stage_requests", "load_bins",
           "GAIN_MARGIN_DB", "LOAD_BIN_RATIO"]

#: How far (dB) the first stage's gain window reaches beyond what the followers' gains
#: alone ask.
GAIN_MARGIN_DB = 1.0
#: Followers whose input impedances lie within this ratio share one first-stage search.
LOAD_BIN_RATIO = 2.0


def stage_request(chain: Request, kind: str, **changes) -> Request:
    """A single-stage request of topology ``kind`` derived from ``chain``: the
    chain-only keys cleared, every other key kept unless ``changes`` sets it."""
    base = dict(topology=kind, coupling=None, zout_max_ohm=None, min_yield_pct=None,
                yield_samples=None)
    base.update(changes)
    return replace(chain, **base)


def follower_request(chain: Request, kind: str, source_ohm: float) -> Request:
    """The second stage: the chain's load, ``source_ohm`` for the first stage's output
    impedance, driven with the input level times the chain's gain target (so that
    its own THD ceiling is judged at the level it will carry), no gain target of its
    own (the score's follower target applies), no Z_in target."""
    drive = chain.input_vpk * (chain.gain if chain.gain is not None else 1.0)
    return stage_request(chain, kind, source_ohm=float(source_ohm), gain=None,
                         zin_min_ohm=None, input_vpk=min(drive, chain.supply_v))


def first_stage_requests(chain: Request, kind: str, load_ohm: float,
                         follower_db) -> list[Request]:
    """The first stage into ``load_ohm`` (the middle of a band of the followers' input
    impedances), with no THD ceiling of its own (the chain's THD is judged whole), for
    followers of gains ``follower_db`` (dB, from the source they were searched from).

    Without a chain gain target, one request without one.  With it, two gain windows:
    the chain's target less the followers' median gain, its tolerance widened by their
    spread (the first stages a typical follower wants, ranked by their distance to
    it); and the wide window from target − tol (a follower's gain is below 0 dB,
    whatever its source) to target + tol − the least follower gain, each end widened
    by :data:`GAIN_MARGIN_DB` (a follower loses less from a lower source; the first
    stage's gain is taken at the middle of the band of loads)."""
    base = dict(load_ohm=float(load_ohm), thd_max_pct=None)
    if chain.gain is None:
        return [stage_request(chain, kind, **base)]
    g = np.asarray(follower_db, dtype=float)
    g = g[np.isfinite(g)]
    if g.size == 0:
        g = np.zeros(1)
    t, tol = chain.gain_db, chain.gain_tol_db
    med, least, most = float(np.median(g)), float(g.min()), float(g.max())
    typical = stage_request(chain, kind, gain=10.0 ** ((t - med) / 20.0),
                            gain_tol_db=tol + (most - least), **base)
    lo = t - tol - GAIN_MARGIN_DB
    hi = t + tol - min(least, 0.0) + GAIN_MARGIN_DB
    wide = stage_request(chain, kind, gain=10.0 ** ((lo + hi) / 40.0),
                         gain_tol_db=(hi - lo) / 2.0, **base)
    return [typical, wide]


def load_bins(zin_ohm, ratio: float = LOAD_BIN_RATIO) -> list[tuple[float, list[int]]]:
    """The followers grouped by input impedance: runs of Z_in within ``ratio`` (by
    default :data:`LOAD_BIN_RATIO`) of the run's least, each as (geometric middle,
    indices)."""
    z = [(float(x), i) for i, x in enumerate(zin_ohm)
         if x is not None and math.isfinite(x) and x > 0]
    z.sort()
    bins: list[tuple[float, list[int]]] = []
    lo = None
    for x, i in z:
        if lo is None or x > lo * ratio:
            lo = x
            bins.append((x, [i]))
        else:
            bins[-1][1].append(i)
    out = []
    for first, idx in bins:
        last = max(float(zin_ohm[i]) for i in idx)
        out.append((math.sqrt(first * last), idx))
    return out
