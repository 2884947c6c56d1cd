"""The f_low floors of a job: what the largest stocked capacitors allow at each
level (B20; the pure bounds are :mod:`optimiser.f_low_bounds`)."""

from __future__ import annotations

import numpy as np

from optimiser.device import thermal_voltage
from optimiser.f_low_bounds import (
    bypass_load_needed,
    cb_emitter_impedance_max,
    input_loop_max,
    largest_capacitance,
    loop_resistance_needed,
    output_loop_max,
)
from optimiser.search.bounds import GAIN_SLACK_DB


class FLowFloors:
    """f_low floors of :class:`~optimiser.search.job._Job`."""

    def _f_low_needs(self) -> tuple[float, float]:
        """B20: the least loop resistance a coupling capacitor needs, and the least RC C_OUT needs
        (output at the collector: ce, cb), for f_low_max_hz to be reachable with the largest capacitor in
        stock (:mod:`optimiser.f_low_bounds`); 0 where nothing is excluded."""

        r = self.request
        if r.f_low_max_hz is None:
            return 0.0, 0.0
        c_max = largest_capacitance(self.opts.capacitor.values)
        need = loop_resistance_needed(r.f_low_max_hz, c_max, r.mid_hz) * (1 - 1e-9)
        rc_need = need - r.load_ohm if (r.load_ohm is not None
                                        and self.mod.OUTPUT == "collector") else 0.0
        return need, max(rc_need, 0.0)

    @property
    def _byp_floor(self) -> bool:
        """B20's bypass shelf applies: a form with C_BYP, a gain window, f_low_max."""
        return ("C_BYP" in self.rules.capacitors[self.form] and self.win is not None
                and self.request.f_low_max_hz is not None)

    def _f_low_bypass_rc(self, P, ic_lo, ic_hi, REv, BYv) -> np.ndarray:
        """B20 for C_BYP: the least RC whose load Z' = RC‖R_L reaches
        :func:`optimiser.f_low_bounds.bypass_load_needed`, the gain with C_BYP open
        bounded by B15's per-ohm ceiling with RE + RE_BYP unbypassed."""

        r = self.request
        per_z = self._per_z(P, ic_lo, ic_hi, REv + BYv)
        g_lo = self.win[0] * 10 ** (-GAIN_SLACK_DB / 20)
        z = bypass_load_needed(g_lo, per_z, largest_capacitance(self.opts.capacitor.values),
                               BYv, r.f_low_max_hz)
        rl = r.load_ohm
        with np.errstate(divide="ignore", invalid="ignore"):
            rc = z if not rl else np.where(z < rl, z * rl / (rl - z), np.inf)
        return np.nan_to_num(rc, nan=np.inf)

    def _f_low_cb_input(self, re_tot, ic_lo, ic_hi, rc_max) -> np.ndarray:
        """B20 for a node of a stage driven at the emitter with its base held (cb): True where C_IN's loop R_S + RE‖Z_e,max (Z_e from
        :func:`optimiser.f_low_bounds.cb_emitter_impedance_max` with the collector
        load up to RC_max‖R_L) stays below what f_low_max needs."""

        rl = self.request.load_ohm
        z = np.maximum(rc_max, 0.0)
        if rl:
            z = np.where(np.isfinite(z), z * rl / (z + rl), rl)
        ze = cb_emitter_impedance_max(ic_lo, ic_hi, z, float(self.model.vaf),
                                      thermal_voltage(25.0))
        with np.errstate(invalid="ignore"):
            zin = np.where(np.isfinite(ze), re_tot * ze / (re_tot + ze), re_tot)
        return float(self.request.source_ohm or 0.0) + zin < self.loop_need

    def _f_low_pairs(self, rth) -> np.ndarray:
        """B20 at the pairs (input at the base: ce, cc): Z_in ≤ R_TH, so C_IN's loop is
        at most R_S + R_TH."""

        if self.mod.INPUT != "base" or self.loop_need <= 0:
            return np.ones(rth.size, dtype=bool)
        return input_loop_max(self.mod.INPUT, self.request.source_ohm, rth=rth) >= self.loop_need

    def _f_low_options(self, tot) -> np.ndarray:
        """B20 at the emitter options: C_IN at the emitter (cb) sees at most
        R_S + RE + RE_BYP and C_OUT at the emitter (a follower) at most R_L + RE + RE_BYP."""

        keep = np.ones(tot.size, dtype=bool)
        r = self.request
        if self.mod.INPUT == "emitter" and self.loop_need > 0:
            keep &= input_loop_max(self.mod.INPUT, r.source_ohm, re_total=tot) >= self.loop_need
        if self.mod.OUTPUT == "emitter" and self.loop_need > 0 and r.load_ohm is not None:
            keep &= output_loop_max(self.mod.OUTPUT, r.load_ohm, re_total=tot) >= self.loop_need
        return keep

    def _f_low_headroom(self, ic_lo, ve_lo) -> np.ndarray:
        """B20 at the bias nodes (output at the collector: ce, cb): C_OUT needs RC ≥ rc_need, and B3 allows
        at most (V − V_E − vce_sat)/I_C,lo."""
        if self.rc_need <= 0:
            return np.ones(np.shape(ic_lo), dtype=bool)
        return self._rc_max(ic_lo, ve_lo) >= self.rc_need
