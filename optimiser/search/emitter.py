"""The bounds over runs of emitter options (emitter spans): gain, distortion,
headroom and follower terms of the score (B3, B6–B19)."""

from __future__ import annotations

import math

import numpy as np

from optimiser.dc import operating_point
from optimiser.device import thermal_voltage
from optimiser.evaluate import corner_points
from optimiser.prune import (
    bias_current,
    ce_gain_at_swing,
    ce_gain_per_drop,
    ce_gain_per_load,
    ce_input_divider_max,
    ce_swing_needed,
    common_base_hd2_floor,
    emitter_hd2_floor,
    follower_gain_floor,
    gain_headroom_floor,
    junction_floor,
)
from optimiser.score import (
    score_gain_target,
)
from optimiser.search.bounds import (
    B15_MARGIN,
    GAIN_BOUND_MARGIN,
    GAIN_SLACK_DB,
    LEAST_GAIN_MARGIN,
    distortion_term,
    headroom_volts,
)
from optimiser.search.skeletons import SHORT_F
from optimiser.stage import StageBatch
from optimiser.stages.base import DEGENERATED, EMITTER_DRIVEN

#: B12 is taken a second time on a run, with the emitter's input divider, only where
#: that divider is below the plain R_TH/(R_TH + R_S) by at least this factor: the
#: floor's distortion part grows by their ratio, and below it the second junction
#: floor costs more than it prunes (E96 drawer, minimal ce request).  Any value keeps
#: the search complete (a bound left out only prunes less).
DIVIDER_GAIN = 1.1
#: B24 and B15 in its drop form are taken on a run only where B6's gain ceiling is
#: below this multiple of the window's top: B24 is a few to about 20 % below B6 (the
#: width of the current's bracket and the output conductance), so far above the
#: window it rarely changes the gain term, and there it costs more than it prunes
#: (E96 drawer, minimal ce request).  Any value keeps the search complete.
SWING_SCREEN = 1.3


class EmitterSpans:
    """Emitter-span bounds of :class:`~optimiser.search.job._Job`."""

    def _emitter_terms(self, P, ic_lo, ic_hi, ve_lo, re_lo, re_hi, lb, upper, start, width):
        """Lower bound of the gain + distortion terms an unbypassed RE in
        [re_lo, re_hi] allows (ce): B6 at the bias level — the gain is at most
        per_z·Z' (:func:`optimiser.prune.ce_gain_per_load`) with Z' ≤ R_L‖RC_max —,
        B15 and B14, the distortion the emitter feedback leaves.
        inf where no gain in the window is possible.  ``lb`` is the bound so far
        and ``upper`` the score to beat: a gain term that would reach it limits
        the RE (a valid bound wherever it stays below ``upper``).
        """
        r = self.request
        rl = r.load_ohm
        rc_max = np.maximum(self._rc_max(ic_lo, ve_lo), 0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            z_max = rc_max if not rl else np.where(np.isfinite(rc_max),
                                                   rc_max * rl / (rc_max + rl), rl)
        short = 0.0
        target, tol = score_gain_target(r)
        if self.win is not None:
            per_z = self._ce_per_z(P, ic_lo, ic_hi, re_lo, re_hi)      # G ≤ per_z·Z'
            with np.errstate(invalid="ignore"):
                short = self._gain_shortfall(np.nan_to_num(per_z * z_max, nan=0.0))
            # the rest only where each cheaper part leaves the node under ``upper``
            out = np.full(short.shape, np.inf)
            li = np.flatnonzero(lb + short < upper)
            cols = [P, ic_lo, ic_hi, re_lo, re_hi, lb, ve_lo, z_max, per_z, short, start]

            def live(keep):
                return [np.asarray(x)[keep] for x in cols]

            cols = live(li)
            # B24 (and B15 in its drop form) only where B6's ceiling is below
            # SWING_SCREEN times the window's top
            near = np.flatnonzero(cols[8] * cols[7] < SWING_SCREEN * self.win[1])
            if near.size:
                # B24: G ≤ the gain at the largest I_C·Z', y_max‖(I_C,hi·R_L) (y_max the
                # largest collector drop)
                P, ic_lo, ic_hi, re_lo, re_hi, lb, ve_lo = (x[near] for x in cols[:7])
                y_top = self._drop_swing_max(ic_hi, np.maximum(
                    self.V - ve_lo - self.model.vce_sat, 0.0))
                cols[9][near] = np.maximum(cols[9][near], self._gain_shortfall(
                    self._ce_gain_at(P, ic_lo, re_lo, re_hi, y_top)))
                keep = cols[5] + cols[9] < upper
                li, cols = li[keep], live(keep)
            if li.size == 0:
                return out
            P, ic_lo, ic_hi, re_lo, re_hi, lb, ve_lo, z_max, per_z, short, start = cols
            # B15: the collector drop that gain needs, against the headroom
            with np.errstate(divide="ignore", invalid="ignore"):
                short = np.maximum(short, self._gain_headroom(1.0 / per_z, ic_lo, ve_lo))
                # and B15 with B24's need, I_C·Z' ≥ G/per_y: y‖(I_C,hi·R_L) ≥ G/per_y
                # is B15's relation for the current I_C,hi and the load per gain
                # 1/(per_y·I_C,hi)
                s24 = np.flatnonzero((lb + short < upper)
                                     & (per_z * z_max < SWING_SCREEN * self.win[1]))
                if s24.size:
                    per_y = self._ce_per_drop(P[s24], ic_lo[s24], re_lo[s24], re_hi[s24])
                    short[s24] = np.maximum(short[s24], self._gain_headroom(
                        1.0 / (per_y * ic_hi[s24]), ic_hi[s24], ve_lo[s24]))
            # a split whose RE keeps the gain below what the window (or, with a score
            # to beat, the gain term) allows cannot be the design: the feedback, and
            # so the distortion bound, is that of the largest RE reaching it
            need_db = 20.0 * math.log10(self.win[0])
            if target is not None and math.isfinite(upper):
                need_db = np.maximum(need_db, target - (upper - lb) * max(tol, 1e-3))
            g_need = 10.0 ** ((need_db - GAIN_SLACK_DB) / 20.0)
            cap = self._ce_re_cap(P, ic_lo, ic_hi, re_hi, g_need / z_max)
            if width == 1:
                re_hi = np.minimum(re_hi, cap)
            else:           # the largest RE of the run that can still reach the gain
                re_hi = self.largest_re_below(start, width, cap)
                short = np.where(np.isnan(re_hi), np.inf, short)
                re_hi = np.nan_to_num(re_hi, nan=0.0)
            out[li] = short + self._junction_hd2(P, ic_hi, re_hi, z_max)
            # B12 with the input divider of an unbypassed RE up to re_hi (B6's k_up)
            # in place of R_TH/(R_TH + R_S): the floor grows by the ratio of the two
            # (only where the node is still live and the divider is well below the
            # plain one: elsewhere the floor could rise by less than DIVIDER_GAIN)
            fin = np.flatnonzero(lb + out[li] < upper)
            if fin.size:
                rth = self.rth[P[fin]]
                k_up = ce_input_divider_max(ic_lo=ic_lo[fin], r_th=rth, re_hi=re_hi[fin],
                                            source_ohm=r.source_ohm, model=self.model,
                                            q_hi=self.q_hi)
                worth = k_up * DIVIDER_GAIN < rth / (rth + float(r.source_ohm or 0.0))
                fin, k_up = fin[worth], k_up[worth]
            if fin.size:
                out[li[fin]] = np.maximum(out[li[fin]], self._floor(
                    P[fin], ic_lo[fin], ic_hi[fin], ve_lo[fin], k_in=k_up))
            return out
        return short + self._junction_hd2(P, ic_hi, re_hi, z_max)

    def _ce_slowdown(self, P, ic_hi, z):
        """Largest factor by which a ce stage's gain at mid_hz falls below its
        low-frequency value (B11 at high frequencies): 1 + ω(R_S‖R_TH)(C_π,max +
        C_μ(1 + g_m·Z')) + ωZ'C_μ for a collector load up to ``z``; tested against the
        engine at 1 kHz–3 MHz."""
        r, model = self.request, self.model
        vt = thermal_voltage(25.0)
        rs = float(r.source_ohm or 0.0)
        rth = self.rth[P]
        rsrc = rs * rth / (rs + rth) if rs > 0 else 0.0 * rth
        w = 2.0 * math.pi * float(r.mid_hz)
        gm = ic_hi / vt
        with np.errstate(invalid="ignore", over="ignore"):
            f = 1.0 + w * rsrc * (model.tf * gm + model.cjc * (1.0 + gm * z)) + w * z * model.cjc
        return np.nan_to_num(f, nan=np.inf, posinf=np.inf)

    def _ce_per_drop(self, P, ic_lo, re_lo, re_hi):
        """Largest ce gain per volt of I_C·Z', with B15's margin
        (:func:`optimiser.prune.ce_gain_per_drop`, B24)."""
        r = self.request
        return ce_gain_per_drop(ic_lo=ic_lo, r_th=self.rth[P], re_lo=re_lo, re_hi=re_hi,
                                source_ohm=r.source_ohm, model=self.model, q_hi=self.q_hi,
                                mid_hz=r.mid_hz) * B15_MARGIN

    def _ce_gain_at(self, P, ic_lo, re_lo, re_hi, swing):
        """Largest ce gain with I_C·Z' ≤ ``swing``, with B15's margin
        (:func:`optimiser.prune.ce_gain_at_swing`, B24)."""
        r = self.request
        return ce_gain_at_swing(swing=swing, ic_lo=ic_lo, r_th=self.rth[P], re_lo=re_lo,
                                re_hi=re_hi, source_ohm=r.source_ohm, model=self.model,
                                q_hi=self.q_hi, mid_hz=r.mid_hz, supply_v=self.V) * B15_MARGIN

    def _ce_swing_for(self, P, ic_lo, re, gain):
        """Least I_C·Z' a ce stage of unbypassed RE ``re`` needs for ``gain``, with
        B15's margin (:func:`optimiser.prune.ce_swing_needed`, B24)."""
        r = self.request
        return ce_swing_needed(gain=gain / B15_MARGIN, ic_lo=ic_lo, r_th=self.rth[P], re_lo=re,
                               re_hi=re, source_ohm=r.source_ohm, model=self.model,
                               q_hi=self.q_hi, mid_hz=r.mid_hz, supply_v=self.V)

    def _drop_swing_max(self, ic_hi, y):
        """Largest I_C·Z' = y‖(I_C·R_L) for a collector drop up to ``y`` and I_C up to
        ``ic_hi`` (y without a load)."""
        rl = self.request.load_ohm
        if not rl:
            return y
        a = ic_hi * rl
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.nan_to_num(y * a / (y + a), nan=0.0)

    def _ce_per_z(self, P, ic_lo, ic_hi, re_lo, re_hi):
        """Largest ce gain per ohm of collector load, with B15's margin
        (:func:`optimiser.prune.ce_gain_per_load`)."""
        r = self.request
        return ce_gain_per_load(ic_lo=ic_lo, ic_hi=ic_hi, r_th=self.rth[P], re_lo=re_lo,
                                re_hi=re_hi, source_ohm=r.source_ohm, model=self.model,
                                q_hi=self.q_hi, mid_hz=r.mid_hz) * B15_MARGIN

    def _cb_per_z(self, ic_hi, re):
        """Largest cb gain per ohm of collector load, with the search's margin:
        G ≤ Z'/(V_T/I_C,hi·(1 + R_S/RE) + R_S) (the source against the emitter node;
        tested with the common-base bounds against the engine)."""
        rs = float(self.request.source_ohm or 0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            return GAIN_BOUND_MARGIN / (thermal_voltage(25.0) / ic_hi * (1.0 + rs / re) + rs)

    def _per_z(self, P, ic_lo, ic_hi, re):
        """Largest gain per ohm of collector load of a ce or cb node of unbypassed RE."""
        if self.law == DEGENERATED:
            return self._ce_per_z(P, ic_lo, ic_hi, re, re)
        return self._cb_per_z(ic_hi, re)

    def _ce_re_cap(self, P, ic_lo, ic_hi, re_hi, need_per_z):
        """Largest unbypassed RE whose gain per ohm of load (with B15's margin) can
        still reach ``need_per_z``: :func:`optimiser.prune.ce_gain_per_load`
        inverted in RE, its input divider taken at ``re_hi`` (so an upper bound)."""

        r = self.request
        gm = ic_hi / thermal_voltage(25.0)
        w_cmu = 2.0 * math.pi * float(r.mid_hz) * float(self.model.cjc)
        c = 1.0 + 1.0 / (float(self.model.beta) * self.q_hi)
        # per_z(RE) = k·(g_m/(1 + g_m·RE·c) + ωC_μ), solved for RE
        k = ce_input_divider_max(ic_lo=ic_lo, r_th=self.rth[P], re_hi=re_hi,
                                 source_ohm=r.source_ohm, model=self.model, q_hi=self.q_hi)
        k = np.nan_to_num(k, nan=0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            y = need_per_z / (k * B15_MARGIN) - w_cmu
            cap = np.where(y > 0, np.maximum((gm / y - 1.0) / (gm * c), 0.0), np.inf)
        return np.nan_to_num(cap, nan=np.inf)

    def _gain_headroom(self, zper, ic_lo, ve_lo):
        """B15 (:func:`optimiser.prune.gain_headroom_floor`) for this request."""
        r = self.request
        target, tol = score_gain_target(r)
        return gain_headroom_floor(z_per_gain=zper, ic_lo=ic_lo, ve_lo=ve_lo, supply_v=self.V,
                                   vce_sat=self.model.vce_sat, load_ohm=r.load_ohm,
                                   gain_lo_db=20.0 * math.log10(self.win[0]) - GAIN_SLACK_DB,
                                   target_db=target, tol_db=tol)

    def _gain_head_at(self, P, ic_lo, ic_hi, RE, BY, RC):
        """Lower bound of the gain + headroom terms of ce/cb candidates with RC known.

        The midband gain lies in [G_lo, G_hi]: G_hi from B6 (ce: k_in·Z'·margin/
        (V_T/I_C,hi + RE), k_in ≤ R_TH/(R_TH + R_S); cb: Z'·margin/(V_T/I_C,hi·
        (1 + R_S/RE) + R_S)), G_lo from B11 (every factor at its least favourable
        end, over the margin); the gain term is at least the distance from the
        target to that interval.  The headroom term is at least its value at
        V_CE = V − I_C,lo·(R_E + RC).
        """

        r, model, V = self.request, self.model, self.V
        vt = thermal_voltage(25.0)
        rl = r.load_ohm
        rs = float(r.source_ohm or 0.0)
        b = float(self.t.beta_nominal)
        with np.errstate(divide="ignore", invalid="ignore"):
            zc = RC if not rl else RC * rl / (RC + rl)
            ro = (model.vaf - 1.0) / ic_hi if math.isfinite(model.vaf) else np.inf
            zlo = 1.0 / (1.0 / RC + (1.0 / rl if rl else 0.0) + 1.0 / ro)
            g_hi = self._per_z(P, ic_lo, ic_hi, RE) * zc
            if self.law == DEGENERATED:
                rth = self.rth[P]
                rpi_max = b * self.q_hi * vt / ic_lo
                rpi_min = b * self.q_lo * vt / ic_hi
                rin = rth * (rpi_min + (b + 1) * RE) / (rth + rpi_min + (b + 1) * RE)
                g_lo = rin / (rin + rs) * b * zlo / (rpi_max + (b + 1) * RE) / LEAST_GAIN_MARGIN \
                    / self._ce_slowdown(P, ic_hi, zc)
            else:
                re_min = vt / ic_hi * b / (b + 1.0)
                x = RE * re_min / (RE + re_min)
                g_lo = ic_lo * x * zlo / (vt * (rs + x)) / GAIN_BOUND_MARGIN
            lo_db = 20.0 * np.log10(np.maximum(g_lo, 1e-300))
            hi_db = 20.0 * np.log10(np.maximum(g_hi, 1e-300))
        target, tol = score_gain_target(r)
        gain = 0.0
        if target is not None:
            gain = np.maximum(np.maximum(target - hi_db, lo_db - target) - GAIN_SLACK_DB,
                              0.0) / max(tol, 1e-3)
            gain = np.nan_to_num(gain, nan=0.0)
        want = headroom_volts(V)
        head = np.maximum(0.0, 1.0 - (V - ic_lo * (RE + BY + RC)) / want)
        return gain + head

    def _distortion_lb(self, P, ic_lo, ic_hi, RE):
        """B14 (ce) or B16 (cb) for bias nodes of unbypassed RE ``RE``."""
        if self.law == EMITTER_DRIVEN:
            return self._cb_hd2(ic_hi, RE, RE)
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.where(ic_lo > 0, self.V / np.where(ic_lo > 0, ic_lo, 1.0), np.inf)
        if self.request.load_ohm:
            z = np.minimum(z, self.request.load_ohm)
        return self._junction_hd2(P, ic_hi, RE, z)

    def _junction_hd2(self, P, ic_hi, re, z):
        """B14 (:func:`optimiser.prune.emitter_hd2_floor`) for this request: the
        distortion term an unbypassed emitter resistance ``re`` leaves, collector
        load up to ``z``."""
        r = self.request
        return distortion_term(emitter_hd2_floor(ic_hi=ic_hi, r_th=self.rth[P], re_hi=re, z_max=z,
                                 source_ohm=r.source_ohm, input_vpk=r.input_vpk,
                                 model=self.model, q_lo=self.q_lo, q_hi=self.q_hi,
                                 mid_hz=r.mid_hz))

    def _rc_max(self, ic_lo, ve_lo):
        """B3: the largest RC that keeps V_CE ≥ vce_sat with I_C ≥ ``ic_lo`` and
        V_E ≥ ``ve_lo`` (inf where ic_lo is 0; negative where none does)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(ic_lo > 0, (self.V - ve_lo - self.model.vce_sat)
                            / np.where(ic_lo > 0, ic_lo, 1.0), np.inf)

    def _cb_hd2(self, ic_hi, re_lo, re_hi):
        """B16 (:func:`optimiser.prune.common_base_hd2_floor`) as a distortion term."""
        r = self.request
        return distortion_term(common_base_hd2_floor(ic_hi=ic_hi, re_lo=re_lo, re_hi=re_hi,
                                     source_ohm=r.source_ohm, input_vpk=r.input_vpk,
                                     model=self.model, q_lo=self.q_lo, q_hi=self.q_hi,
                                     mid_hz=r.mid_hz))

    def _follower_terms(self, P, ic_lo, ic_hi, re_lo, re_hi, ve_lo):
        """Lower bound of a follower's distortion + gain-excess + headroom terms (B17).

        The emitter sees R' = RE‖R_L, so the distortion is bounded as for a ce
        stage with R' unbypassed (B14, collector at AC ground or on RC); the gain
        is at least k_in·R'/(V_T/I_C,lo + R') with k_in ≥ R_in/(R_in + R_S),
        R_in ≥ R_TH‖(β_lo·R'), reduced by 1 + ωR_S(C_μ + C_π,max) for the input
        capacitance at mid_hz and by the margin — a gain above the target costs
        its distance; and V_CE ≤ V − ``ve_lo`` (V_E ≥ ve_lo, B19).  Tested against
        the engine.
        """

        r, model, V = self.request, self.model, self.V
        rl = r.load_ohm
        rs = float(r.source_ohm or 0.0)
        rth = self.rth[P]
        with np.errstate(divide="ignore", invalid="ignore"):
            p_hi = re_hi if not rl else re_hi * rl / (re_hi + rl)
            p_lo = re_lo if not rl else re_lo * rl / (re_lo + rl)
        h = self._junction_hd2(P, ic_hi, p_hi, np.maximum(self._rc_max(ic_lo, ve_lo), 0.0))
        target, tol = score_gain_target(r)
        excess = 0.0
        if target is not None:
            g_lo = follower_gain_floor(ic_lo=ic_lo, ic_hi=ic_hi, r_th=rth, r_out=p_lo,
                                       source_ohm=rs, model=model, q_lo=self.q_lo,
                                       mid_hz=r.mid_hz) / GAIN_BOUND_MARGIN
            with np.errstate(divide="ignore"):
                g_db = 20.0 * np.log10(np.maximum(g_lo, 1e-300))
            excess = np.maximum(g_db - target - GAIN_SLACK_DB, 0.0) / max(tol, 1e-3)
        head = np.maximum(0.0, 1.0 - (V - ve_lo) / headroom_volts(V))
        return h + excess + head

    def _follower_gain_max(self, P, r_e=None, ic_hi=None) -> np.ndarray:
        """Upper bound of a follower's midband gain (B13, with the search's margin).

        G ≤ R_TH/(R_TH + R_S) · (RE‖RL)/(r_e + RE‖RL) with r_e ≥ V_T/I_E,max;
        without ``r_e`` only the first factor.
        """
        rs = float(self.request.source_ohm or 0.0)
        rth = self.rth[P]
        g = rth / (rth + rs) * GAIN_BOUND_MARGIN
        if r_e is not None:
            rl = self.request.load_ohm
            rel = r_e if not rl else r_e * rl / (r_e + rl)
            ie = ic_hi * (1.0 + 1.0 / float(self.t.hfe_min))
            with np.errstate(divide="ignore", invalid="ignore"):
                af = np.where(ie > 0, rel / (thermal_voltage(25.0) / np.where(ie > 0, ie, 1.0)
                                             + rel), 0.0)
            g = g * af
        return g

    def _gain_shortfall(self, g_hi) -> np.ndarray:
        """Lower bound of the score's gain term for stages whose gain is at most
        ``g_hi`` (inf where even that misses the bottom of the request's window)."""
        target, tol = score_gain_target(self.request)
        with np.errstate(divide="ignore"):
            g_db = 20.0 * np.log10(np.maximum(g_hi, 1e-300))
        if target is None:
            term = np.zeros_like(g_db)
        else:
            term = np.maximum(target - g_db - GAIN_SLACK_DB, 0.0) / max(tol, 1e-3)
        if self.win is None:
            return term
        return np.where(g_db >= 20.0 * math.log10(self.win[0]) - GAIN_SLACK_DB, term, np.inf)

    def _cc_needs_rc(self, P, r_e) -> np.ndarray:
        """Bias networks of a follower whose stage with the collector on the supply
        breaks the transistor's pd rule (nominal point or any drift corner).

        Screened first with the corner currents at the largest Early factor
        (B1) times the supply, an upper bound of the dissipation; the few
        left are solved by the engine, exactly as :func:`evaluate` judges pd.
        """

        need = np.zeros(P.size, dtype=bool)
        if not math.isfinite(self.model.pd) or P.size == 0:
            return need
        v_th, r_th = self.vth[P], self.rth[P]
        top = bias_current(v_th, r_th, r_e, self.model, 25.0, None, self.q_hi)
        for tc, b in self.corners:
            top = np.maximum(top, bias_current(v_th, r_th, r_e, self.model, tc, b, self.q_hi))
        cand = np.flatnonzero(top * self.V * (1 + 1e-6) > self.model.pd)
        if cand.size:
            b = StageBatch.from_values(self.topo, R1=self.R1[P[cand]], R2=self.R2[P[cand]], RC=0.0,
                                       RE=r_e[cand], C_IN=SHORT_F, C_OUT=SHORT_F)
            op = operating_point(self.topo, self.V, b, self.model)
            cop, _, _ = corner_points(self.request, b, self.model)
            need[cand] = np.maximum(op.pq, cop.pq.max(axis=1)) > self.model.pd
        return need

    def _floor(self, P, ic_lo, ic_hi, ve_lo, rc=None, k_in=None):
        r = self.request
        if k_in is None and self.law == DEGENERATED:     # R_in ≤ R_TH: the divider is at most this
            rth = self.rth[P]
            k_in = rth / (rth + float(r.source_ohm or 0.0))
        return junction_floor(ic_lo=ic_lo, ic_hi=ic_hi, ve_lo=ve_lo, supply_v=self.V,
                              load_ohm=r.load_ohm, input_vpk=r.input_vpk,
                              gain_lo_db=20 * math.log10(self.win[0]) - GAIN_SLACK_DB,
                              target_db=r.gain_db, tol_db=r.gain_tol_db,
                              vce_sat=self.model.vce_sat, rc=rc, k_in=k_in)
