"""The last levels of a job: bias nodes → collector candidates (emitter split ×
RC) → skeletons with their score bound."""

from __future__ import annotations

import math

import numpy as np

from optimiser.ac import small_signal
from optimiser.ce_thd_bounds import ce_thd_floor
from optimiser.dc import solve_bias
from optimiser.device import thermal_voltage
from optimiser.f_high_bounds import F_HIGH_VCE_MIN, collector_conductance_max, f_high_ceiling
from optimiser.options import RESISTOR_DERATING
from optimiser.prune import ce_input_divider_max, midband_estimate
from optimiser.score import degeneration, hd2_pct, score_gain_target, score_terms
from optimiser.search.bounds import (
    GAIN_BOUND_MARGIN,
    GAIN_SLACK_DB,
    HIGH_GAIN_SLACK_DB,
    LEAST_GAIN_MARGIN,
    current_term,
    distortion_term,
    drift_term,
    stock_term,
)
from optimiser.search.levels import _expand
from optimiser.search.skeletons import SHORT_F, Skeletons
from optimiser.search.thd_floor import applies as thd_floor_applies
from optimiser.search.thd_floor import floor_proven, floor_proven_range, leaves_active_at_peaks
from optimiser.stage import StageBatch
from optimiser.stages.base import DEGENERATED, EMITTER_DRIVEN


class CollectorLevel:
    """Collector candidates of :class:`~optimiser.search.job._Job`."""

    def _f_high_on(self) -> bool:
        """Whether B23 applies: an f_high target, a gain window, the output at the
        collector (ce, cb) and a transistor with ft and cob (else no f_high)."""
        r, m = self.request, self.model
        return (r.f_high_min_hz is not None and self.win is not None
                and self.law in (DEGENERATED, EMITTER_DRIVEN) and m.has_ft and m.has_cob
                and m.cjc > 0)

    def _ce_thd_missed(self, P, r1, r2, rc, re, byp, op, good) -> np.ndarray:
        """True for the collector candidates among ``good`` that B25 proves miss the THD
        target: the engine's transfer at the peaks, then the reduced-loop floor.  Each
        is taken only where a rough estimate says it may decide (skipping a check only
        keeps a candidate): the peaks where the collector's drop at the positive peak,
        at most (R' + r_e)·I_C0·(e^a − 1) in the reduced loop, may come within twice
        its size of vce_sat, or the drive may cut the current off (a > 4); the floor
        where the no-feedback estimate 150 %·a/(4(1 + g_b + g_e)²) of the second
        harmonic reaches the ceiling."""
        request, model, topo = self.request, self.model, self.topo
        out = np.zeros(good.shape, dtype=bool)
        g = np.flatnonzero(good)
        rs = float(request.source_ohm or 0.0)
        rth = self.rth[P[g]]
        rl = rc[g] if not request.load_ohm else rc[g] * request.load_ohm / (rc[g] + request.load_ohm)
        a = rth / (rth + rs) * request.input_vpk / op.vt[g]
        drop = (rl + re[g]) * op.ic[g] * np.expm1(a)
        near = (op.vce[g] - model.vce_sat < 2.0 * drop + 0.05) | (a > 4.0)
        p = g[near]
        if p.size:
            b = StageBatch.from_values(topo, R1=r1[p], R2=r2[p], RC=rc[p], RE=re[p],
                                       RE_BYP=byp[p], C_BYP=np.where(byp[p] > 0, SHORT_F, 0.0),
                                       C_IN=SHORT_F, C_OUT=SHORT_F)
            hit = leaves_active_at_peaks(request, b, model, op.take(p))
            self.count("thd_peaks", hit.sum())
            out[p[hit]] = True
        loop = 1.0 + (re[g] * op.ic[g] + (re[g] + rth * rs / (rth + rs)) * op.ib[g]) / op.vt[g]
        f = g[~out[g] & (150.0 * a / (4.0 * loop ** 2) >= request.thd_max_pct)]
        if f.size:
            gone = self._ce_thd_floor(P[f], re[f], rc[f], op.take(f)) > request.thd_max_pct
            self.count("thd_floor_ce", gone.sum())
            out[f[gone]] = True
        return out

    def _ce_thd_floor(self, P, re, rc, op) -> np.ndarray:
        """B25 (:func:`optimiser.ce_thd_bounds.ce_thd_floor`) of ce collector candidates
        (pairs ``P``, unbypassed RE ``re`` — the AC emitter resistance of every ce
        form, RE_BYP being bypassed where present — collector resistors ``rc``) at
        their exact nominal operating point ``op``."""
        request, model = self.request, self.model
        rs = float(request.source_ohm or 0.0)
        rth = self.rth[P]
        rl = rc if not request.load_ohm else rc * request.load_ohm / (rc + request.load_ohm)
        return ce_thd_floor(request.input_vpk, op.vt, op.ic, op.ib, op.vce, op.vce - op.vbe,
                            rth / (rth + rs), rth * rs / (rth + rs), re, rl, model.vaf,
                            model.vce_sat)

    def expand_blocks(self, P, a, b, upper: float):
        """Bias nodes (pair × each total of its block), sorted by their bound.

        Runs wider than TOTALS_BLOCK (those :meth:`expand_pairs` left unsplit) are
        first split down to it with the same bounds (:meth:`refine_runs`)."""
        eager, lazy = self.run_widths()
        if lazy and P.size:
            P, a, b, _ = self.refine_runs(P, a, eager[-1], lazy, upper)
        cnt = b - a + 1
        rep, offs = _expand(cnt)
        P, E = P[rep], a[rep] + offs
        self.stats["bias_nodes"] = self.stats.get("bias_nodes", 0) + int(P.size)
        r, re = self.etot[E], self.re_a[E]
        ok, ic_lo, ic_hi, d_lb, nlb = self._bounds(P, r, r, upper, (re, re, E, 1))
        self.count("bias", (~ok).sum())
        P, E, ic_lo, ic_hi, d_lb, nlb = P[ok], E[ok], ic_lo[ok], ic_hi[ok], d_lb[ok], nlb[ok]
        o = np.argsort(nlb, kind="stable")
        return P[o], E[o], np.stack([ic_lo[o], ic_hi[o]]), d_lb[o], nlb[o]

    def expand_nodes(self, P, E, ic, d_lb, upper: float):
        """Collector candidates of bias nodes: a :class:`Skeletons` chunk with bounds."""

        model, V, request, topo = self.model, self.V, self.request, self.topo
        ic_lo, ic_hi = ic[0], ic[1]
        REv, BYv = self.re_a[E], self.byp_a[E]
        # B3: V_CE ≥ vce_sat needs RC ≤ (V − I_E·R_E − vce_sat)/I_C, with I_C ≥ ic_lo
        ve_lo = ic_lo * (REv + BYv)
        rc_max = self._rc_max(ic_lo, ve_lo)
        nrc = np.searchsorted(self.rc_vals, rc_max * (1 + 1e-9), side="right")
        self.count("headroom", (self.rc_vals.size - nrc).sum())
        if self.rc_optional:
            # a follower's collector resistor (optional) only where the transistor would
            # otherwise dissipate more than its pd (docs/search.md)
            few = np.minimum(nrc, 1)
            need = self._cc_needs_rc(P, REv + BYv)
            self.count("cc_collector_rule", (nrc - few)[~need].sum())
            nrc = np.where(need, nrc, few)
        # B6: gain ≤ (RC‖RL)/(V_T/I_C + RE) (ce) or g_m·(RC‖RL) (cb), with a 20 % margin.
        # Once a score to beat is known, the gain term alone confines the gain to
        # target·10^(±upper·tol/20) (B11), on both sides for ce.
        n0 = np.zeros_like(nrc)
        if self.win is not None and self.law in (DEGENERATED, EMITTER_DRIVEN):
            vt = thermal_voltage(25.0)
            g_lo, g_hi = self.win[0], self.win[1] * 10 ** (HIGH_GAIN_SLACK_DB / 20)
            if math.isfinite(upper):
                # B11 with each node's own slack: the gain term is below the score to
                # beat less the node's other terms (drift, current, distortion bounds)
                other = drift_term(d_lb) + current_term(V / (self.R1[P] + self.R2[P]) + ic_lo) \
                    + self._distortion_lb(P, ic_lo, ic_hi, REv)
                span = np.maximum(upper - other, 0.0) * request.gain_tol_db / 20.0 \
                    + GAIN_SLACK_DB / 20.0
                with np.errstate(over="ignore"):    # a span past 10^308: no limit
                    g_lo = np.maximum(g_lo, request.gain / 10 ** span)
                    g_hi = np.minimum(g_hi, request.gain * 10 ** span)
            rl = request.load_ohm
            # the gain per ohm of collector load is at most that of _gain_head_at (B6;
            # ce: with the input divider and the feed-forward through C_μ at mid_hz,
            # cb: with the source against the emitter node), so Z' ≥ g_lo/per_z
            with np.errstate(divide="ignore", invalid="ignore"):
                x = g_lo / self._per_z(P, ic_lo, ic_hi, REv)
                rc_min = x if not rl else np.where(x < rl, x * rl / (rl - x), np.inf)
            rc_min = np.nan_to_num(rc_min, nan=np.inf)
            n0 = np.minimum(np.searchsorted(self.rc_vals, rc_min * (1 - 1e-9), side="left"), nrc)
            if self.law == DEGENERATED and rl:
                # B24 at the collector: the gain g_lo needs I_C·Z' ≥ Y_need, and
                # I_C·RC ≤ y_max (V_CE ≥ vce_sat), so y_max·R_L/(RC + R_L) ≥ Y_need:
                # RC ≤ R_L·(y_max/Y_need − 1); and I_C ≤ I_C,hi gives Z' ≥ Y_need/I_C,hi
                g_need = g_lo * 10 ** (-GAIN_SLACK_DB / 20.0)
                y_need = self._ce_swing_for(P, ic_lo, REv, g_need)
                y_max = np.maximum(V - ve_lo - model.vce_sat, 0.0)
                with np.errstate(divide="ignore", invalid="ignore"):
                    rc_b = np.nan_to_num(rl * (y_max / y_need - 1.0), nan=-1.0)
                    x = y_need / ic_hi
                    rc_a = np.where(x < rl, x * rl / (rl - x), np.inf)
                rc_a = np.nan_to_num(rc_a, nan=np.inf)
                n0 = np.minimum(np.maximum(n0, np.searchsorted(
                    self.rc_vals, rc_a * (1 - 1e-9), side="left")), nrc)
                nb = np.searchsorted(self.rc_vals, np.minimum(rc_b, 1e300) * (1 + 1e-9),
                                     side="right")
                self.count("gain_bound", np.maximum(nrc - np.maximum(nb, n0), 0).sum())
                nrc = np.maximum(np.minimum(nrc, nb), n0)
            self.count("gain_bound", n0.sum())
            # smallest gain a given RC can give, every factor at its least favourable
            # end — ce: k_in·β·Z'/(r_π + (β+1)·RE); cb: g_m·Z'·x/(R_S + x) with
            # x = RE‖r_e — so RC above the one reaching g_hi·margin gives too much gain
            b = float(self.t.beta_nominal)
            rs = float(request.source_ohm or 0.0)
            ro = (model.vaf - 1.0) / ic_hi if math.isfinite(model.vaf) else np.inf
            with np.errstate(divide="ignore", invalid="ignore"):
                if self.law == DEGENERATED:
                    rpi_max = b * self.q_hi * vt / ic_lo
                    rpi_min = b * self.q_lo * vt / ic_hi
                    rth = self.rth[P]
                    rin = rth * (rpi_min + (b + 1) * REv) / (rth + rpi_min + (b + 1) * REv)
                    k_in = rin / (rin + rs)
                    zmax = g_hi * LEAST_GAIN_MARGIN * (rpi_max + (b + 1) * REv) / (k_in * b)
                    # at mid_hz the input (Miller) and output poles can only lower the
                    # gain: by at most this factor for any load up to R_L or RC_max
                    zcap = np.minimum(rc_max, rl) if rl else rc_max
                    zmax = zmax * self._ce_slowdown(P, ic_hi, zcap)
                else:
                    re_min = vt / ic_hi * b / (b + 1.0)
                    x = REv * re_min / (REv + re_min)
                    zmax = g_hi * GAIN_BOUND_MARGIN * vt * (rs + x) / (ic_lo * x)
                inv = 1.0 / zmax - (1.0 / rl if rl else 0.0) - 1.0 / ro
                rc_top = np.where(inv > 0, 1.0 / np.where(inv > 0, inv, 1.0), np.inf)
            rc_top = np.minimum(np.nan_to_num(rc_top, nan=np.inf), 1e300)
            n1 = np.searchsorted(self.rc_vals, rc_top * (1 + 1e-9), side="right")
            self.count("gain_bound_high", np.maximum(nrc - np.maximum(n1, n0), 0).sum())
            nrc = np.maximum(np.minimum(nrc, n1), n0)
        if self._byp_floor:             # B20: the bypass shelf needs a collector load
            rc_b = self._f_low_bypass_rc(P, ic_lo, ic_hi, REv, BYv)
            nb = np.minimum(np.searchsorted(self.rc_vals, rc_b * (1 - 1e-9), side="left"), nrc)
            self.count("f_low_bypass", np.maximum(nb - n0, 0).sum())
            n0 = np.maximum(n0, nb)
        if self.emitter_input and self.loop_need > 0:     # B20: C_IN against RE‖Z_e
            gone = self._f_low_cb_input(REv + BYv, ic_lo, ic_hi, rc_max)
            self.count("f_low_input", (nrc - n0)[gone].sum())
            n0 = np.where(gone, nrc, n0)
        if self.rc_need > 0:            # B20: C_OUT's loop R_L + RC must reach its need
            nf = np.minimum(np.searchsorted(self.rc_vals, self.rc_need, side="left"), nrc)
            self.count("f_low_output", np.maximum(nf - n0, 0).sum())
            n0 = np.maximum(n0, nf)
        rep, offs = _expand(nrc - n0)
        if rep.size == 0:
            return None
        offs = offs + n0[rep]
        Pc = P[rep]
        REc, BYc, dlb = REv[rep], BYv[rep], d_lb[rep]
        RCc, RCbest = self.rc_vals[offs], self.rc_best[offs]
        # B5 and the drift, then B8/B12 with RC known, then the stock (B9, B10) — each
        # on the candidates the cheaper ones left, all before the exact DC point
        pre = drift_term(dlb) + current_term(V / (self.R1[Pc] + self.R2[Pc]) + ic_lo[rep])
        sel = np.flatnonzero(pre < upper)
        if sel.size and self.win is not None and self.law in (DEGENERATED, EMITTER_DRIVEN):
            rl = request.load_ohm
            rs_ = rep[sel]
            zc = RCc[sel] if not rl else RCc[sel] * rl / (RCc[sel] + rl)
            room = np.minimum(ic_hi[rs_] * zc, V - model.vce_sat)
            rdeg = degeneration(topo, REc[sel], request.source_ohm, request.load_ohm)
            with np.errstate(divide="ignore", invalid="ignore"):
                h = distortion_term(
                    25.0 * self.win[0] * request.input_vpk / room / GAIN_BOUND_MARGIN / (
                        1.0 + ic_hi[rs_] * rdeg / thermal_voltage(25.0)))
            h = np.nan_to_num(h, nan=np.inf, posinf=np.inf)
            # B12 at RC, the input divider that of the very RE (B6's k_up)
            floor = 0.0 if self.law != DEGENERATED else self._floor(
                Pc[sel], ic_lo[rs_], ic_hi[rs_], ic_lo[rs_] * (REc[sel] + BYc[sel]), rc=RCc[sel],
                k_in=ce_input_divider_max(ic_lo=ic_lo[rs_], r_th=self.rth[Pc[sel]], re_hi=REc[sel],
                                          source_ohm=request.source_ohm, model=model,
                                          q_hi=self.q_hi))
            if self.law == EMITTER_DRIVEN:            # B16 with RE known
                h = np.maximum(h, self._cb_hd2(ic_hi[rs_], REc[sel], REc[sel]))
            if self.law == DEGENERATED:            # B14 with RE and RC known
                h = np.maximum(h, self._junction_hd2(Pc[sel], ic_hi[rs_], REc[sel], zc))
            # the gain and headroom terms of this very RC (B6/B11 and B15 made exact
            # in RC), added to the distortion bounds; the junction floor stands apart
            h = np.maximum(floor, h + self._gain_head_at(
                Pc[sel], ic_lo[rs_], ic_hi[rs_], REc[sel], BYc[sel], RCc[sel]))
            pre[sel] += h
            sel = sel[pre[sel] < upper]
        self.count("score_bound_pre", Pc.size - sel.size)
        # B9: a value in k roles needs k pieces per copy (ratings aside)
        cols = [self.R1[Pc[sel]], self.R2[Pc[sel]], RCc[sel], REc[sel], BYc[sel]]
        st = np.full(sel.size, float(self.t_empty))
        ok = np.ones(sel.size, dtype=bool)
        for x in cols:
            k = (cols[0] == x).astype(int)
            for y in cols[1:]:
                k += (y == x)
            idx = np.clip(np.searchsorted(self.rv, x), 0, self.rv.size - 1)
            single = (x > 0) & (self.rv[idx] == x)
            short = single & (k > self.units[idx])
            self.count("stock", (short & ok).sum())
            ok &= ~short
            # B10: a value whose every row holds ≤ k·builds pieces empties a bin
            if not self.opts.allow_combos:
                must = single & (self.maxq[idx] <= k * self.request.builds) & ~self.virtual[idx]
                st = st + must / np.maximum(k, 1)
        st = stock_term(st)
        ok &= pre[sel] + st < upper
        sel = sel[ok]
        stock_lb = st[ok]
        Pc, REc, BYc, dlb, RCc, RCbest = (x[sel] for x in (Pc, REc, BYc, dlb, RCc, RCbest))
        rep = rep[sel]
        if Pc.size and thd_floor_applies(request):
            # B22 from the top of the I_C bracket, before the DC point is solved
            keep = ~floor_proven_range(request, RCc, REc + BYc, ic_lo[rep], ic_hi[rep], model,
                                       float(self.t.beta_nominal))
            self.count("thd_floor", (~keep).sum())
            Pc, REc, BYc, dlb, RCc, RCbest, rep, stock_lb = (
                x[keep] for x in (Pc, REc, BYc, dlb, RCc, RCbest, rep, stock_lb))
        if Pc.size == 0:
            return None
        r1c, r2c = self.R1[Pc], self.R2[Pc]
        op = solve_bias(self.vth[Pc], self.rth[Pc], REc + BYc, RCc, V, model, re_byp=BYc)
        good = op.converged & (op.vce >= model.vce_sat) & (op.ic <= model.ic_max) \
            & (op.pq <= model.pd) & ~op.cutoff
        with np.errstate(divide="ignore", invalid="ignore"):
            prc = np.where(RCc > 0, (V - op.vc) ** 2 / np.where(RCc > 0, RCc, 1.0), 0.0)
        good &= prc <= RESISTOR_DERATING * RCbest * (1 + 1e-9)
        self.count("dc", (~good).sum())
        if self._f_high_on():
            # B23: C_μ against the collector's conductance caps f_high, taken at the
            # least gain the window allows and the exact operating point
            g_lo = self.win[0] * 10 ** (-GAIN_SLACK_DB / 20.0)
            ceiling = f_high_ceiling(
                g_lo, collector_conductance_max(RCc, request.load_ohm, op.ic, model.vaf),
                model.cjc, request.mid_hz)
            miss = good & (op.vce >= F_HIGH_VCE_MIN) & (ceiling < request.f_high_min_hz)
            self.count("f_high", miss.sum())
            good &= ~miss
        supply = (V - op.vb) / r1c + op.ic
        good &= drift_term(dlb) + current_term(supply) < upper        # B5 with the exact current
        if thd_floor_applies(request):     # B22: the directly driven junction's THD floor
            g = np.flatnonzero(good)
            gone = g[floor_proven(request, RCc[g], op.take(g), model)]
            self.count("thd_floor", gone.size)
            good[gone] = False
        gdb = np.full(Pc.size, np.nan)
        hd2 = np.full(Pc.size, np.nan)
        sel = np.flatnonzero(good)
        if sel.size:
            ss = small_signal(op.take(sel), model)
            g, drive = midband_estimate(
                topo, r1=r1c[sel], r2=r2c[sel], rc=RCc[sel], re=REc[sel],
                source_ohm=request.source_ohm, load_ohm=request.load_ohm,
                mid_hz=request.mid_hz, ss=ss)
            gdb[sel] = 20 * np.log10(np.maximum(g, 1e-300))
            loop = ss["gm"] * degeneration(topo, REc[sel], request.source_ohm, request.load_ohm)
            hd2[sel] = hd2_pct(request.input_vpk, drive, loop)
        if self.win is not None:
            lo_db = 20 * math.log10(self.win[0]) - GAIN_SLACK_DB
            hi_db = 20 * math.log10(self.win[1]) + HIGH_GAIN_SLACK_DB
            gwin = (gdb >= lo_db) & (gdb <= hi_db)
            self.count("gain", (good & ~gwin).sum())
            good &= gwin
        terms = score_terms(gain_inf_db=gdb, target_db=score_gain_target(request)[0],
                            tol_db=score_gain_target(request)[1], drift_pct=0.0, hd2_pct=hd2,
                            supply_a=supply, emptied=0, vce_v=op.vce, supply_v=V)
        # the headroom term is exact here (the nominal DC point); a hair of slack
        # keeps the bound below the confirmed score
        lb = drift_term(dlb) + np.maximum(terms["gain"] - GAIN_SLACK_DB / max(
            score_gain_target(request)[1], 1e-3), 0.0) + terms["distortion"] + terms["current"] + stock_lb \
            + np.maximum(terms["headroom"] - 1e-6, 0.0)
        under = lb < upper
        self.count("score_bound", (good & ~under).sum())
        good &= under
        if self.thd_cut_on and good.any():
            # B25: the ce THD target at the exact operating point
            good &= ~self._ce_thd_missed(Pc, r1c, r2c, RCc, REc, BYc, op, good)
        self.stats["collector_candidates"] = self.stats.get("collector_candidates", 0) + int(Pc.size)
        if not good.any():
            return None
        idx = np.flatnonzero(good)
        idx = idx[np.argsort(lb[idx], kind="stable")]
        sk = Skeletons(topo, self.t, self.form, r1c[idx], r2c[idx], RCc[idx], REc[idx], BYc[idx])
        sk.lb, sk.gdb, sk.hd2, sk.supply = lb[idx], gdb[idx], hd2[idx], supply[idx]
        sk.stock_lb = stock_lb[idx]
        return sk
