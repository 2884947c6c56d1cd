"""Sizes of the blocks the levels of a job are cut into, and the index helpers the
levels share."""

from __future__ import annotations

import numpy as np

from inventory.parts import Transistor
from optimiser.request import Request

#: About this many (pair × emitter run) bounds per block of (R1, R2) pairs, the
#: top level's heap entry: larger blocks vectorise better, smaller ones follow the
#: best-first order (and share out between processes) more finely.
CHUNK = 400_000
#: The finest run of DC emitter totals bounded as one before the single bias nodes:
#: shorter runs bound tighter but cost more bound evaluations.
TOTALS_BLOCK = 8
#: Each surviving run of emitter options is split in this many (4: CPU of the E96
#: searches with the final score to beat ce 22 -> 19 s, cb 3.0 -> 2.7 s against 8).
SPAN_BLOCKS = 4
#: Runs of emitter options at least this wide are bounded when their pair block is
#: expanded; the finer runs (down to TOTALS_BLOCK) only when their block of runs is
#: taken from the heap, so that runs the score to beat drops first are never split
#: (one process, E96 drawer, minimal ce: CPU 12.3 -> 7.1 s against refining eagerly).
EAGER_RUN = 32
#: Relative width of the bins of DC emitter totals the options are sorted in.
TOTAL_BIN = 0.05


def _corner_points(request: Request, t: Transistor):
    temps = sorted(set(float(x) for x in request.temp_c))
    betas = sorted({float(t.hfe_min), float(t.hfe_max)})
    return [(tc, b) for tc in temps for b in betas]


def _expand(counts: np.ndarray):
    """(repeat index, offset within its block) for blocks of the given sizes."""
    rep = np.repeat(np.arange(counts.size), counts)
    offs = np.arange(rep.size) - np.repeat(np.cumsum(counts) - counts, counts)
    return rep, offs
