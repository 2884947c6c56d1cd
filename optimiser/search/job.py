"""One transistor type and one form: the levels of the search tree.

The level pieces are mixins of :class:`_Job`: (R1, R2) pairs and bias nodes
(:mod:`.pairs`), the f_low floors from the stocked capacitors
(:mod:`.f_low_floors`), the emitter spans' bounds (:mod:`.emitter`) and the
collector candidates down to skeletons (:mod:`.collector`)."""

from __future__ import annotations

import math

import numpy as np

from inventory.parts import Transistor
from optimiser.device import device_from_transistor
from optimiser.options import StockOptions
from optimiser.prune import early_bounds
from optimiser.request import Request
from optimiser.search.bounds import DRIFT_REL_SLACK
from optimiser.search.collector import CollectorLevel
from optimiser.search.emitter import EmitterSpans
from optimiser.search.f_low_floors import FLowFloors
from optimiser.search.levels import CHUNK, SPAN_BLOCKS, TOTALS_BLOCK, _corner_points
from optimiser.search.limits import gain_window
from optimiser.search.pairs import PairLevel
from optimiser.search.stock import stock_units
from optimiser.stages import module
from optimiser.stages.base import base_held


class _Job(PairLevel, FLowFloors, EmitterSpans, CollectorLevel):
    """One transistor type and one form: the levels of the search tree.

    pairs (R1, R2) → bias nodes (pair × DC emitter total) → collector
    candidates (emitter split × RC) → skeletons.  Each ``expand_*`` returns
    children with a lower bound of the score of every design below them
    (docs/search.md, bounds B1–B6).
    """

    def __init__(self, request: Request, opts: StockOptions, t: Transistor, form, stats: dict,
                 cache: dict | None = None):
        self.request, self.opts, self.t, self.form, self.stats = request, opts, t, form, stats
        self.topo = request.topology
        # what the topology gives the search, looked up once per job (optimiser/stages/base.py)
        self.mod = module(self.topo)
        self.rules = self.mod.SEARCH
        # which gain, distortion and floor lemmas bound this topology (docs/search.md)
        self.law = self.rules.gain_law
        # driven at the emitter with the base held at AC ground (cb): C_IN sees RE‖Z_e
        self.emitter_input = self.mod.INPUT == "emitter" and base_held(self.mod)
        self.V = V = float(request.supply_v)
        self.model = model = device_from_transistor(t)
        rv = self.rv = opts.resistor.values
        rbest = opts.resistor.best_rating
        self.win = gain_window(request)
        self.loop_need, self.rc_need = self._f_low_needs()
        # what does not depend on the transistor is built once per search (``cache``)
        cache = {} if cache is None else cache
        if "pairs" not in cache:
            cache["pairs"] = self._pairs()
        self.R1, self.R2, self.vth, self.rth, self.plb, pruned = cache["pairs"]
        self.count("pairs", pruned)
        if ("options", form) not in cache:
            cache[("options", form)] = self._options(form)
        (self.re_a, self.byp_a, self.etot, self._sorted, self._tables, self.re_vals,
         self._re_idx, self._re_keys) = cache[("options", form)]
        if "stock" not in cache:
            cache["stock"] = stock_units(self.opts, self.rv)
        self.units, self.maxq, self.virtual = cache["stock"]
        self.tb = TOTALS_BLOCK if self.etot.size > 4 * TOTALS_BLOCK else 1
        self.q_lo, self.q_hi = early_bounds(V, model)
        self.corners = _corner_points(request, t)
        # the bias current rises with the temperature and with β, so every corner's
        # current lies between those of the (coldest, β_min) and (hottest, β_max)
        # corners, and so does its distance from any value between them: the drift
        # bound needs only these two
        self.drift_corners = [self.corners[0], self.corners[-1]]
        self.rel = DRIFT_REL_SLACK * (V + 1.0) / model.vaf if math.isfinite(model.vaf) else 0.0
        # an optional RC (a follower's) may also be absent: 0 before every value
        rc_required = "RC" in self.mod.REQUIRED
        self.rc_optional = not rc_required
        self.rc_vals = rv if rc_required else np.concatenate([[0.0], rv])
        self.rc_best = rbest if rc_required else np.concatenate([[np.inf], rbest])
        self.t_empty = float(t.qty - request.builds <= 0 and (t.id is None or t.id >= 0))
        # B2, the drift: three closed-form solves; where the topology says so
        # (``SEARCH.drift_first``) first, before even the top of the current bracket
        # (:meth:`_span_dc`), else last, after the topology's own cheaper bounds
        self.drift_first = self.rules.drift_first
        # B25 (the ce THD floor) at the collector candidates: set by the branch and
        # bound while it may drop designs unpooled (tree._thd_cut, a design found)
        self.thd_cut_on = False

    @property
    def live(self) -> bool:
        """Whether any (R1, R2) pair and any emitter option is left to search."""
        return bool(self.R1.size and self.etot.size)

    def count(self, key, n):
        pr = self.stats["pruned"]
        pr[key] = pr.get(key, 0) + int(n)

    def run_span(self, key: str, a, width: int):
        """Least and largest of ``key`` ("tot": DC emitter total, "re": unbypassed
        RE) over the aligned runs of emitter options a .. a + width − 1 (``a`` a
        multiple of ``width``; the last run may be shorter)."""
        x = self.etot if key == "tot" else self.re_a
        if self._sorted[key]:
            return x[a], x[np.minimum(np.asarray(a) + width, x.size) - 1]
        t = self._tables[key].get(width)
        if t is None:
            starts = np.arange(0, x.size, width)
            t = (np.minimum.reduceat(x, starts), np.maximum.reduceat(x, starts))
            self._tables[key][width] = t
        k = np.asarray(a) // width
        return t[0][k], t[1][k]

    def largest_re_below(self, a, width: int, cap) -> np.ndarray:
        """Largest unbypassed RE at most ``cap`` among the emitter options of the
        aligned runs ``a .. a + width − 1`` (NaN where there is none).

        One sorted key array per run width (run number × |RE values| + RE rank)
        answers every query with one ``searchsorted``.
        """
        m = self.re_vals.size + 1
        keys = self._re_keys.get(width)
        if keys is None:
            keys = np.sort(np.arange(self.re_a.size) // width * m + self._re_idx)
            self._re_keys[width] = keys
        run = np.asarray(a) // width
        cap = np.minimum(np.asarray(cap, dtype=float), 1e300) * (1 + 1e-12)
        ci = np.searchsorted(self.re_vals, cap, side="right") - 1
        pos = np.searchsorted(keys, run * m + ci, side="right") - 1
        hit = (ci >= 0) & (pos >= 0)
        k = keys[np.maximum(pos, 0)]
        hit &= k // m == run
        return np.where(hit, self.re_vals[k % m], np.nan)

    def pair_blocks(self):
        nb = min(-(-self.etot.size // self.tb), SPAN_BLOCKS)     # widest spans per pair
        step = max(1, CHUNK // (8 * nb))
        for s in range(0, self.R1.size, step):
            yield float(self.plb[s]), np.arange(s, min(s + step, self.R1.size))
