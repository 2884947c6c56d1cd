"""Stock-constrained search for amplifier stages, with ranked alternatives.

The public entry is :func:`search`.  It is complete: every design it does not
examine is discarded by a bound that cannot remove a design the engine would
accept (each bound is documented in docs/search.md).  Steps:

1. **Validate** the request (:func:`check_request`; a request with no
   passband is an :class:`InputError`) and compare it with what the topology
   can do at all (:func:`physical_limits`): a target beyond that is answered
   as infeasible without searching.
2. **Bias networks** (per transistor type and form): every (R1, R2) pair
   against the sorted array of DC emitter resistances; the collector current
   follows in closed form (:mod:`optimiser.prune`) for the two extreme Early
   factors, which bracket the true current.  Bounds on the drift and the
   transistor limits discard whole blocks.
3. **Collector side**: for each bias network the RC values that keep V_CE
   above saturation (``searchsorted`` on the sorted RC values), then the exact
   DC point and a resistive midband gain estimate against the gain window.
4. **Skeleton pass** (engine, capacitors shorted): exact midband gain,
   drift, operating point; the score without distortion is a lower bound.
5. **Best-first confirmation**: skeletons in order of that bound; the engine
   evaluates each with capacitors (largest stock values first, then the
   smallest adequate), band edges, Z_in, Z_out and distortion; stock rows are
   allocated with the ratings of the very pieces.  Stop when ``top`` designs
   are known whose scores are below every remaining bound.

SI units throughout (ohm, farad, volt, ampere, hertz).
"""

from __future__ import annotations

import heapq
import itertools
import math
import time
from dataclasses import dataclass, field, replace

import numpy as np

from inventory.errors import InputError
from inventory.parts import StockSnapshot, Transistor
from optimiser.design import Design
from optimiser.options import (
    CAPACITOR_DERATING,
    RESISTOR_DERATING,
    StockOptions,
)
from optimiser.request import Request
from optimiser.score import STOCK_PENALTY, degeneration, hd2_pct, score_gain_target, score_terms
from optimiser.stage import PartRatings, StageBatch
from optimiser.workers import split_branch_and_bound, worker_count

__all__ = ["SearchResult", "search", "check_request", "physical_limits", "FORMS", "SHORT_F",
           "gain_window", "Skeletons"]

#: Capacitance standing for "shorted" in the skeleton pass (F).
SHORT_F = 1.0
#: The ce forms and the roles each adds.
FORMS = {"ce": ("unbypassed", "fully bypassed", "partly bypassed"), "cb": (None,), "cc": (None,)}
#: Safety margins of the pruning estimates (docs/search.md).
GAIN_SLACK_DB = 1e-3         # midband estimate vs engine (agree to ~1e-6 dB)
HIGH_GAIN_SLACK_DB = 6.0     # how far above the window a stage may sit and still be
                             # pulled into it by small capacitors (assumption A2)
GAIN_BOUND_MARGIN = 1.05    # closed-form gain bounds B6, B8 and cb/cc forms widened by this
LEAST_GAIN_MARGIN = 1.01    # B11, the least gain an RC gives a ce stage (measured: the bound
                            # without it stays ≤ 0.992 of the engine's gain)
B15_MARGIN = 1.003          # the tighter ce gain bound of B6 at the bias level and B15
                            # (measured: the engine's gain ≤ 0.9994 of it without margin)
DRIFT_REL_SLACK = 0.05       # × (V+1)/V_AF, relative margin on the bias drift bound
DRIFT_ABS_SLACK = 0.01       # percentage points (with the relative margin alone the bound
                             # stayed ≤ 0.9986 of the engine's drift on 10^5 random stages)
IC_MIN_MARGIN = 1.001        # the top of the current bracket widened by this against the
                             # least-current target (B1 holds with no margin in the tests)
DRIFT_BOUND_CAP_PCT = 20.0   # the bound claims no more than this (B2 fails for huge drifts)
CHUNK = 400_000
CAP_ENUM_LIMIT = 4096


# ---------------------------------------------------------------------------
# request validation
# ---------------------------------------------------------------------------
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

    * gain_db: a follower's gain is below 1 (0 dB); a ce or cb stage's is below
      V_supply/V_T (g_m·R_C = I_C·R_C/V_T < V_supply/V_T), and a cb stage's
      below R_L/R_S (i_e ≤ v_s/R_S, v_out ≤ i_e·R_L);
    * zin_min_ohm: Z_in is below R1‖R2 ≤ R_max/2 (ce, cc) or below RE ≤ R_max
      (cb), R_max the largest resistor in stock (twice it with combinations).
    """
    from optimiser.device import thermal_voltage

    out: list[dict] = []
    r = request
    win = gain_window(r)
    if win is not None:
        lo = win[0]
        limit, why = None, ""
        if r.topology == "cc":
            limit, why = 1.0, "a common-collector stage (emitter follower) has a gain below 1"
        else:
            vt = thermal_voltage(min(r.temp_c))
            limit = r.supply_v / vt       # g_m·R_C ≤ I_C·R_C/V_T < V_supply/V_T
            why = (f"a {r.topology} stage from {r.supply_v:g} V reaches less than "
                   f"V_supply/V_T = {limit:.0f} V/V")
            if r.load_ohm and r.source_ohm and r.topology == "cb":
                lim2 = r.load_ohm / r.source_ohm   # i_e ≤ v_s/R_S, v_out ≤ i_e·R_L
                if lim2 < limit:
                    limit = lim2
                    why = (f"a cb stage from a {r.source_ohm:g} Ω source into "
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
        if r.topology in ("ce", "cc"):
            bound, what = rmax / 2.0, "R1‖R2"
        else:
            bound, what = rmax, "RE"
        if rmax > 0 and r.zin_min_ohm >= bound:
            out.append({"target": "zin_min_ohm", "requested": r.zin_min_ohm, "reachable": bound,
                        "unit": "Ω",
                        "reason": f"a {r.topology} stage built from this drawer has Z_in below "
                                  f"{what} ≤ {bound:g} Ω (the largest resistor in stock "
                                  f"{rmax:g} Ω)"})
    return out


# ---------------------------------------------------------------------------
# results
# ---------------------------------------------------------------------------
@dataclass
class SearchResult:
    """What :func:`search` returns (docs/json.md)."""

    request: Request
    feasible: bool
    designs: list[Design]
    nearest_misses: list[Design]
    unlock: list[str]
    stats: dict = field(default_factory=dict)
    #: targets beyond the topology's (or the drawer's) reach (:func:`physical_limits`)
    limits: list[dict] = field(default_factory=list)
    #: each unlock as data: target, from, to, proof (docs/answers.md)
    unlock_changes: list[dict] = field(default_factory=list)

    def to_json(self) -> dict:
        return {
            "request": self.request.to_json(),
            "feasible": bool(self.feasible),
            "designs": [d.to_json() for d in self.designs],
            "nearest_misses": [d.to_json() for d in self.nearest_misses],
            "unlock": list(self.unlock),
            "limits": [dict(x) for x in self.limits],
            "unlock_changes": [dict(x) for x in self.unlock_changes],
            "search": {
                "complete": bool(self.stats.get("complete", True)),
                "proven_ranks": int(self.stats.get("proven_ranks", len(self.designs))),
                "open_bound": (None if not math.isfinite(self.stats.get("open_bound", math.inf))
                               else float(self.stats["open_bound"])),
                "seconds": self.stats.get("seconds"),
            },
        }


# ---------------------------------------------------------------------------
# skeletons: transistor + resistor values, capacitors still open
# ---------------------------------------------------------------------------
@dataclass
class Skeletons:
    """Candidate stages without capacitors, as parallel arrays of shape (n,)."""

    topology: str
    transistor: Transistor
    form: str | None
    R1: np.ndarray
    R2: np.ndarray
    RC: np.ndarray
    RE: np.ndarray
    RE_BYP: np.ndarray

    @property
    def n(self) -> int:
        return int(self.R1.size)

    def take(self, idx) -> "Skeletons":
        return replace(self, R1=self.R1[idx], R2=self.R2[idx], RC=self.RC[idx],
                       RE=self.RE[idx], RE_BYP=self.RE_BYP[idx])

    def batch(self, caps: dict[str, np.ndarray] | None = None) -> StageBatch:
        caps = caps or {}
        vals = dict(R1=self.R1, R2=self.R2, RC=self.RC, RE=self.RE, RE_BYP=self.RE_BYP)
        for role in cap_roles(self.topology, self.form):
            vals[role] = caps.get(role, SHORT_F)
        return StageBatch.from_values(self.topology, **vals)


def cap_roles(topology: str, form: str | None) -> tuple[str, ...]:
    if topology == "ce":
        return ("C_IN", "C_OUT", "C_BYP") if form != "unbypassed" else ("C_IN", "C_OUT")
    if topology == "cb":
        return ("C_IN", "C_OUT", "C_B")
    return ("C_IN", "C_OUT")


def resistor_roles(topology: str, form: str | None, rc) -> tuple[str, ...]:
    if topology == "ce":
        return {"unbypassed": ("R1", "R2", "RC", "RE"),
                "fully bypassed": ("R1", "R2", "RC", "RE_BYP"),
                "partly bypassed": ("R1", "R2", "RC", "RE", "RE_BYP")}[form]
    if topology == "cb":
        return ("R1", "R2", "RC", "RE")
    return ("R1", "R2", "RC", "RE") if rc > 0 else ("R1", "R2", "RE")


def _emitter_options(topology: str, form: str | None, rv: np.ndarray):
    """(RE, RE_BYP) arrays of the emitter side of one form."""
    z = np.zeros_like(rv)
    if topology != "ce" or form == "unbypassed":
        return rv.copy(), z
    if form == "fully bypassed":
        return z, rv.copy()
    a, b = np.meshgrid(rv, rv, indexing="ij")
    return a.ravel(), b.ravel()


# ---------------------------------------------------------------------------
# enumeration (steps 2 and 3)
# ---------------------------------------------------------------------------
def _corner_points(request: Request, t: Transistor):
    temps = sorted(set(float(x) for x in request.temp_c))
    betas = sorted({float(t.hfe_min), float(t.hfe_max)})
    return [(tc, b) for tc in temps for b in betas]


def _expand(counts: np.ndarray):
    """(repeat index, offset within its block) for blocks of the given sizes."""
    rep = np.repeat(np.arange(counts.size), counts)
    offs = np.arange(rep.size) - np.repeat(np.cumsum(counts) - counts, counts)
    return rep, offs


class _Job:
    """One transistor type and one form: the levels of the search tree.

    pairs (R1, R2) → bias nodes (pair × DC emitter total) → collector
    candidates (emitter split × RC) → skeletons.  Each ``expand_*`` returns
    children with a lower bound of the score of every design below them
    (docs/search.md, bounds B1–B6).
    """

    def __init__(self, request: Request, opts: StockOptions, t: Transistor, form, stats: dict,
                 cache: dict | None = None):
        from optimiser.device import device_from_transistor
        from optimiser.prune import early_bounds

        self.request, self.opts, self.t, self.form, self.stats = request, opts, t, form, stats
        self.topo = request.topology
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
            cache["stock"] = self._stock()
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
        self.rc_vals = rv if self.topo != "cc" else np.concatenate([[0.0], rv])
        self.rc_best = rbest if self.topo != "cc" else np.concatenate([[np.inf], rbest])
        self.t_empty = float(t.qty - request.builds <= 0 and (t.id is None or t.id >= 0))
        # B2, the drift: three closed-form solves; for ce cheaper than the emitter and
        # junction bounds and on fine runs the one that discards the most, so first,
        # before even the top of the current bracket (measured: a tenth off the E96
        # search; :meth:`_span_dc`); for cb and cc last, after their own cheaper bounds
        self.drift_first = self.topo == "ce"

    def _pairs(self):
        """(R1, R2, V_TH, R_TH, bound, pairs pruned): the (R1, R2) pairs the ratings
        allow, sorted by their bound (B4, B5; B13 for a follower)."""
        from optimiser.dc import thevenin

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
        # B5: the divider current alone costs V/(R1+R2)/10 mA of score
        plb = V / (R1 + R2) / 10e-3
        o = np.argsort(plb, kind="stable")
        R1, R2, vth, rth, plb = R1[o], R2[o], vth[o], rth[o], plb[o]
        if self.topo == "cc":
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

    def _stock(self):
        """Per resistor value: pieces per copy (rows pooled; inf with joined pairs),
        the largest row, and whether it may be bought (a virtual row)."""
        opts, rv = self.opts, self.rv
        units = np.zeros(rv.size)
        for k, v in enumerate(rv):
            rows = opts.rows_of("resistor", v)
            units[k] = sum(opts.rows[i].qty // opts.builds for i in rows) if rows else np.inf
            if opts.allow_combos:
                units[k] = np.inf       # a joined pair may stand in: no cheap count
        maxq = np.array([max((opts.rows[i].qty for i in opts.rows_of("resistor", v)),
                             default=0) for v in rv], dtype=float)
        virtual = np.array([any((opts.rows[i].id is not None and opts.rows[i].id < 0)
                                for i in opts.rows_of("resistor", v)) for v in rv])
        return units, maxq, virtual

    @property
    def live(self) -> bool:
        """Whether any (R1, R2) pair and any emitter option is left to search."""
        return bool(self.R1.size and self.etot.size)

    def _f_low_needs(self) -> tuple[float, float]:
        """B20: the least loop resistance a coupling capacitor needs, and the least RC C_OUT needs
        (ce, cb), for f_low_max_hz to be reachable with the largest capacitor in
        stock (:mod:`optimiser.f_low_bounds`); 0 where nothing is excluded."""
        from optimiser.f_low_bounds import largest_capacitance, loop_resistance_needed

        r = self.request
        if r.f_low_max_hz is None:
            return 0.0, 0.0
        c_max = largest_capacitance(self.opts.capacitor.values)
        need = loop_resistance_needed(r.f_low_max_hz, c_max, r.mid_hz) * (1 - 1e-9)
        rc_need = need - r.load_ohm if (r.load_ohm is not None and self.topo != "cc") else 0.0
        return need, max(rc_need, 0.0)

    @property
    def _byp_floor(self) -> bool:
        """B20's bypass shelf applies: a ce form with C_BYP, a gain window, f_low_max."""
        return (self.topo == "ce" and self.form != "unbypassed" and self.win is not None
                and self.request.f_low_max_hz is not None)

    def _f_low_bypass_rc(self, P, ic_lo, ic_hi, REv, BYv) -> np.ndarray:
        """B20 for C_BYP: the least RC whose load Z' = RC‖R_L reaches
        :func:`optimiser.f_low_bounds.bypass_load_needed`, the gain with C_BYP open
        bounded by B15's per-ohm ceiling with RE + RE_BYP unbypassed."""
        from optimiser.f_low_bounds import bypass_load_needed, largest_capacitance

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
        """B20 for a cb node: True where C_IN's loop R_S + RE‖Z_e,max (Z_e from
        :func:`optimiser.f_low_bounds.cb_emitter_impedance_max` with the collector
        load up to RC_max‖R_L) stays below what f_low_max needs."""
        from optimiser.device import thermal_voltage
        from optimiser.f_low_bounds import cb_emitter_impedance_max

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
        """B20 at the pairs (ce, cc): Z_in ≤ R_TH, so C_IN's loop is at most R_S + R_TH."""
        from optimiser.f_low_bounds import input_loop_max

        if self.topo == "cb" or self.loop_need <= 0:
            return np.ones(rth.size, dtype=bool)
        return input_loop_max(self.topo, self.request.source_ohm, rth=rth) >= self.loop_need

    def _f_low_options(self, tot) -> np.ndarray:
        """B20 at the emitter options: cb's C_IN sees at most R_S + RE + RE_BYP and a
        follower's C_OUT at most R_L + RE + RE_BYP."""
        from optimiser.f_low_bounds import input_loop_max, output_loop_max

        keep = np.ones(tot.size, dtype=bool)
        r = self.request
        if self.topo == "cb" and self.loop_need > 0:
            keep &= input_loop_max("cb", r.source_ohm, re_total=tot) >= self.loop_need
        if self.topo == "cc" and self.loop_need > 0 and r.load_ohm is not None:
            keep &= output_loop_max("cc", r.load_ohm, re_total=tot) >= self.loop_need
        return keep

    def _f_low_headroom(self, ic_lo, ve_lo) -> np.ndarray:
        """B20 at the bias nodes (ce, cb): C_OUT needs RC ≥ rc_need, and B3 allows
        at most (V − V_E − vce_sat)/I_C,lo."""
        if self.rc_need <= 0:
            return np.ones(np.shape(ic_lo), dtype=bool)
        return self._rc_max(ic_lo, ve_lo) >= self.rc_need

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

    def count(self, key, n):
        pr = self.stats["pruned"]
        pr[key] = pr.get(key, 0) + int(n)

    def pair_blocks(self):
        nb = min(-(-self.etot.size // self.tb), SPAN_BLOCKS)     # widest spans per pair
        step = max(1, CHUNK // (8 * nb))
        for s in range(0, self.R1.size, step):
            yield float(self.plb[s]), np.arange(s, min(s + step, self.R1.size))

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
        from optimiser.device import thermal_voltage

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
        if self.topo == "ce":
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
        if s.size and self.topo == "cb":
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
        if s.size and self.win is not None and self.topo in ("ce", "cb"):
            room = np.full(s.size, V - model.vce_sat)
            if self.request.load_ohm:
                room = np.minimum(room, ic_hi[s] * self.request.load_ohm)
            rdeg = re_bounds[1][s] if self.topo == "ce" \
                else float(self.request.source_ohm or 0.0)
            with np.errstate(divide="ignore", invalid="ignore"):
                h = 25.0 * self.win[0] * self.request.input_vpk / room / GAIN_BOUND_MARGIN / (
                    1.0 + ic_hi[s] * rdeg / thermal_voltage(25.0))
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
        from optimiser.prune import bias_current, early_factor_max

        model, V = self.model, self.V
        n = P.size
        r_small = np.broadcast_to(np.asarray(r_small, dtype=float), (n,))
        r_big = np.broadcast_to(np.asarray(r_big, dtype=float), (n,))
        ic_lo, ic_hi, d_lb = np.zeros(n), np.zeros(n), np.zeros(n)
        v_th, r_th = self.vth[P], self.rth[P]
        # B1: I_C lies between its values at the extreme Early factors
        ic_lo[:] = bias_current(v_th, r_th, r_big, model, 25.0, None, self.q_lo)
        lb = (V / (self.R1[P] + self.R2[P]) + ic_lo) / 10e-3          # B5
        s = np.flatnonzero((ic_lo <= model.ic_max * (1 + 1e-9)) & (lb < upper))
        if s.size == 0:
            return s, lb[s], ic_lo, ic_hi, ic_lo * r_small, None, d_lb, None
        # the emitter voltage V_E = I_E·R = V_TH − V_BE − I_B·R_TH grows with the
        # emitter total R (V_BE and I_B fall), so over the span it is least at
        # r_small: at least I_C,lo(r_small)·r_small (B19; until 2026-12-02 the much
        # smaller I_C,lo(r_big)·r_small on runs of options)
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
        if self.topo == "cc":
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
        if s.size and self.topo == "ce" and self.win is not None:
            # B12: gain, distortion and headroom together, over every RC and split
            # (ce only: for cb, B16 and B15 already hold nearly all of it — measured
            # again with B12 in closed form: a fifth fewer nodes, 5 % more time).  In
            # closed form it is cheap, so on every level and before the emitter terms
            # (until 2026-12-02 after them and only on runs of 128–8192 emitter options;
            # E96 ce: CPU 8.7 -> 7.5 s, three interleaved runs)
            fl = self._floor(P[s], ic_lo[s], ic_hi[s], ve_lo[s])
            keep = lb_s + fl < upper
            s, lb_s, fl = s[keep], lb_s[keep], fl[keep]
        return s, lb_s, ic_lo, ic_hi, ve_lo, q_top, d_lb, fl

    def _drift_stage(self, s, lb_s, v_th, r_th, r_big, q_top, d_lb, upper):
        """B2 on the nodes ``s`` whose bound so far is ``lb_s``: fills ``d_lb[s]``
        and returns the nodes (and their bounds) still under ``upper`` and within
        the drift target."""
        from optimiser.prune import bias_current
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
        lb_s = lb_s + d_lb[s] / 10.0
        keep = lb_s < upper
        if self.request.ic_drift_max_pct is not None:
            keep &= d_lb[s] <= self.request.ic_drift_max_pct
        return s[keep], lb_s[keep]

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
                g_hi = per_z * z_max
            short = self._gain_shortfall(np.nan_to_num(g_hi, nan=0.0))
            # the rest only where this cheap part leaves the node under ``upper``
            out = np.full(short.shape, np.inf)
            li = np.flatnonzero(lb + short < upper)
            if li.size == 0:
                return out
            P, ic_lo, ic_hi, re_lo, re_hi, lb, ve_lo, z_max, per_z, short, start = (
                np.asarray(x)[li] for x in (P, ic_lo, ic_hi, re_lo, re_hi, lb, ve_lo, z_max,
                                            per_z, short, start))
            # B15: the collector drop that gain needs, against the headroom
            with np.errstate(divide="ignore", invalid="ignore"):
                short = np.maximum(short, self._gain_headroom(1.0 / per_z, ic_lo, ve_lo))
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
            return out
        return short + self._junction_hd2(P, ic_hi, re_hi, z_max)

    def _ce_slowdown(self, P, ic_hi, z):
        """Largest factor by which a ce stage's gain at mid_hz falls below its
        low-frequency value (B11 at high frequencies): 1 + ω(R_S‖R_TH)(C_π,max +
        C_μ(1 + g_m·Z')) + ωZ'C_μ for a collector load up to ``z``; tested against the
        engine at 1 kHz–3 MHz."""
        from optimiser.device import thermal_voltage
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

    def _ce_per_z(self, P, ic_lo, ic_hi, re_lo, re_hi):
        """Largest ce gain per ohm of collector load, with B15's margin
        (:func:`optimiser.prune.ce_gain_per_load`)."""
        from optimiser.prune import ce_gain_per_load
        r = self.request
        return ce_gain_per_load(ic_lo=ic_lo, ic_hi=ic_hi, r_th=self.rth[P], re_lo=re_lo,
                                re_hi=re_hi, source_ohm=r.source_ohm, model=self.model,
                                q_hi=self.q_hi, mid_hz=r.mid_hz) * B15_MARGIN

    def _cb_per_z(self, ic_hi, re):
        """Largest cb gain per ohm of collector load, with the search's margin:
        G ≤ Z'/(V_T/I_C,hi·(1 + R_S/RE) + R_S) (the source against the emitter node;
        tested with the common-base bounds against the engine)."""
        from optimiser.device import thermal_voltage
        rs = float(self.request.source_ohm or 0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            return GAIN_BOUND_MARGIN / (thermal_voltage(25.0) / ic_hi * (1.0 + rs / re) + rs)

    def _per_z(self, P, ic_lo, ic_hi, re):
        """Largest gain per ohm of collector load of a ce or cb node of unbypassed RE."""
        if self.topo == "ce":
            return self._ce_per_z(P, ic_lo, ic_hi, re, re)
        return self._cb_per_z(ic_hi, re)

    def _ce_re_cap(self, P, ic_lo, ic_hi, re_hi, need_per_z):
        """Largest unbypassed RE whose gain per ohm of load (with B15's margin) can
        still reach ``need_per_z``: :func:`optimiser.prune.ce_gain_per_load`
        inverted in RE, its input divider taken at ``re_hi`` (so an upper bound)."""
        from optimiser.device import thermal_voltage
        from optimiser.prune import ce_input_divider_max

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
        from optimiser.prune import gain_headroom_floor
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
        from optimiser.device import thermal_voltage
        from optimiser.score import HEADROOM_FRACTION

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
            if self.topo == "ce":
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
        want = HEADROOM_FRACTION * V
        head = np.maximum(0.0, 1.0 - (V - ic_lo * (RE + BY + RC)) / want)
        return gain + head

    def _distortion_lb(self, P, ic_lo, ic_hi, RE):
        """B14 (ce) or B16 (cb) for bias nodes of unbypassed RE ``RE``."""
        if self.topo == "cb":
            return self._cb_hd2(ic_hi, RE, RE)
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.where(ic_lo > 0, self.V / np.where(ic_lo > 0, ic_lo, 1.0), np.inf)
        if self.request.load_ohm:
            z = np.minimum(z, self.request.load_ohm)
        return self._junction_hd2(P, ic_hi, RE, z)

    def _junction_hd2(self, P, ic_hi, re, z):
        """B14 (:func:`optimiser.prune.emitter_hd2_floor`) for this request: the HD2
        an unbypassed emitter resistance ``re`` leaves, collector load up to ``z``."""
        from optimiser.prune import emitter_hd2_floor
        r = self.request
        return emitter_hd2_floor(ic_hi=ic_hi, r_th=self.rth[P], re_hi=re, z_max=z,
                                 source_ohm=r.source_ohm, input_vpk=r.input_vpk,
                                 model=self.model, q_lo=self.q_lo, q_hi=self.q_hi,
                                 mid_hz=r.mid_hz)

    def _rc_max(self, ic_lo, ve_lo):
        """B3: the largest RC that keeps V_CE ≥ vce_sat with I_C ≥ ``ic_lo`` and
        V_E ≥ ``ve_lo`` (inf where ic_lo is 0; negative where none does)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(ic_lo > 0, (self.V - ve_lo - self.model.vce_sat)
                            / np.where(ic_lo > 0, ic_lo, 1.0), np.inf)

    def _cb_hd2(self, ic_hi, re_lo, re_hi):
        from optimiser.prune import common_base_hd2_floor
        r = self.request
        return common_base_hd2_floor(ic_hi=ic_hi, re_lo=re_lo, re_hi=re_hi,
                                     source_ohm=r.source_ohm, input_vpk=r.input_vpk,
                                     model=self.model, q_lo=self.q_lo, q_hi=self.q_hi,
                                     mid_hz=r.mid_hz)

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
        from optimiser.prune import follower_gain_floor
        from optimiser.score import HEADROOM_FRACTION

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
        head = np.maximum(0.0, 1.0 - (V - ve_lo) / (HEADROOM_FRACTION * V))
        return h + excess + head

    def _follower_gain_max(self, P, r_e=None, ic_hi=None) -> np.ndarray:
        """Upper bound of a follower's midband gain (B13, with the search's margin).

        G ≤ R_TH/(R_TH + R_S) · (RE‖RL)/(r_e + RE‖RL) with r_e ≥ V_T/I_E,max;
        without ``r_e`` only the first factor.
        """
        from optimiser.device import thermal_voltage
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
        from optimiser.dc import operating_point
        from optimiser.evaluate import corner_points
        from optimiser.prune import bias_current

        need = np.zeros(P.size, dtype=bool)
        if not math.isfinite(self.model.pd) or P.size == 0:
            return need
        v_th, r_th = self.vth[P], self.rth[P]
        top = bias_current(v_th, r_th, r_e, self.model, 25.0, None, self.q_hi)
        for tc, b in self.corners:
            top = np.maximum(top, bias_current(v_th, r_th, r_e, self.model, tc, b, self.q_hi))
        cand = np.flatnonzero(top * self.V * (1 + 1e-6) > self.model.pd)
        if cand.size:
            b = StageBatch.from_values("cc", R1=self.R1[P[cand]], R2=self.R2[P[cand]], RC=0.0,
                                       RE=r_e[cand], C_IN=SHORT_F, C_OUT=SHORT_F)
            op = operating_point("cc", self.V, b, self.model)
            cop, _, _ = corner_points(self.request, b, self.model)
            need[cand] = np.maximum(op.pq, cop.pq.max(axis=1)) > self.model.pd
        return need

    def _floor(self, P, ic_lo, ic_hi, ve_lo, rc=None):
        from optimiser.prune import junction_floor
        r = self.request
        k_in = None
        if self.topo == "ce":     # R_in ≤ R_TH: the input divider is at most this
            rth = self.rth[P]
            k_in = rth / (rth + float(r.source_ohm or 0.0))
        return junction_floor(ic_lo=ic_lo, ic_hi=ic_hi, ve_lo=ve_lo, supply_v=self.V,
                              load_ohm=r.load_ohm, input_vpk=r.input_vpk,
                              gain_lo_db=20 * math.log10(self.win[0]) - GAIN_SLACK_DB,
                              target_db=r.gain_db, tol_db=r.gain_tol_db,
                              vce_sat=self.model.vce_sat, rc=rc, k_in=k_in)

    def expand_pairs(self, p: np.ndarray, upper: float, dc=None):
        """Blocks of emitter totals for the pairs ``p``, sorted by their bound.

        Runs of emitter options are bounded coarse to fine — runs of
        TOTALS_BLOCK·SPAN_BLOCKS^k options, the widest first (one run holding
        every option of the form), each surviving run split in SPAN_BLOCKS — down
        to runs of TOTALS_BLOCK (the same bounds on every level).  ``dc``: the
        DC bounds of ``p`` over a span of totals holding every option of the
        form (:meth:`span_dc_of`), taken for the first level.
        """
        n = self.etot.size
        widths = [self.tb]
        while widths[0] < n:
            widths.insert(0, widths[0] * SPAN_BLOCKS)
        P, a, span = p, np.zeros(p.size, dtype=int), n
        for width in widths:
            k = -(-span // width)                 # pieces of each surviving span
            a = np.repeat(a, k) + np.tile(np.arange(k) * width, P.size)
            P = np.repeat(P, k)
            live = a < n
            P, a = P[live], a[live]
            b = np.minimum(a + width, n) - 1
            ok, _, _, _, lb = self._bounds(P, *self.run_span("tot", a, width), upper,
                                           (*self.run_span("re", a, width), a, width),
                                           dc if width == widths[0] else None)
            self.count("bias_blocks", (b - a + 1)[~ok].sum())
            P, a, b, lb = P[ok], a[ok], b[ok], lb[ok]
            span = width
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

    def expand_blocks(self, P, a, b, upper: float):
        """Bias nodes (pair × each total of its block), sorted by their bound."""
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
        from optimiser.ac import small_signal
        from optimiser.dc import solve_bias
        from optimiser.prune import midband_estimate

        model, V, request, topo = self.model, self.V, self.request, self.topo
        ic_lo, ic_hi = ic[0], ic[1]
        REv, BYv = self.re_a[E], self.byp_a[E]
        # B3: V_CE ≥ vce_sat needs RC ≤ (V − I_E·R_E − vce_sat)/I_C, with I_C ≥ ic_lo
        ve_lo = ic_lo * (REv + BYv)
        rc_max = self._rc_max(ic_lo, ve_lo)
        nrc = np.searchsorted(self.rc_vals, rc_max * (1 + 1e-9), side="right")
        self.count("headroom", (self.rc_vals.size - nrc).sum())
        if topo == "cc":
            # a follower's collector resistor only where the transistor would
            # otherwise dissipate more than its pd (docs/search.md)
            few = np.minimum(nrc, 1)
            need = self._cc_needs_rc(P, REv + BYv)
            self.count("cc_collector_rule", (nrc - few)[~need].sum())
            nrc = np.where(need, nrc, few)
        # B6: gain ≤ (RC‖RL)/(V_T/I_C + RE) (ce) or g_m·(RC‖RL) (cb), with a 20 % margin.
        # Once a score to beat is known, the gain term alone confines the gain to
        # target·10^(±upper·tol/20) (B11), on both sides for ce.
        n0 = np.zeros_like(nrc)
        if self.win is not None and topo in ("ce", "cb"):
            from optimiser.device import thermal_voltage
            vt = thermal_voltage(25.0)
            g_lo, g_hi = self.win[0], self.win[1] * 10 ** (HIGH_GAIN_SLACK_DB / 20)
            if math.isfinite(upper):
                # B11 with each node's own slack: the gain term is below the score to
                # beat less the node's other terms (drift, current, distortion bounds)
                other = d_lb / 10.0 + (V / (self.R1[P] + self.R2[P]) + ic_lo) / 10e-3 \
                    + self._distortion_lb(P, ic_lo, ic_hi, REv)
                span = np.maximum(upper - other, 0.0) * request.gain_tol_db / 20.0 \
                    + GAIN_SLACK_DB / 20.0
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
            self.count("gain_bound", n0.sum())
            # smallest gain a given RC can give, every factor at its least favourable
            # end — ce: k_in·β·Z'/(r_π + (β+1)·RE); cb: g_m·Z'·x/(R_S + x) with
            # x = RE‖r_e — so RC above the one reaching g_hi·margin gives too much gain
            b = float(self.t.beta_nominal)
            rs = float(request.source_ohm or 0.0)
            ro = (model.vaf - 1.0) / ic_hi if math.isfinite(model.vaf) else np.inf
            with np.errstate(divide="ignore", invalid="ignore"):
                if topo == "ce":
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
        if topo == "cb" and self.loop_need > 0:     # B20: C_IN against RE‖Z_e
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
        pre = dlb / 10.0 + (V / (self.R1[Pc] + self.R2[Pc]) + ic_lo[rep]) / 10e-3
        sel = np.flatnonzero(pre < upper)
        if sel.size and self.win is not None and topo in ("ce", "cb"):
            rl = request.load_ohm
            rs_ = rep[sel]
            zc = RCc[sel] if not rl else RCc[sel] * rl / (RCc[sel] + rl)
            room = np.minimum(ic_hi[rs_] * zc, V - model.vce_sat)
            from optimiser.device import thermal_voltage
            rdeg = degeneration(topo, REc[sel], request.source_ohm, request.load_ohm)
            with np.errstate(divide="ignore", invalid="ignore"):
                h = 25.0 * self.win[0] * request.input_vpk / room / GAIN_BOUND_MARGIN / (
                    1.0 + ic_hi[rs_] * rdeg / thermal_voltage(25.0))
            h = np.nan_to_num(h, nan=np.inf, posinf=np.inf)
            floor = 0.0 if topo == "cb" else self._floor(
                Pc[sel], ic_lo[rs_], ic_hi[rs_], ic_lo[rs_] * (REc[sel] + BYc[sel]), rc=RCc[sel])
            if topo == "cb":            # B16 with RE known
                h = np.maximum(h, self._cb_hd2(ic_hi[rs_], REc[sel], REc[sel]))
            if topo == "ce":            # B14 with RE and RC known
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
        st = STOCK_PENALTY * st
        ok &= pre[sel] + st < upper
        sel = sel[ok]
        stock_lb = st[ok]
        Pc, REc, BYc, dlb, RCc, RCbest = (x[sel] for x in (Pc, REc, BYc, dlb, RCc, RCbest))
        rep = rep[sel]
        if Pc.size == 0:
            return None
        r1c, r2c = self.R1[Pc], self.R2[Pc]
        op = solve_bias(self.vth[Pc], self.rth[Pc], REc + BYc, RCc, V, model)
        good = op.converged & (op.vce >= model.vce_sat) & (op.ic <= model.ic_max) \
            & (op.pq <= model.pd) & ~op.cutoff
        with np.errstate(divide="ignore", invalid="ignore"):
            prc = np.where(RCc > 0, (V - op.vc) ** 2 / np.where(RCc > 0, RCc, 1.0), 0.0)
        good &= prc <= RESISTOR_DERATING * RCbest * (1 + 1e-9)
        self.count("dc", (~good).sum())
        supply = (V - op.vb) / r1c + op.ic
        good &= dlb / 10.0 + supply / 10e-3 < upper        # B5 with the exact current
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
        lb = dlb / 10.0 + np.maximum(terms["gain"] - GAIN_SLACK_DB / max(
            score_gain_target(request)[1], 1e-3), 0.0) + terms["distortion"] + terms["current"] + stock_lb \
            + np.maximum(terms["headroom"] - 1e-6, 0.0)
        under = lb < upper
        self.count("score_bound", (good & ~under).sum())
        good &= under
        self.stats["collector_candidates"] = self.stats.get("collector_candidates", 0) + int(Pc.size)
        if not good.any():
            return None
        idx = np.flatnonzero(good)
        idx = idx[np.argsort(lb[idx], kind="stable")]
        sk = Skeletons(topo, self.t, self.form, r1c[idx], r2c[idx], RCc[idx], REc[idx], BYc[idx])
        sk.lb, sk.gdb, sk.hd2, sk.supply = lb[idx], gdb[idx], hd2[idx], supply[idx]
        sk.stock_lb = stock_lb[idx]
        return sk


def _evaluate(request, batch, t, ratings=None, *, band_edges=True, large_signal=True,
              corner_gain=False):
    from optimiser.evaluate import evaluate
    return evaluate(request, batch, t, ratings, band_edges=band_edges, large_signal=large_signal,
                    corner_gain=corner_gain)


def _ratings_best(sk: Skeletons, opts: StockOptions, caps_voltage: dict | None = None) -> PartRatings:
    """Most permissive ratings the drawer offers for each resistor value of ``sk``."""
    pw, share = {}, {}
    for role in ("R1", "R2", "RC", "RE", "RE_BYP"):
        vals = getattr(sk, role)
        r = np.full(vals.shape, np.inf)
        nz = vals > 0
        if nz.any():
            idx = np.clip(np.searchsorted(opts.resistor.values, vals[nz]), 0,
                          len(opts.resistor) - 1)
            r[nz] = opts.resistor.best_rating[idx]
        pw[role] = r
        share[role] = np.ones(vals.shape)
    volt = {} if caps_voltage is None else dict(caps_voltage)
    for role in cap_roles(sk.topology, sk.form):
        volt.setdefault(role, np.full(sk.n, np.inf))
    return PartRatings(power_w=pw, power_share=share, voltage_v=volt)


def _stresses(sk: Skeletons, i: int, m: dict, j: int, V: float) -> dict[str, float]:
    """DC dissipation (W) of each resistor role, |DC voltage| (V) of each capacitor role."""
    vb, ve, vc = float(m["vb_v"][j]), float(m["ve_v"][j]), float(m["vc_v"][j])
    r1, r2, rc, re, byp = (float(getattr(sk, k)[i]) for k in ("R1", "R2", "RC", "RE", "RE_BYP"))
    ie = ve / (re + byp) if re + byp > 0 else 0.0
    s = {"R1": (V - vb) ** 2 / r1, "R2": vb ** 2 / r2, "RE": ie * ie * re,
         "RE_BYP": ie * ie * byp, "RC": (V - vc) ** 2 / rc if rc > 0 else 0.0}
    topo = sk.topology
    s["C_IN"] = abs(ve if topo == "cb" else vb)
    s["C_OUT"] = abs(ve if topo == "cc" else vc)
    s["C_BYP"] = abs(ie * byp)
    s["C_B"] = abs(vb)
    return s


def _cap_free_ok(ev) -> np.ndarray:
    """Skeleton-pass checks that no choice of capacitors can change.

    Validity (operating point, corners, transistor limits, resistor derating
    at the best ratings in stock), the drift and least-current targets and a
    missing ft/cob.
    """
    fails = ev.target_fail()
    ok = np.asarray(ev.valid, dtype=bool).copy()
    for key in ("ic_drift_pct", "ic_a", "f_high_hz"):   # f_high here only: "transistor lacks ft/cob"
        if key in fails:
            ok &= ~np.asarray(fails[key], dtype=bool)
    return ok


# ---------------------------------------------------------------------------
# the search
# ---------------------------------------------------------------------------
def _transistors(request: Request, snapshot: StockSnapshot) -> list[Transistor]:
    if request.transistor and request.transistor != "any":
        t = snapshot.transistor(request.transistor)
        if t is None:
            labels = ", ".join(sorted(x.label for x in snapshot.transistors)) or "none"
            raise InputError(f"transistor {request.transistor!r} is not in stock "
                             f"(stocked: {labels})", field="transistor")
        ts = [t]
    else:
        ts = list(snapshot.transistors)
    return [t for t in ts if t.qty >= request.builds
            and (t.vceo is None or request.supply_v <= t.vceo)]


def search(request: Request, snapshot: StockSnapshot, *, top: int = 10, misses: int = 5,
           progress=None, time_limit_s: float | None = None) -> SearchResult:
    """Find the best ``top`` stages buildable from ``snapshot`` that meet ``request``.

    Parameters
    ----------
    request : Request
    snapshot : StockSnapshot
        The drawer; rows with negative ids are virtual (to be bought) and never
        count as "last pieces of a bin".
    top : int
        How many distinct designs to return (rank 1..top).
    misses : int
        How many nearest misses to return when no design meets the request.
    progress : callable, optional
        ``progress(done, total, text)``, called between steps.
    time_limit_s : float, optional
        Stop the branch and bound after this many seconds.  The result then
        says how far it got (``stats["complete"]`` False, ``stats["open_bound"]``
        the smallest score any unexamined design could have, and
        ``stats["proven_ranks"]`` how many leading ranks are proven best
        anyway).  ``None`` searches to the end: the ranking is then proven.

    Returns
    -------
    SearchResult
    """
    check_request(request, snapshot)
    import optimiser.evaluate  # noqa: F401  (loads the engine's modules outside the timing)
    t0 = time.perf_counter()
    stats: dict = {"pruned": {}}
    limits = physical_limits(request, snapshot)
    if limits:
        # proven infeasible by the bound alone: no search of this request, only the
        # nearest misses and unlocks (each from searches of its own)
        stats.update(complete=True, proven_ranks=0, searched=False)
        result = SearchResult(request, False, [], [], [], stats, limits=limits)
        if misses > 0:
            from optimiser.misses import explain
            result.nearest_misses, result.unlock, result.unlock_changes = explain(
                request, snapshot, [], misses, stats, limits=limits)
        stats["seconds"] = time.perf_counter() - t0
        return result
    want = top * 3 if request.min_yield_pct is not None else top
    designs, pool = search_designs(request, snapshot, want, stats, progress,
                                   budget_s=time_limit_s)
    complete = not stats.get("stopped_at_budget", False)
    stats["complete"] = complete
    bound = stats.get("open_bound", math.inf)
    proven = 0
    for d in designs:
        if d.score is not None and d.score <= bound:
            proven += 1
        else:
            break
    stats["proven_ranks"] = proven
    if request.wants_yield and designs:
        designs = _with_yield(request, snapshot, designs, top, stats)
    result = SearchResult(request, bool(designs), designs, [], [], stats)
    if not designs and misses > 0 and complete:
        # (a search stopped at its time limit proves nothing: no misses or unlocks then)
        from optimiser.misses import explain
        result.nearest_misses, result.unlock, result.unlock_changes = explain(
            request, snapshot, pool, misses, stats)
    stats["seconds"] = time.perf_counter() - t0
    return result


def _with_yield(request: Request, snapshot: StockSnapshot, designs: list[Design], top: int,
                stats: dict) -> list[Design]:
    """Monte Carlo yield of the shortlist (docs/model.md); drops designs below
    min_yield_pct.  The yield is computed after ranking, on up to 3·top designs."""
    try:
        from optimiser.yield_ import apply_yield, monte_carlo
    except ImportError:  # pragma: no cover - the module ships with the engine
        return designs[:top]
    kept = []
    for d in designs:
        tol = {r: max((x.tolerance for x in p.pieces if x.tolerance is not None), default=None)
               for r, p in d.parts.items()}
        tol = {r: v for r, v in tol.items() if v is not None}
        res = monte_carlo(request, d.values(), snapshot.transistor(d.transistor), tol,
                          samples=request.samples, seed=request.seed)
        apply_yield(d, res, request)
        if d.meets_spec:
            kept.append(d)
        else:
            stats["pruned"]["yield"] = stats["pruned"].get("yield", 0) + 1
        if len(kept) >= top:
            break
    for r, d in enumerate(kept, 1):
        d.rank = r
    return kept


QUICK_BATCH = 2000
CONFIRM_BATCH = 12
NODE_BLOCK = 8192
TOTALS_BLOCK = 8
#: Aspiration levels of the score (search_designs); the last run is unbounded.
ASPIRATION = (0.5, 1.0, 2.0, 4.0)
#: Each surviving run of emitter options is split in this many (4: CPU of the E96
#: searches with the final score to beat ce 22 -> 19 s, cb 3.0 -> 2.7 s against 8).
SPAN_BLOCKS = 4
#: Relative width of the bins of DC emitter totals the options are sorted in.
TOTAL_BIN = 0.05


def search_designs(request: Request, snapshot: StockSnapshot, top: int, stats: dict,
                   progress=None, budget_s: float | None = None, given=None, workers=None,
                   finish: bool = True):
    """Steps 2–5 as a best-first branch and bound; (designs, pool of evaluated misses).

    The branch and bound runs first with an aspiration level: every node whose
    bound reaches ``ASPIRATION[0]`` is dropped as if ``top`` designs that good
    were already known.  If ``top`` designs at or below that level are found,
    no dropped node could hold a better one and the ranking is proven; if not,
    the search runs again with the next, higher level (the last is unbounded).
    This only makes the search faster: the designs returned are the same.
    """
    t_start = time.perf_counter()
    seeds = list(given) if given is not None else _seed_designs(request, snapshot, top, stats,
                                                                budget_s)
    opts = StockOptions(snapshot, request.builds, request.allow_combos)
    ts = _transistors(request, snapshot)
    cache: dict = {}            # what the jobs share (pairs, emitter options, stock)
    jobs = [_Job(request, opts, t, f, stats, cache) for t in ts for f in FORMS[request.topology]
            if opts.resistor.values.size]
    jobs = [j for j in jobs if j.live]
    found, pool = [], []
    # with top designs already in hand the score to beat is known: no aspiration
    levels = (math.inf,) if len(seeds) >= top else ASPIRATION + (math.inf,)
    if workers is None:
        n_values = np.unique([r.value for r in snapshot.resistors]).size
        workers = worker_count(n_values, PARALLEL_ABOVE)
    for cap in levels:
        left = None if budget_s is None else max(budget_s - (time.perf_counter() - t_start), 0.0)

        def run(part, shared, st, cap=cap, left=left):
            return _branch_and_bound(request, opts, jobs, top, st,
                                     progress if part[0] == 0 else None, left, cap, seeds,
                                     part, shared)

        if workers > 1:
            found, pool = split_branch_and_bound(run, workers, stats)
            found = _distinct(found)
        else:
            found, pool = run((0, 1), None, stats)
        if stats.get("stopped_at_budget") or (len(found) >= top and found[top - 1].score <= cap):
            break
        stats["aspiration_rounds"] = stats.get("aspiration_rounds", 0) + 1
    found = found[:top]
    if finish:              # (seed searches leave it to the search they seed)
        _large_signal(request, snapshot, found)
    for r, d in enumerate(found, 1):
        d.rank = r
    return found, pool


#: Drawers with more distinct resistor values than this are searched on all cores
#: (:mod:`optimiser.workers`); below it starting processes costs more than it saves.
PARALLEL_ABOVE = 160


def _distinct(designs: list[Design]) -> list[Design]:
    """Designs of distinct networks, best first (shares of a split search may
    both hold a seed)."""
    out, seen = [], set()
    for d in sorted(designs, key=_rank_key):
        if _design_key(d) not in seen:
            seen.add(_design_key(d))
            out.append(d)
    return out


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
                  budget_s: float | None) -> list[Design]:
    """The best designs of the drawer thinned to every k-th resistor value (or none).

    Every row of a kept value is kept, so each design found is buildable from
    the whole drawer with the same pieces and the same score; the full search
    then starts with these as the ``top`` to beat (exactness is untouched: a
    node is only dropped when its bound reaches the score of ``top`` real
    designs).
    """
    values = np.unique([r.value for r in snapshot.resistors])
    if values.size <= SEED_ABOVE:
        return []
    k = -(-values.size // SEED_VALUES)
    keep = set(values[::k].tolist())
    thin = replace(snapshot, resistors=tuple(r for r in snapshot.resistors if r.value in keep))
    sub = {"pruned": {}}
    workers = worker_count(values.size, PARALLEL_ABOVE)
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


def _design_key(d: Design) -> tuple:
    """A design's resistor/transistor network (its score does not depend on the rest)."""
    return (d.transistor, d.form, tuple(sorted((r, p.value) for r, p in d.parts.items()
                                               if not r.startswith("C"))))


def _large_signal(request: Request, snapshot: StockSnapshot, designs: list[Design]) -> None:
    """THD, swing and the clipping warning of the ranked designs, in place.

    Distortion and swing do not enter the score and are a target only with
    ``thd_max_pct`` (then they were computed while confirming); otherwise they
    are computed here, once, for the designs returned.
    """
    need = [d for d in designs if d.metrics.get("thd_pct") is None]
    groups: dict[str, list[Design]] = {}
    for d in need:
        groups.setdefault(d.transistor, []).append(d)
    for label, ds in groups.items():
        t = snapshot.transistor(label)
        roles = sorted({r for d in ds for r in d.values()})
        vals = {r: np.array([d.values().get(r, 0.0) for d in ds]) for r in roles}
        ev = _evaluate(request, StageBatch.from_values(ds[0].topology, **vals), t, None,
                       band_edges=False, large_signal=True)
        for j, d in enumerate(ds):
            m = ev.metrics_of(j)
            d.metrics["thd_pct"], d.metrics["swing_vpk"] = m.get("thd_pct"), m.get("swing_vpk")
            d.warnings += [r.text(j) for r in ev.rules
                           if r.key == "clipping" and bool(r.fail[j])]


def _branch_and_bound(request, opts, jobs, top, stats, progress, budget_s, cap, seeds=(),
                      part=(0, 1), shared=None):
    """One run of the branch and bound, dropping nodes whose bound reaches ``cap``.

    ``seeds`` are designs of this drawer already known (they count towards the
    ``top`` to beat and are not reported twice).  Returns every design found
    (sorted by score) and the pool of evaluated misses.

    ``part`` = (k, n): this is process k of a search split over n
    (:mod:`optimiser.workers`); ``shared`` (a :class:`optimiser.workers.Shared`)
    then says which blocks of (R1, R2) pairs another process has taken — this
    one searches only the blocks it takes itself — and holds each process's
    ``top``-th best score, slot k this one's: each is the score of ``top`` real
    designs, so any of them is a score to beat.
    """
    from optimiser.dc import operating_point
    from optimiser.evaluate import corner_points

    levels = ("pairs", "blocks", "nodes", "cands", "skel")
    heaps: dict[str, list] = {k: [] for k in levels}

    def push(item):
        heapq.heappush(heaps[item[2]], item)

    def smallest() -> float:
        return min((h[0][0] for h in heaps.values() if h), default=math.inf)

    seq = itertools.count()
    k_part = part[0]
    block = itertools.count()       # (the same numbers in every process: same jobs)
    # the forms of one transistor share their pairs and the DC bounds of their first
    # level (_Job.span_dc_of): one heap entry per transistor and block of pairs
    groups: dict[str, list[int]] = {}
    for j, job in enumerate(jobs):
        groups.setdefault(job.t.label, []).append(j)
    for js in groups.values():
        for lb, p in jobs[js[0]].pair_blocks():
            push((lb, next(seq), "pairs", (tuple(js), p, next(block))))
    found: list[Design] = sorted(seeds, key=_rank_key)
    known = {_design_key(d) for d in found}
    pool: list = []
    win = gain_window(request)
    stats.setdefault("drift_checked", 0)
    stats.setdefault("quick_evaluations", 0)
    steps = 0
    t_start = time.perf_counter()
    while any(heaps.values()):
        if budget_s is not None and time.perf_counter() - t_start > budget_s:
            # stopped by the time limit: every design left unexamined scores at
            # least the smallest bound still in the heaps
            stats["stopped_at_budget"] = True
            stats["open_bound"] = min(smallest(), cap)
            break
        kth = min(found[top - 1].score if len(found) >= top else math.inf, cap)
        if shared is not None:
            shared.kth[k_part] = kth
            kth = min(kth, min(shared.kth))
        low = smallest()
        if low >= kth:
            break
        steps += 1
        if progress and steps % 5 == 0:
            progress(min(len(found), top), top, f"{len(found)} designs found")
        if len(found) < top:
            # dive: the deepest level first, so that a bound to beat is known early
            level = next(k for k in reversed(levels) if heaps[k])
        else:
            # best first: the level holding the smallest bound — but in a split
            # search a new block of pairs only once this process's own work is done,
            # so that blocks are taken as the processes free up (they balance)
            open_ = [k for k in levels if heaps[k] and not (shared is not None and k == "pairs")]
            level = min(open_ or ["pairs"], key=lambda k: heaps[k][0][0])
        lb, _, kind, payload = heapq.heappop(heaps[level])
        if lb >= kth:
            continue
        if kind == "pairs":
            js, p, blk = payload
            if shared is not None and not shared.claim(blk, k_part):
                continue                # another process searches this block
            dc = None
            if len(js) > 1 and request.topology == "ce":
                dc = jobs[js[0]].span_dc_of(p, kth, [jobs[j] for j in js])
            for j in js:
                P, a, b, blb = jobs[j].expand_pairs(p, kth, dc)
                for s0 in range(0, P.size, NODE_BLOCK):
                    sl = slice(s0, s0 + NODE_BLOCK)
                    push((float(blb[s0]), next(seq), "blocks", (j, P[sl], a[sl], b[sl])))
        elif kind == "blocks":
            j, P, a, b = payload
            P, E, ic_lo, d_lb, nlb = jobs[j].expand_blocks(P, a, b, kth)
            for s0 in range(0, P.size, NODE_BLOCK):
                sl = slice(s0, s0 + NODE_BLOCK)
                push((float(nlb[s0]), next(seq), "nodes",
                                      (j, P[sl], E[sl], ic_lo[:, sl], d_lb[sl])))
        elif kind == "nodes":
            j, P, E, ic_lo, d_lb = payload
            sk = jobs[j].expand_nodes(P, E, ic_lo, d_lb, kth)
            if sk is not None:
                for s in range(0, sk.n, QUICK_BATCH):
                    sub = _take_all(sk, np.arange(s, min(s + QUICK_BATCH, sk.n)))
                    push((float(sub.lb[0]), next(seq), "cands", sub))
        elif kind == "cands":
            sk = payload
            keep = sk.lb < kth
            if not keep.all():
                sk = _take_all(sk, np.flatnonzero(keep))
            if sk.n == 0:
                continue
            b = sk.batch()
            model = jobs[0].model if False else None
            from optimiser.device import device_from_transistor
            model = device_from_transistor(sk.transistor)
            op = operating_point(b.topology, request.supply_v, b, model)
            cop, _, _ = corner_points(request, b, model)
            with np.errstate(divide="ignore", invalid="ignore"):
                drift = 100.0 * np.max(np.abs(cop.ic - op.ic[:, None]), axis=1) / op.ic
            stats["drift_checked"] += sk.n
            ok = np.isfinite(drift)
            if request.ic_drift_max_pct is not None:
                ok &= drift <= request.ic_drift_max_pct
            terms = score_terms(gain_inf_db=sk.gdb, target_db=score_gain_target(request)[0],
                                tol_db=score_gain_target(request)[1], drift_pct=drift, hd2_pct=sk.hd2,
                                supply_a=sk.supply, emptied=0, vce_v=op.vce,
                                supply_v=request.supply_v)
            lb15 = terms["gain"] + terms["drift"] + terms["distortion"] + terms["current"] \
                + sk.stock_lb + terms["headroom"]
            for i in np.flatnonzero(ok & (lb15 < kth)):
                push((float(lb15[i]), next(seq), "skel",
                                      (sk, int(i), {"drift_pct": float(drift[i]),
                                                    "gain_inf_db": float(sk.gdb[i]),
                                                    "hd2_pct": float(sk.hd2[i]),
                                                    "supply_a": float(sk.supply[i]),
                                                    "vce_v": float(op.vce[i])})))
        else:
            batch = [(lb, payload)]
            while heaps["skel"] and len(batch) < CONFIRM_BATCH and heaps["skel"][0][0] < kth:
                e = heapq.heappop(heaps["skel"])
                batch.append((e[0], e[3]))
            groups: dict[int, list] = {}
            for lbx, (sk, i, row) in batch:
                groups.setdefault(id(sk), []).append((lbx, sk, i, row))
            for entries in groups.values():
                sk = entries[0][1]
                li = np.array([e[2] for e in entries])
                part = sk.take(li)
                ev = _evaluate(request, part.batch(), sk.transistor, _ratings_best(part, opts),
                               band_edges=False, large_signal=False)
                stats["quick_evaluations"] += part.n
                ok = _cap_free_ok(ev)
                if win is not None:
                    ok &= np.asarray(ev.metrics["gain"]) >= win[0]
                good = []
                for jj, e in enumerate(entries):
                    if ok[jj]:
                        row = dict(e[3])
                        row.update({k: float(v[jj]) for k, v in ev.metrics.items()
                                    if k not in row})
                        good.append((e[0], None, None, e[2], row))
                bad = np.flatnonzero(~ok)
                if bad.size and len(pool) < 400:
                    pool.append(("quick", sk, li[bad], ev.take(bad)))
                for d in _confirm_group(request, opts, sk, good, stats, pool):
                    if _design_key(d) not in known:
                        known.add(_design_key(d))
                        found.append(d)
            found.sort(key=_rank_key)
    stats["heap_steps"] = stats.get("heap_steps", 0) + steps
    found.sort(key=_rank_key)
    return found, pool


def _rank_key(d: Design) -> tuple:
    """Order of the ranking: score, then the network (so that ties rank the same
    however the search was split)."""
    return (d.score, _design_key(d))


def _take_all(c: Skeletons, idx) -> Skeletons:
    sub = c.take(idx)
    for k in ("lb", "gdb", "hd2", "supply", "stock_lb"):
        setattr(sub, k, getattr(c, k)[idx])
    return sub


def skeleton_figures(request: Request, batch: StageBatch, transistor: Transistor) -> dict:
    """The capacitor-independent inputs of the score for ``batch``, as arrays.

    ``gain_inf_db`` (midband gain with capacitors shorted), ``hd2_pct``,
    ``supply_a`` (through R1 plus I_C), ``drift_pct`` (the engine's four
    corners).  The search and any check of it use this one function.
    """
    from optimiser.ac import small_signal
    from optimiser.dc import operating_point
    from optimiser.device import device_from_transistor
    from optimiser.evaluate import corner_points
    from optimiser.prune import midband_estimate

    model = device_from_transistor(transistor)
    op = operating_point(batch.topology, request.supply_v, batch, model)
    ss = small_signal(op, model)
    g, drive = midband_estimate(batch.topology, r1=batch.R1, r2=batch.R2, rc=batch.RC,
                                re=batch.RE, source_ohm=request.source_ohm,
                                load_ohm=request.load_ohm, mid_hz=request.mid_hz, ss=ss)
    cop, _, _ = corner_points(request, batch, model)
    with np.errstate(divide="ignore", invalid="ignore"):
        drift = 100.0 * np.max(np.abs(cop.ic - op.ic[:, None]), axis=1) / op.ic
    return {"gain_inf_db": 20 * np.log10(np.maximum(g, 1e-300)),
            "hd2_pct": hd2_pct(request.input_vpk, drive, np.asarray(ss["gm"]) * degeneration(
                batch.topology, batch.RE, request.source_ohm, request.load_ohm)),
            "supply_a": (request.supply_v - op.vb) / batch.R1 + op.ic,
            "drift_pct": drift,
            "vce_v": op.vce}


# ---------------------------------------------------------------------------
# capacitors
# ---------------------------------------------------------------------------
UP_KEYS = {"f_low_hz", "f_high_hz", "flat_passband", "gain"}


def _cap_targets(request, sk: Skeletons, li: np.ndarray, rows: list[dict], croles) -> np.ndarray:
    """First-order estimate of the smallest capacitance of each role (F), shape (k, roles).

    Each capacitor gets an equal share of the lower band edge: its own corner
    at f_low_max/len(roles) (or mid_hz/(10·len(roles)) without a target), seen
    through the resistance around it at the skeleton's operating point.
    """
    nr = len(croles)
    f = (request.f_low_max_hz if request.f_low_max_hz else request.mid_hz / 10.0) / nr
    w = 2 * math.pi * f
    rs = float(request.source_ohm or 0.0)
    rl = float(request.load_ohm) if request.load_ohm else math.inf
    out = np.zeros((len(rows), nr))
    for a, (i, m) in enumerate(zip(li, rows, strict=False)):
        r1, r2, rc, re, byp = (float(getattr(sk, k)[i]) for k in ("R1", "R2", "RC", "RE", "RE_BYP"))
        ic = max(m["ic_a"], 1e-12)
        re_small = 0.02585 / ic
        beta = float(sk.transistor.beta_nominal)
        rth = r1 * r2 / (r1 + r2)
        for k, role in enumerate(croles):
            if role == "C_IN":
                r = rs + max(m["zin_ohm"], 1.0)
            elif role == "C_OUT":
                r = (max(m["zout_ohm"], 1.0) + rl) if math.isfinite(rl) else math.inf
            elif role == "C_BYP":
                rsx = rth * rs / (rth + rs) if rs > 0 else 0.0
                seen = re + re_small + rsx / (beta + 1)
                r = byp * seen / (byp + seen)
            else:  # C_B
                r = rth * ((beta + 1) * (re_small + (re * rs / (re + rs) if rs > 0 else 0.0))) / (
                    rth + (beta + 1) * (re_small + (re * rs / (re + rs) if rs > 0 else 0.0)))
            out[a, k] = 0.0 if not math.isfinite(r) else 1.0 / (w * max(r, 1e-3))
    return out


def _pick_at_least(values: np.ndarray, allowed: np.ndarray, need: float) -> int:
    """Index of the smallest allowed value ≥ need, else the largest allowed."""
    ok = allowed & (values >= need * (1 - 1e-9))
    idx = np.flatnonzero(ok)
    if idx.size:
        return int(idx[0])
    return int(np.flatnonzero(allowed)[-1])


def _confirm_group(request, opts: StockOptions, sk: Skeletons, entries, stats, pool):
    """Full evaluation of skeletons of one transistor and form; returns the designs found."""
    V = float(request.supply_v)
    croles = cap_roles(sk.topology, sk.form)
    cv = opts.capacitor.values
    t = sk.transistor
    t_empty = int(t.qty - request.builds <= 0 and (t.id is None or t.id >= 0))
    li_all, rows, allocs, allowed, st_all = [], [], [], [], []
    for _lb2, _, _, i, row in entries:
        st = _stresses(sk, i, {k: [v] for k, v in row.items()}, 0, V)
        rroles = resistor_roles(sk.topology, sk.form, float(sk.RC[i]))
        alloc = opts.allocate({r: ("resistor", float(getattr(sk, r)[i]), st[r]) for r in rroles})
        if alloc is None:
            stats["pruned"]["stock_or_rating"] = stats["pruned"].get("stock_or_rating", 0) + 1
            continue
        al = np.array([opts.capacitor.best_rating * CAPACITOR_DERATING >= st[c] * (1 - 1e-9)
                       for c in croles]).reshape(len(croles), cv.size)
        if not al.any(axis=1).all():
            stats["pruned"]["capacitor_rating"] = stats["pruned"].get("capacitor_rating", 0) + 1
            continue
        li_all.append(i)
        rows.append(row)
        allocs.append(alloc)
        allowed.append(al)
        st_all.append(st)
    if not li_all:
        return []
    stats["confirmed_skeletons"] = stats.get("confirmed_skeletons", 0) + len(li_all)
    li = np.array(li_all)
    part = sk.take(li)
    need = _cap_targets(request, sk, li, rows, croles)
    k_n = len(li)
    vec = np.array([[_pick_at_least(cv, allowed[a][k], need[a, k]) for k in range(len(croles))]
                    for a in range(k_n)])
    top_vec = np.array([[int(np.flatnonzero(allowed[a][k])[-1]) for k in range(len(croles))]
                        for a in range(k_n)])
    accepted: dict[int, tuple] = {}
    first: dict[int, object] = {}
    pending = np.arange(k_n)
    for rnd in range(4):
        if pending.size == 0:
            break
        if rnd == 3:
            vec[pending] = top_vec[pending]
        elif rnd > 0:
            for a in pending:
                for k in range(len(croles)):
                    vec[a, k] = _pick_at_least(cv, allowed[a][k], cv[vec[a, k]] * 4.0 * (1 + 1e-9))
        ev = _eval_vectors(request, opts, part.take(pending), croles, vec[pending],
                           large_signal=(rnd == 0 and request.thd_max_pct is not None))
        stats["full_evaluations"] = stats.get("full_evaluations", 0) + pending.size
        still = []
        for j, a in enumerate(pending):
            if rnd == 0:
                first[a] = ev.take(np.array([j]))
                fk = set(ev.failed_keys(j))
                if fk - UP_KEYS - {"zin_ohm"}:
                    pool.append(("full", sk, li[[a]], first[a]))
                    continue            # fails on something capacitors cannot change
            if bool(ev.meets[j]):
                calloc = _alloc_caps(opts, croles, vec[a], st_all[a])
                if calloc is not None:
                    accepted[a] = (vec[a].copy(), ev.take(np.array([j])), calloc)
                    continue
            if rnd == 3 and not bool(ev.meets[j]):
                pool.append(("full", sk, li[[a]], ev.take(np.array([j]))))
                if not _cap_helpable(ev, j, request):
                    continue
            still.append(a)
        pending = np.array(still, dtype=int)
        if rnd == 3:
            break
    # the rest: every allowed combination the stock can supply, after a screen
    keep = _screen_caps(request, opts, part, list(pending), croles, allowed, stats)
    for a in pending:
        if keep[a] is None:
            continue
        got = _enumerate_caps(request, opts, part.take(np.array([a])), croles, keep[a],
                              st_all[a], stats)
        if got is not None:
            accepted[a] = got
    if not accepted:
        return []
    # final check with the ratings of the very pieces chosen
    keys = list(accepted)
    vecs = np.array([accepted[a][0] for a in keys])
    fin_part = part.take(np.array(keys))
    caps = {r: cv[vecs[:, k]] for k, r in enumerate(croles)}
    ratings = PartRatings(power_w={}, power_share={}, voltage_v={}, polarised={})
    for role in ("R1", "R2", "RC", "RE", "RE_BYP") + tuple(croles):
        vals = []
        for a in keys:
            rr = {**allocs[a].ratings, **accepted[a][2].ratings}.get(role)
            vals.append(rr)
        if all(v is None for v in vals):
            continue
        if role.startswith("C_"):
            ratings.voltage_v[role] = np.array([v["voltage_v"] for v in vals])
            ratings.polarised[role] = np.array([v["polarised"] for v in vals])
        else:
            ratings.power_w[role] = np.array([v["power_w"] if v else np.inf for v in vals])
            ratings.power_share[role] = np.array([v["power_share"] if v else 1.0 for v in vals])
    evf = _evaluate(request, fin_part.batch(caps), t, ratings, band_edges=True,
                    large_signal=False)
    stats["full_evaluations"] = stats.get("full_evaluations", 0) + len(keys)
    out = []
    for j, a in enumerate(keys):
        if not bool(evf.meets[j]):
            stats["pruned"]["final_check"] = stats["pruned"].get("final_check", 0) + 1
            continue
        out.append(_make_design(request, sk, int(li[a]), rows[a], allocs[a], accepted[a][2],
                                evf.take(np.array([j])), first.get(a), croles, t_empty))
    return out


def _eval_vectors(request, opts, part: Skeletons, croles, vecs, large_signal=False):
    cv = opts.capacitor.values
    caps = {r: cv[vecs[:, k]] for k, r in enumerate(croles)}
    volt = {r: opts.capacitor.best_rating[vecs[:, k]] for k, r in enumerate(croles)}
    return _evaluate(request, part.batch(caps), part.transistor,
                     _ratings_best(part, opts, caps_voltage=volt), band_edges=True,
                     large_signal=large_signal)


def _cap_helpable(ev, j, request) -> bool:
    """Could smaller capacitors cure the failure of the largest set? (assumption A1)"""
    keys = set(ev.failed_keys(j))
    if not keys:
        return True          # the engine accepted it; only the stock could not supply it
    win = gain_window(request)
    if "gain" in keys and not (win is not None and float(ev.metrics["gain"][j]) > win[1]):
        return False
    return keys <= {"gain", "zin_ohm"}


def _alloc_caps(opts, croles, vec, st):
    return opts.allocate({r: ("capacitor", float(opts.capacitor.values[vec[k]]), st[r])
                          for k, r in enumerate(croles)})


def _screen_caps(request, opts, part: Skeletons, pending, croles, allowed, stats):
    """Per pending skeleton, the allowed capacitor indices per role worth combining
    (None: no combination can meet the request).  One engine call for them all.

    * f_low (assumption A1, a larger capacitor never raises f_low): a value whose
      stage misses f_low_max_hz with every other capacitor at its largest allowed
      value misses it in every combination.
    * Z_in (assumption A3, a smaller capacitor never lowers |Z_in|): when the
      smallest values left miss zin_min_ohm, every combination does.
    """
    idx = {a: [np.flatnonzero(x) for x in allowed[a]] for a in pending}
    live = [a for a in pending if all(i.size for i in idx[a])]
    out = {a: None for a in pending}
    if request.f_low_max_hz is not None and live:
        rows, vecs = [], []
        for a in live:
            top = np.array([i[-1] for i in idx[a]])
            for k, ik in enumerate(idx[a]):
                for v in ik:
                    x = top.copy()
                    x[k] = v
                    rows.append(a)
                    vecs.append(x)
        ev = _eval_vectors(request, opts, part.take(np.array(rows)), croles, np.array(vecs))
        stats["full_evaluations"] = stats.get("full_evaluations", 0) + len(rows)
        f_low = np.asarray(ev.metrics["f_low_hz"], dtype=float)
        ok = ~(f_low > request.f_low_max_hz * (1 + 1e-9))      # NaN (no edge found) stays
        at = 0
        for a in live:
            kept = []
            for ik in idx[a]:
                kept.append(ik[ok[at:at + ik.size]])
                at += ik.size
            idx[a] = kept
        live = [a for a in live if all(i.size for i in idx[a])]
    if request.zin_min_ohm is not None and live:
        low = np.array([[i[0] for i in idx[a]] for a in live])
        ev = _eval_vectors(request, opts, part.take(np.array(live)), croles, low)
        stats["full_evaluations"] = stats.get("full_evaluations", 0) + len(live)
        z = np.asarray(ev.metrics["zin_ohm"], dtype=float)
        live = [a for a, zz in zip(live, z, strict=True)
                if zz >= request.zin_min_ohm * (1 - 1e-9)]
    for a in live:
        out[a] = idx[a]
    return out


def _enumerate_caps(request, opts, one: Skeletons, croles, keep, st, stats):
    """The first combination, smallest capacitances first, that meets the request."""
    combos = list(itertools.product(*[list(k) for k in keep]))
    if len(combos) > CAP_ENUM_LIMIT:
        stats["cap_enum_truncated"] = stats.get("cap_enum_truncated", 0) + 1
        stepk = len(combos) / CAP_ENUM_LIMIT
        combos = [combos[int(k * stepk)] for k in range(CAP_ENUM_LIMIT)]
    combos = [c for c in combos if _alloc_caps(opts, croles, np.array(c), st) is not None]
    if not combos:
        return None
    vecs = np.array(combos)
    order = np.argsort(np.log(opts.capacitor.values[vecs]).sum(axis=1), kind="stable")
    vecs = vecs[order]
    rep = one.take(np.zeros(len(vecs), dtype=int))
    ev = _eval_vectors(request, opts, rep, croles, vecs)
    stats["full_evaluations"] = stats.get("full_evaluations", 0) + len(vecs)
    ok = np.flatnonzero(np.asarray(ev.meets))
    if ok.size == 0:
        return None
    v = vecs[ok[0]]
    return v, ev.take(np.array([ok[0]])), _alloc_caps(opts, croles, v, st)


def _make_design(request, sk: Skeletons, i: int, row: dict, alloc_r, alloc_c, evc, ev_first,
                 croles, t_empty: int) -> Design:
    t = sk.transistor
    picks = dict(alloc_r.picks)
    picks.update(alloc_c.picks)
    mm = evc.metrics_of(0)
    if ev_first is not None:       # distortion and swing do not depend on the capacitors
        for k in ("thd_pct", "swing_vpk"):
            mm[k] = ev_first.metrics_of(0).get(k)
    emptied = alloc_r.emptied + t_empty
    terms = score_terms(gain_inf_db=row["gain_inf_db"], target_db=score_gain_target(request)[0],
                        tol_db=score_gain_target(request)[1], drift_pct=row["drift_pct"],
                        hd2_pct=row["hd2_pct"], supply_a=row["supply_a"], emptied=emptied,
                        vce_v=row["vce_v"], supply_v=request.supply_v)
    sc = float(sum(float(v) for v in terms.values()))
    for role in croles:
        p = evc.plus.get(role)
        if p is not None and any(x.dielectric and x.dielectric.lower() in
                                 ("electrolytic", "tantalum", "polymer")
                                 for x in picks[role].pieces):
            picks[role] = replace(picks[role], plus=str(np.atleast_1d(p)[0]))
    order = [r for r in ("R1", "R2", "RC", "RE", "RE_BYP", "C_B", "C_BYP", "C_IN", "C_OUT")
             if r in picks]
    warnings = list(evc.warnings(0))
    if ev_first is not None:
        warnings += [w for w in ev_first.warnings(0) if w not in warnings]
    mm["gain_inf_db"] = row["gain_inf_db"]
    mm["supply_a"] = row["supply_a"]
    mm["hd2_pct"] = row["hd2_pct"]
    return Design(
        topology=sk.topology, transistor=t.label, parts={r: picks[r] for r in order},
        metrics=mm, meets_spec=True, violations=[], warnings=warnings, score=sc, form=sk.form,
        extra={"score_terms": {k: float(v) for k, v in terms.items()},
               "transistor_pick": {"id": t.id, "location": t.location, "count": 1}},
    )
