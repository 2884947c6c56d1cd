"""The request's physical limits and its check: targets no stage can reach, answered
without searching, and the one contradiction that is bad input."""

from __future__ import annotations

import math

from inventory.errors import InputError
from inventory.parts import StockSnapshot
from optimiser.device import device_from_transistor, thermal_voltage
from optimiser.request import Request
from optimiser.search.thd_floor import applies as thd_floor_applies
from optimiser.stages import module
from optimiser.stages.base import EMITTER_DRIVEN, FOLLOWER
from optimiser.thd_bounds import emitter_driven_thd_floor

__all__ = ["gain_window", "check_request", "physical_limits", "direct_drive_thd_floor"]


def gain_window(request: Request) -> tuple[float, float] | None:
    """(lowest, highest) acceptable gain in V/V, or None without a gain target."""
    if request.gain is None:
        return None
    k = 10.0 ** (request.gain_tol_db / 20.0)
    return request.gain / k, request.gain * k


def check_request(request: Request, snapshot: StockSnapshot | None = None) -> None:
    """Raise :class:`InputError` for targets that contradict each other.

    Only a request that leaves nothing to search for is refused: f_high_min_hz
    at or below f_low_max_hz (no passband).  A target beyond what the topology
    or the drawer can reach is an answer, not bad input: see
    :func:`physical_limits`.
    """
    r = request
    if r.f_low_max_hz is not None and r.f_high_min_hz is not None \
            and r.f_high_min_hz <= r.f_low_max_hz:
        raise InputError(
            f"f_high_min_hz ({r.f_high_min_hz:g} Hz) must lie above f_low_max_hz "
            f"({r.f_low_max_hz:g} Hz): no passband is left", field="f_high_min_hz")


def physical_limits(request: Request, snapshot: StockSnapshot | None = None) -> list[dict]:
    """Targets no stage of this topology (or built from this drawer) can reach.

    Each is ``{"target", "requested", "reachable", "unit", "reason"}`` with
    ``reachable`` the proven bound (the target must move at least to it):

    * gain_db, by the topology's gain law (``SEARCH.gain_law``): a follower's
      gain is below 1 (0 dB); a stage with its output at the collector (ce, cb)
      is below V_supply/V_T (g_m·R_C = I_C·R_C/V_T < V_supply/V_T), and one
      driven at the emitter (cb) below R_L/R_S (i_e ≤ v_s/R_S, v_out ≤ i_e·R_L);
    * zin_min_ohm, by the topology's ``INPUT``: Z_in is below R1‖R2 ≤ R_max/2
      (driven at the base: ce, cc) or below RE ≤ R_max (at the emitter: cb),
      R_max the largest resistor in stock (twice it with combinations);
    * thd_max_pct, where the source drives the junction directly (the input at the
      emitter, the base held, 0 Ω: :func:`optimiser.search.thd_floor.applies`): by
      :func:`direct_drive_thd_floor`, the least over the transistors in stock.
    """

    out: list[dict] = []
    r = request
    mod = module(r.topology)
    law = mod.SEARCH.gain_law
    win = gain_window(r)
    if win is not None:
        lo = win[0]
        limit, why = None, ""
        if law == FOLLOWER:
            also = f" ({mod.ALSO_CALLED})" if mod.ALSO_CALLED else ""
            limit, why = 1.0, f"a {mod.LONG_NAME.replace(' ', '-')} stage{also} has a gain below 1"
        else:
            vt = thermal_voltage(min(r.temp_c))
            limit = r.supply_v / vt       # g_m·R_C ≤ I_C·R_C/V_T < V_supply/V_T
            why = (f"a {r.topology} stage from {r.supply_v:g} V reaches less than "
                   f"V_supply/V_T = {limit:.0f} V/V")
            if r.load_ohm and r.source_ohm and law == EMITTER_DRIVEN:
                lim2 = r.load_ohm / r.source_ohm   # i_e ≤ v_s/R_S, v_out ≤ i_e·R_L
                if lim2 < limit:
                    limit = lim2
                    why = (f"a {r.topology} stage from a {r.source_ohm:g} Ω source into "
                           f"{r.load_ohm:g} Ω reaches less than R_L/R_S = {lim2:.3g} V/V")
        if lo >= limit:
            reach = 20 * math.log10(limit)
            out.append({"target": "gain_db", "requested": r.gain_db, "reachable": reach,
                        "unit": "dB",
                        "reason": f"{why} ({reach:.1f} dB); {r.gain_db:.1f} dB ± "
                                  f"{r.gain_tol_db:g} dB cannot be met"})
    if r.zin_min_ohm is not None and snapshot is not None:
        stocked = [x.value for x in snapshot.resistors if x.qty > 0]
        rmax = max(stocked, default=0.0) * (2.0 if r.allow_combos else 1.0)
        if mod.INPUT == "base":
            bound, what = rmax / 2.0, "R1‖R2"
        else:
            bound, what = rmax, "RE"
        if rmax > 0 and r.zin_min_ohm >= bound:
            out.append({"target": "zin_min_ohm", "requested": r.zin_min_ohm, "reachable": bound,
                        "unit": "Ω",
                        "reason": f"a {r.topology} stage built from this drawer has Z_in below "
                                  f"{what} ≤ {bound:g} Ω (the largest resistor in stock "
                                  f"{rmax:g} Ω)"})
    if thd_floor_applies(r) and snapshot is not None:
        floors = [float(direct_drive_thd_floor(r, t)) for t in snapshot.transistors if t.qty > 0]
        least = min(floors, default=0.0)
        if floors and r.thd_max_pct < least:
            out.append({"target": "thd_max_pct", "requested": r.thd_max_pct,
                        "reachable": least, "unit": "%",
                        "reason": f"a {r.topology} stage driven at its emitter from a 0 Ω "
                                  f"source has the whole {r.input_vpk * 1e3:g} mV peak across "
                                  f"its base–emitter junction: THD at least {least:.3g} % with "
                                  f"every transistor in stock"})
    return out


def direct_drive_thd_floor(request: Request, transistor) -> float:
    """A lower bound (%) of the THD target's figure for every stage of ``transistor``
    whose junction the source drives directly (:func:`thd_floor_applies`) and that
    meets the THD target: such a stage stays forward-active over the cycle
    (:func:`optimiser.evaluate.thd_rule`), so V_CE ≥ vce_sat throughout, and its
    compression c = I_C0·R'/(V_AF + V_CB0) is at most V_supply/(V_AF + vce_sat − 1 V)
    (I_C0·R' ≤ I_C0·R_C < V_supply; V_CB0 ≥ vce_sat − V_BE, V_BE < 1 V), so B22's floor
    over every c up to it holds (0, no claim, where V_AF + vce_sat − 1 V ≤ 0)."""
    m = device_from_transistor(transistor)
    vcb_lo = m.vce_sat - 1.0
    if math.isfinite(m.vaf) and m.vaf + vcb_lo <= 0:
        return 0.0
    vt = thermal_voltage(25.0)          # the nominal operating point's, as the THD's
    return float(emitter_driven_thd_floor(request.input_vpk, vt, request.supply_v, 1.0, vcb_lo,
                                          m.vaf, request.source_ohm, m.vce_sat))
