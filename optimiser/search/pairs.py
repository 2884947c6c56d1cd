"""The first levels of a job: (R1, R2) pairs, their blocks and the bias nodes
(pair × DC emitter total) with the DC bounds B1, B2, B4, B5."""

from __future__ import annotations

import math

import numpy as np

from optimiser.dc import thevenin
from optimiser.device import thermal_voltage
from optimiser.options import RESISTOR_DERATING
from optimiser.prune import bias_current, early_factor_max
from optimiser.search.bounds import (
    DRIFT_ABS_SLACK,
    DRIFT_BOUND_CAP_PCT,
    GAIN_BOUND_MARGIN,
    IC_MIN_MARGIN,
    current_term,
    distortion_term,
    drift_term,
)
from optimiser.search.levels import EAGER_RUN, SPAN_BLOCKS, TOTAL_BIN
from optimiser.search.skeletons import _emitter_options
from optimiser.stages.base import DEGENERATED, EMITTER_DRIVEN, FOLLOWER


class PairLevel:
    """(R1, R2) pairs and bias nodes of :class:`~optimiser.search.job._Job`."""

    def _pairs(self):
        """(R1, R2, V_TH, R_TH, bound, pairs pruned): the (R1, R2) pairs the ratings
        allow, sorted by their bound (B4, B5; B13 for a follower)."""

        V, rv, rbest = self.V, self.rv, self.opts.resistor.best_rating
        i1, i2 = np.meshgrid(np.arange(rv.size), np.arange(rv.size), indexing="ij")
        i1, i2 = i1.ravel(), i2.ravel()
        R1, R2 = rv[i1], rv[i2]
        vth, rth = thevenin(V, R1, R2)
        # B4: R1 dissipates at least (V − V_TH)²/R1 because V_B ≤ V_TH
        keep = (V - vth) ** 2 / R1 <= RESISTOR_DERATING * rbest[i1] * (1 + 1e-9)
        pruned = int((~keep).sum())
        R1, R2, vth, rth = R1[keep], R2[keep], vth[keep], rth[keep]
        # B20: C_IN's f_low floor needs R_S + R_TH (ce, cc)
        keep = self._f_low_pairs(rth)
        self.count("f_low_input", (~keep).sum())
        R1, R2, vth, rth = R1[keep], R2[keep], vth[keep], rth[keep]
        # B5: the divider current alone costs its current term
        plb = current_term(V / (R1 + R2))
        o = np.argsort(plb, kind="stable")
        R1, R2, vth, rth, plb = R1[o], R2[o], vth[o], rth[o], plb[o]
        if self.law == FOLLOWER:
            # B13 at the pair: the divider alone caps a follower's gain
            self.rth = rth
            short = self._gain_shortfall(self._follower_gain_max(np.arange(R1.size)))
            keep = np.isfinite(short)
            pruned += int((~keep).sum())
            plb = plb[keep] + short[keep]
            o = np.argsort(plb, kind="stable")
            R1, R2, vth, rth = (x[keep][o] for x in (R1, R2, vth, rth))
            plb = plb[o]
        return R1, R2, vth, rth, plb, pruned

    def _options(self, form):
        """The emitter options (RE, RE_BYP) of ``form``, sorted by the DC total (B7)
        and then RE, with what the span queries need.  Each option is a bias node of
        its own, so that its unbypassed RE is known (bounds B6, B14, B15)."""
        re_a, byp_a = _emitter_options(self.topo, form, self.rv)
        keep = self._f_low_options(re_a + byp_a)       # B20 (cb: C_IN, cc: C_OUT)
        self.count("f_low_emitter", (~keep).sum())
        re_a, byp_a = re_a[keep], byp_a[keep]
        tot = re_a + byp_a
        bins = np.floor(np.log(np.maximum(tot, 1e-300)) / math.log1p(TOTAL_BIN))
        o = np.lexsort((tot, re_a, bins))
        re_a, byp_a = re_a[o], byp_a[o]
        etot = re_a + byp_a
        # where a key is sorted a run's ends are its least and largest; elsewhere
        # per-run tables, made for each run width when first asked (run_span)
        srt = {k: bool(np.all(np.diff(x) >= 0)) for k, x in (("tot", etot), ("re", re_a))}
        tables = {"tot": {}, "re": {}}
        re_vals, re_idx = np.unique(re_a, return_inverse=True)
        return re_a, byp_a, etot, srt, tables, re_vals, re_idx, {}

    def _bounds(self, P, r_small, r_big, upper: float, re_bounds=None, dc=None):
        """Bounds for pair P with DC emitter totals anywhere in [r_small, r_big].

        I_C falls and V_E·I_C-stability rises with the emitter resistance
        (B7), so the smallest current and drift are those at ``r_big`` and the
        largest current the one at ``r_small``.  The bounds are taken in order
        of cost, each on the nodes the earlier ones left: those of the total alone
        (:meth:`_span_dc`: current, for ce the drift and the junction floor), then
        the topology's own terms, then (cb, cc) the drift.  ``re_bounds`` =
        (least, largest) unbypassed RE over the span and the span as
        (start, width) of an aligned run of emitter options (ce).  ``dc``: what :meth:`_span_dc` gave for these
        pairs over a span of totals holding this one (the forms of a ce search
        share it at their first level).  Returns (ok, ic_lo, ic_hi, d_lb, nlb)
        over all of ``P``; entries not ok hold nlb = inf.
        """

        model, V = self.model, self.V
        n = P.size
        r_small = np.broadcast_to(np.asarray(r_small, dtype=float), (n,))
        r_big = np.broadcast_to(np.asarray(r_big, dtype=float), (n,))
        nlb = np.full(n, np.inf)
        if dc is None:
            dc = self._span_dc(P, r_small, r_big, upper)
        s, lb_s, ic_lo, ic_hi, ve_lo, q_top, d_lb, fl = dc
        if s.size == 0:
            return np.zeros(n, dtype=bool), ic_lo, ic_hi, d_lb, nlb
        v_th, r_th = self.vth[P], self.rth[P]
        if self.law == DEGENERATED:
            # B6 and B14: what the unbypassed RE allows of gain and distortion
            e = self._emitter_terms(P[s], ic_lo[s], ic_hi[s], ve_lo[s],
                                    re_bounds[0][s], re_bounds[1][s], lb_s, upper,
                                    re_bounds[2][s], re_bounds[3])
            keep = lb_s + e < upper
            s, lb_s, e = s[keep], lb_s[keep], e[keep]
            if fl is not None:
                fl = fl[keep]
            if self.win is None or s.size == 0:
                lb_s = lb_s + e
        if s.size and self.law == EMITTER_DRIVEN:
            # B16: the distortion of a common-base stage is set by I_C and RE; B15:
            # the collector drop its gain needs, against the headroom
            e = self._cb_hd2(ic_hi[s], r_small[s], r_big[s])
            if self.win is not None:
                # (B16 alone first: it is the cheaper, and it discards most)
                keep = lb_s + e < upper
                s, lb_s, e = s[keep], lb_s[keep], e[keep]
                with np.errstate(divide="ignore"):
                    zper = 1.0 / self._cb_per_z(ic_hi[s], r_big[s])
                e = e + self._gain_headroom(zper, ic_lo[s], ve_lo[s])
            keep = lb_s + e < upper
            s, lb_s, e = s[keep], lb_s[keep], e[keep]
            if self.win is None or s.size == 0:
                lb_s = lb_s + e
        # B8: a gain G needs a junction drive v_be ≥ G·v_in·V_T/(I_C·R) with
        # I_C·R ≤ min(I_C·R_L, V − vce_sat), so HD2 ≥ 25 %·G·v_in/min(...)
        if s.size and self.win is not None and self.law in (DEGENERATED, EMITTER_DRIVEN):
            room = np.full(s.size, V - model.vce_sat)
            if self.request.load_ohm:
                room = np.minimum(room, ic_hi[s] * self.request.load_ohm)
            rdeg = re_bounds[1][s] if self.law == DEGENERATED \
                else float(self.request.source_ohm or 0.0)
            with np.errstate(divide="ignore", invalid="ignore"):
                h = distortion_term(
                    25.0 * self.win[0] * self.request.input_vpk / room / GAIN_BOUND_MARGIN / (
                        1.0 + ic_hi[s] * rdeg / thermal_voltage(25.0)))
            h = np.nan_to_num(h, nan=np.inf, posinf=np.inf)
            h = np.maximum(h, e)
            if fl is not None:          # (B12, above)
                h = np.maximum(h, fl)
            lb_s = lb_s + h
            keep = lb_s < upper
            s, lb_s = s[keep], lb_s[keep]
        if not self.drift_first:
            s, lb_s = self._drift_stage(s, lb_s, v_th, r_th, r_big, q_top, d_lb, upper)
        if s.size == 0:
            return np.zeros(n, dtype=bool), ic_lo, ic_hi, d_lb, nlb
        nlb[s] = lb_s
        ok = nlb < upper
        return ok, ic_lo, ic_hi, d_lb, nlb

    def _span_dc(self, P, r_small, r_big, upper: float):
        """The bounds of pairs ``P`` that depend on the emitter total only, over
        totals in [``r_small``, ``r_big``]: the current bracket (B1, B5), the least
        emitter voltage (B19), the top Early factor, for ce the drift (B2) and the
        junction floor (B12), for cc B13 and B17.  Returns (s, lb_s, ic_lo, ic_hi,
        ve_lo, q_top, d_lb, fl): the nodes still under ``upper`` and their bound so
        far, the arrays over all of ``P``, and B12 over ``s`` (None without it).
        """

        model, V = self.model, self.V
        n = P.size
        r_small = np.broadcast_to(np.asarray(r_small, dtype=float), (n,))
        r_big = np.broadcast_to(np.asarray(r_big, dtype=float), (n,))
        ic_lo, ic_hi, d_lb = np.zeros(n), np.zeros(n), np.zeros(n)
        v_th, r_th = self.vth[P], self.rth[P]
        # B1: I_C lies between its values at the extreme Early factors
        ic_lo[:] = bias_current(v_th, r_th, r_big, model, 25.0, None, self.q_lo)
        lb = current_term(V / (self.R1[P] + self.R2[P]) + ic_lo)          # B5
        s = np.flatnonzero((ic_lo <= model.ic_max * (1 + 1e-9)) & (lb < upper))
        if s.size == 0:
            return s, lb[s], ic_lo, ic_hi, ic_lo * r_small, None, d_lb, None
        # the emitter voltage V_E = I_E·R = V_TH − V_BE − I_B·R_TH grows with the
        # emitter total R (V_BE and I_B fall), so over the span it is least at
        # r_small: at least I_C,lo(r_small)·r_small (B19; much above I_C,lo(r_big)·r_small
        # on runs of options)
        ve_lo = ic_lo * r_small
        wide = s[r_small[s] < r_big[s]]
        if wide.size:
            ve_lo[wide] = bias_current(v_th[wide], r_th[wide], r_small[wide], model, 25.0, None,
                                       self.q_lo) * r_small[wide]
        keep = self._f_low_headroom(ic_lo[s], ve_lo[s])         # B20 with B3
        self.count("f_low_output", (~keep).sum())
        s = s[keep]
        # the top of the bracket at the largest Early factor this span allows
        # (the emitter takes a part of the supply: early_factor_max)
        q_top = np.zeros(n)
        q_top[s] = early_factor_max(V, ic_lo[s], r_small[s], model, self.q_hi, ve_lo=ve_lo[s])
        lb_s = lb[s]
        if self.drift_first:        # (B2: ce only, see __init__)
            s, lb_s = self._drift_stage(s, lb_s, v_th, r_th, r_big, q_top, d_lb, upper)
        ic_hi[s] = bias_current(v_th[s], r_th[s], r_small[s], model, 25.0, None, q_top[s])
        if self.request.ic_min_a is not None:
            # the least-current target (docs/answers.md): the nominal I_C is at most the
            # top of the bracket (B1), so a span whose top is below ic_min_a holds none
            keep = ic_hi[s] * IC_MIN_MARGIN >= self.request.ic_min_a
            self.count("ic_min", int((~keep).sum()))
            s, lb_s = s[keep], lb_s[keep]
        if self.law == FOLLOWER:
            # B13: a follower's gain is at most k_in·A_f, the divider's share of the
            # source (Z_in ≤ R_TH) times RE‖RL over r_e + RE‖RL
            g_hi = self._follower_gain_max(P[s], r_big[s], ic_hi[s])
            lb_s = lb_s + self._gain_shortfall(g_hi)
            keep = lb_s < upper
            s, lb_s = s[keep], lb_s[keep]
            if s.size:      # B17: the follower's distortion, gain excess and headroom
                lb_s = lb_s + self._follower_terms(P[s], ic_lo[s], ic_hi[s], r_small[s],
                                                   r_big[s], ve_lo[s])
                keep = lb_s < upper
                s, lb_s = s[keep], lb_s[keep]
        fl = None
        if s.size and self.law == DEGENERATED and self.win is not None:
            # B12: gain, distortion and headroom together, over every RC and split
            # (ce only: for cb, B16 and B15 already hold nearly all of it — measured
            # again with B12 in closed form: a fifth fewer nodes, 5 % more time).  In
            # closed form it is cheap, so on every level and before the emitter terms
            # (against after them and only on runs of 128–8192 emitter options, E96 ce:
            # CPU 7.5 s against 8.7 s, three interleaved runs)
            fl = self._floor(P[s], ic_lo[s], ic_hi[s], ve_lo[s])
            keep = lb_s + fl < upper
            s, lb_s, fl = s[keep], lb_s[keep], fl[keep]
        return s, lb_s, ic_lo, ic_hi, ve_lo, q_top, d_lb, fl

    def _drift_stage(self, s, lb_s, v_th, r_th, r_big, q_top, d_lb, upper):
        """B2 on the nodes ``s`` whose bound so far is ``lb_s``: fills ``d_lb[s]``
        and returns the nodes (and their bounds) still under ``upper`` and within
        the drift target."""
        model = self.model
        # the drift at a common Early factor, the highest (the most feedback, so the
        # least drift), with a margin for the factor's spread between the corners
        vs, rs_, rb = v_th[s], r_th[s], r_big[s]
        q_d = q_top[s]              # (from the current at the least Early factor: B2 tested so)
        ic_mid = bias_current(vs, rs_, rb, model, 25.0, None, q_d)
        d = np.zeros_like(ic_mid)
        for tc, b in self.drift_corners:
            icc = bias_current(vs, rs_, rb, model, tc, b, q_d)
            with np.errstate(divide="ignore", invalid="ignore"):
                d = np.maximum(d, np.abs(icc - ic_mid) / ic_mid * 100.0)
        d = np.nan_to_num(d, nan=0.0, posinf=np.inf)
        d_lb[s] = np.clip(d * (1.0 - self.rel) - DRIFT_ABS_SLACK, 0.0, DRIFT_BOUND_CAP_PCT)
        lb_s = lb_s + drift_term(d_lb[s])
        keep = lb_s < upper
        if self.request.ic_drift_max_pct is not None:
            keep &= d_lb[s] <= self.request.ic_drift_max_pct
        return s[keep], lb_s[keep]

    def run_widths(self) -> tuple[list[int], list[int]]:
        """The widths of the runs of emitter options, widest first: (those bounded
        when a pair block is expanded, those bounded when a block of runs is taken
        from the heap).  Every width is TOTALS_BLOCK·SPAN_BLOCKS^k; the eager ones
        are those of at least EAGER_RUN options (always the widest), the lazy ones
        the rest, down to TOTALS_BLOCK."""
        n = self.etot.size
        widths = [self.tb]
        while widths[0] < n:
            widths.insert(0, widths[0] * SPAN_BLOCKS)
        k = max(1, sum(w >= EAGER_RUN for w in widths))
        return widths[:k], widths[k:]

    def refine_runs(self, P, a, span: int, widths, upper: float, dc=None):
        """Aligned runs of emitter options ``a .. a + span − 1`` of the pairs ``P``
        split coarse to fine through ``widths`` (each run in runs of the next width,
        the same bounds at every width), keeping those under ``upper``.  ``dc``:
        the DC bounds of ``P`` over a span of totals holding each run, for the first
        width.  Returns (P, a, b, lb) of the runs of the last width (b inclusive)."""
        n = self.etot.size
        b = np.minimum(a + span, n) - 1
        lb = np.zeros(P.size)
        for i, width in enumerate(widths):
            k = -(-span // width)                 # pieces of each surviving span
            a = np.repeat(a, k) + np.tile(np.arange(k) * width, P.size)
            P = np.repeat(P, k)
            live = a < n
            P, a = P[live], a[live]
            b = np.minimum(a + width, n) - 1
            ok, _, _, _, lb = self._bounds(P, *self.run_span("tot", a, width), upper,
                                           (*self.run_span("re", a, width), a, width),
                                           dc if i == 0 else None)
            self.count("bias_blocks", (b - a + 1)[~ok].sum())
            P, a, b, lb = P[ok], a[ok], b[ok], lb[ok]
            span = width
        return P, a, b, lb

    def expand_pairs(self, p: np.ndarray, upper: float, dc=None):
        """Blocks of emitter totals for the pairs ``p``, sorted by their bound.

        Runs of emitter options are bounded coarse to fine — runs of
        TOTALS_BLOCK·SPAN_BLOCKS^k options, the widest first (one run holding
        every option of the form), each surviving run split in SPAN_BLOCKS — down
        to runs of EAGER_RUN; the finer ones when the block is taken
        (:meth:`expand_blocks`).  ``dc``: the DC bounds of ``p`` over a span of
        totals holding every option of the form (:meth:`span_dc_of`), taken for
        the first level.
        """
        eager, _ = self.run_widths()
        P, a, b, lb = self.refine_runs(p, np.zeros(p.size, dtype=int), self.etot.size, eager,
                                       upper, dc)
        o = np.argsort(lb, kind="stable")
        return P[o], a[o], b[o], lb[o]

    def span_dc_of(self, p: np.ndarray, upper: float, jobs) -> tuple:
        """:meth:`_span_dc` of the pairs ``p`` over every emitter total of
        ``jobs`` (the forms of this transistor): one computation that each form's
        first level takes — its own span lies inside, and each bound there is
        monotone in the span's ends (B7, B19), so it stays a lower bound."""
        lo = min(float(j.etot.min()) for j in jobs)
        hi = max(float(j.etot.max()) for j in jobs)
        return self._span_dc(p, np.full(p.size, lo), np.full(p.size, hi), upper)
