"""Tolerances, hFE spread and temperature: Monte Carlo yield and worst case (docs/model.md).

Each sample draws every resistor and capacitor uniformly within ± its tolerance,
hFE log-uniformly between hfe_min and hfe_max (a value at 25 °C, then scaled to the
sample's temperature by the device model), and the ambient temperature uniformly over
``temp_c``.  The samples are one :class:`~optimiser.stage.StageBatch`, so the engine's
exact DC and AC run once, vectorised.  A sample passes when its own figures meet every
target of the request except ``ic_drift_max_pct`` (a property of the design, checked
once) and it is forward-active with margin (V_CE ≥ vce_sat, not cut off) and within the
transistor's limits.  Draws come from ``numpy.random.default_rng(seed)`` in a fixed
order (roles in the order of the topology's ``ROLE_NAMES``, :mod:`optimiser.stages`,
then hFE, then temperature), so the same seed and design give the same samples in ``analyse``, ``design`` and ``plan``.

Two transistors (a chain or a cascode, :func:`monte_carlo_pair`) follow the same rules
and the same draw order: every role of the form in ``role_names`` order, then the hFE
of S1, then of S2 (each transistor's own spread, drawn independently), then the
temperature; the samples are one :class:`~optimiser.stages.pair.PairBatch` through
:func:`optimiser.pair_evaluate.evaluate_pair`, each at its own hFE pair and temperature.
A sample passes when the whole circuit meets every target but the drift ones and both
transistors are forward-active and within their limits.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from inventory.parts import DEFAULT_CAPACITOR_TOLERANCE, DEFAULT_RESISTOR_TOLERANCE, Transistor

from . import ac, distortion
from .dc import operating_point
from .device import device_from_transistor
from .request import Request
from .stage import RESISTOR_ROLES, StageBatch
from .stages import module as stage_module

__all__ = ["YieldResult", "draw", "monte_carlo", "worst_case", "WorstCase", "apply_yield",
           "draw_pair", "monte_carlo_pair", "yield_violation"]


@dataclass
class YieldResult:
    """Monte Carlo outcome for one design.

    Attributes
    ----------
    yield_pct : float
        Passing share × 100.
    fail_share : dict[str, float]
        Share (0–1) of samples failing each check: the request's targets ("gain",
        "f_low_hz", "f_high_hz", "zin_ohm", "thd_pct"), "forward_active", "limits".
    percentiles : dict[str, tuple[float, float]]
        5th and 95th percentiles of gain (V/V), gain_db, f_low_hz (when computed),
        ic_a and vce_v.
    samples : dict[str, ndarray]
        Per-sample draws (role values, ``beta25``, ``temp_c``) and figures
        (``gain``, ``gain_db``, ``ic_a``, ``vce_v``, ``zin_ohm``, ``f_low_hz``, …)
        and ``passed``.
    n, seed : int
    """

    yield_pct: float
    fail_share: dict[str, float]
    percentiles: dict[str, tuple[float, float]]
    samples: dict[str, np.ndarray] = field(repr=False)
    n: int = 0
    seed: int = 0

    @property
    def most_frequent_failure(self) -> str | None:
        worst = max(self.fail_share.items(), key=lambda kv: kv[1], default=(None, 0.0))
        return worst[0] if worst[1] > 0 else None

    def to_json(self) -> dict:
        return {
            "yield_pct": self.yield_pct, "samples": self.n, "seed": self.seed,
            "fail_share": dict(self.fail_share),
            "percentiles": {k: [a, b] for k, (a, b) in self.percentiles.items()},
            "most_frequent_failure": self.most_frequent_failure,
        }


def _tol(role: str, tolerances: dict[str, float] | None, resistor: bool | None = None) -> float:
    """The role's tolerance: given, else 5 % for a resistor and 20 % for a capacitor
    (``resistor`` None: the kind read from the role's name, ``S1.RC`` as ``RC``)."""
    t = (tolerances or {}).get(role)
    if t is not None:
        return float(t)
    if resistor is None:
        resistor = role.rsplit(".", 1)[-1] in RESISTOR_ROLES
    return DEFAULT_RESISTOR_TOLERANCE if resistor else DEFAULT_CAPACITOR_TOLERANCE


def _draw_parts(rng, roles, values, tolerances, samples: int, resistor=lambda role: None):
    """Each role uniformly within ± its tolerance, in the order of ``roles``."""
    vals = {}
    for role in roles:
        v = float(values.get(role, 0.0) or 0.0)
        u = rng.uniform(-1.0, 1.0, samples)          # drawn for every role: fixed order
        t = _tol(role, tolerances, resistor(role))
        vals[role] = v * (1.0 + t * u) if v > 0 else np.zeros(samples)
    return vals


def _draw_hfe(rng, transistor: Transistor, samples: int) -> np.ndarray:
    """hFE at 25 °C, log-uniform between the transistor's hfe_min and hfe_max."""
    lo, hi = float(transistor.hfe_min), float(transistor.hfe_max)
    return np.exp(rng.uniform(math.log(lo), math.log(hi), samples))


def _draw_temps(rng, temp_c, samples: int) -> np.ndarray:
    t_lo, t_hi = float(temp_c[0]), float(temp_c[1])
    return rng.uniform(t_lo, t_hi, samples) if t_hi > t_lo else np.full(samples, t_lo)


def draw(topology: str, values: dict[str, float], transistor: Transistor,
         tolerances: dict[str, float] | None, temp_c, samples: int, seed: int):
    """The random draws: (StageBatch of ``samples`` stages, beta25 (n,), temp_c (n,))."""
    rng = np.random.default_rng(seed)
    vals = _draw_parts(rng, stage_module(topology).ROLE_NAMES, values, tolerances, samples)
    beta25 = _draw_hfe(rng, transistor, samples)
    temps = _draw_temps(rng, temp_c, samples)
    return StageBatch.from_values(topology, **vals), beta25, temps


def draw_pair(form, values: dict[str, float], transistors, tolerances: dict[str, float] | None,
              temp_c, samples: int, seed: int):
    """The random draws of a two-transistor circuit of ``form`` (a
    :class:`~optimiser.stages.pair.PairForm`): (PairBatch of ``samples`` circuits,
    (beta25 of S1, beta25 of S2), temp_c), each array (n,)."""
    from .stages.pair import PairBatch

    rng = np.random.default_rng(seed)
    vals = _draw_parts(rng, form.role_names, values, tolerances, samples,
                       lambda role: form.kind(role) == "resistor")
    betas = tuple(_draw_hfe(rng, t, samples) for t in transistors)
    temps = _draw_temps(rng, temp_c, samples)
    return PairBatch.from_values(form, **vals), betas, temps


def _within_limits(op, model, supply_v: float) -> tuple[np.ndarray, np.ndarray]:
    """(forward-active with margin, within the transistor's limits), each (n,): V_CE ≥
    vce_sat, not cut off, solved; I_C ≤ ic_max, P ≤ pd, the supply ≤ V_CEO."""
    fa = (op.vce >= model.vce_sat) & ~op.cutoff & op.converged
    lim = np.ones(np.shape(op.ic), bool)
    if math.isfinite(model.ic_max):
        lim &= op.ic <= model.ic_max
    if math.isfinite(model.pd):
        lim &= op.pq <= model.pd
    if math.isfinite(model.vceo):
        lim &= supply_v <= model.vceo
    return fa, lim


def _figures(request: Request, batch: StageBatch, transistor: Transistor, beta25, temps,
             *, edges: bool, thd: bool):
    model = device_from_transistor(transistor)
    op = operating_point(batch.topology, request.supply_v, batch, model, temp_c=temps,
                         beta=beta25)
    ss = ac.small_signal(op, model)
    mid = ac.midband(request, batch, model, op, ss, want_zout=False)
    gain = np.abs(mid["h"])
    with np.errstate(divide="ignore"):
        out = {"gain": gain, "gain_db": 20 * np.log10(gain), "ic_a": op.ic, "vce_v": op.vce,
               "zin_ohm": np.abs(mid["zin"]), "pd_q_w": op.pq}
    n = batch.n
    fa, lim = _within_limits(op, model, request.supply_v)
    if edges:
        want_high = model.has_ft and model.has_cob and request.f_high_min_hz is not None
        f_low, f_high, _ = ac.band_edges(request, batch, model, op, gain, ss, want_high=want_high)
        out["f_low_hz"] = f_low
        out["f_high_hz"] = f_high if want_high else np.full(n, np.nan)
    if thd:
        out["thd_pct"], out["thd_active"] = distortion.thd_at_input(request, batch, model, op)
    return out, fa, lim, model


def _target_fails(request: Request, fig: dict, model) -> dict[str, np.ndarray]:
    """Per sample, which of the request's targets it misses.  ``model`` is the device
    model, or a bool: whether f_high can be computed (every transistor has ft and cob)."""
    n = fig["gain"].shape[0]
    has_fhigh = model if isinstance(model, bool) else bool(model.has_ft and model.has_cob)
    fails = {}
    if request.gain is not None:
        tdb = 20 * math.log10(request.gain)
        fails["gain"] = ~(np.abs(fig["gain_db"] - tdb) <= request.gain_tol_db)
    if request.f_low_max_hz is not None:
        f = fig["f_low_hz"]
        fails["f_low_hz"] = np.isfinite(f) & (f > request.f_low_max_hz)
    if request.f_high_min_hz is not None:
        if not has_fhigh:
            fails["f_high_hz"] = np.ones(n, bool)
        else:
            f = fig["f_high_hz"]
            fails["f_high_hz"] = np.isfinite(f) & (f < request.f_high_min_hz)
    if request.zin_min_ohm is not None:
        fails["zin_ohm"] = ~(fig["zin_ohm"] >= request.zin_min_ohm)
    if getattr(request, "zout_max_ohm", None) is not None and "zout_ohm" in fig:
        fails["zout_ohm"] = ~(fig["zout_ohm"] <= request.zout_max_ohm)
    if request.thd_max_pct is not None and "thd_pct" in fig:
        # as optimiser.evaluate.thd_rule: a period leaving the forward-active region fails
        fails["thd_pct"] = ~(fig["thd_pct"] <= request.thd_max_pct) | ~fig.get("thd_active", True)
    if getattr(request, "ic_min_a", None) is not None and "ic_a" in fig:
        fails["ic_a"] = ~(fig["ic_a"] >= request.ic_min_a)
    return fails


def monte_carlo(request: Request, values: dict[str, float], transistor: Transistor,
                tolerances: dict[str, float] | None = None, samples: int | None = None,
                seed: int | None = None) -> YieldResult:
    """Monte Carlo yield of one design (docs/model.md).

    Parameters
    ----------
    request : Request
        Targets, supply, source, load, temperature range.
    values : dict
        role -> value (ohm, farad) of the design.
    transistor : Transistor
    tolerances : dict, optional
        role -> fractional tolerance; missing roles take 5 % (R) / 20 % (C).
    samples, seed : int, optional
        Default ``request.samples`` (2000) and ``request.seed`` (0).
    """
    n = int(samples if samples is not None else request.samples)
    sd = int(seed if seed is not None else request.seed)
    batch, beta25, temps = draw(request.topology, values, transistor, tolerances,
                                request.temp_c, n, sd)
    edges = request.f_low_max_hz is not None or request.f_high_min_hz is not None
    fig, fa, lim, model = _figures(request, batch, transistor, beta25, temps, edges=edges,
                                   thd=request.thd_max_pct is not None)
    fails = _target_fails(request, fig, model)
    fails["forward_active"] = ~fa
    fails["limits"] = ~lim
    smp = {r: batch.role(r) for r in stage_module(request.topology).ROLE_NAMES}
    smp.update(beta25=beta25, temp_c=temps, **fig)
    return _result(fails, fig, ("gain", "gain_db", "f_low_hz", "ic_a", "vce_v"), smp, n, sd)


def _result(fails: dict, fig: dict, spread_keys, smp: dict, n: int, seed: int) -> YieldResult:
    """The passing share, the share failing each check and the 5th–95th percentiles."""
    passed = np.ones(n, bool)
    for f in fails.values():
        passed &= ~f
    pct = {}
    for k in spread_keys:
        if k in fig:
            x = fig[k][np.isfinite(fig[k])]
            if x.size:
                a, b = np.percentile(x, [5, 95])
                pct[k] = (float(a), float(b))
    smp["passed"] = passed
    return YieldResult(yield_pct=float(100.0 * passed.mean()),
                       fail_share={k: float(v.mean()) for k, v in fails.items()},
                       percentiles=pct, samples=smp, n=n, seed=seed)


def monte_carlo_pair(request: Request, form, values: dict[str, float], transistors,
                     tolerances: dict[str, float] | None = None, samples: int | None = None,
                     seed: int | None = None) -> YieldResult:
    """Monte Carlo yield of one two-transistor circuit (a chain or a cascode).

    The draws are :func:`draw_pair`'s; every sample is evaluated by
    :func:`optimiser.pair_evaluate.evaluate_pair` at its own hFE pair and temperature
    (one batch).  Checks: the request's targets on the whole circuit (gain, f_low_hz,
    f_high_hz, zin_ohm, zout_ohm, thd_pct), ``S1.ic_a`` / ``S2.ic_a`` for ``ic_min_a``,
    and ``forward_active`` and ``limits`` over both transistors.  Per-sample figures
    in ``samples``: the whole circuit's, each stage's ``S1.ic_a``, ``S1.vce_v``, …, the
    hFE draws ``S1.beta25``, ``S2.beta25`` and every node's DC voltage ``V(node)``.
    """
    from .pair_evaluate import evaluate_pair

    n = int(samples if samples is not None else request.samples)
    sd = int(seed if seed is not None else request.seed)
    batch, betas, temps = draw_pair(form, values, transistors, tolerances, request.temp_c,
                                    n, sd)
    edges = request.f_low_max_hz is not None or request.f_high_min_hz is not None
    ev = evaluate_pair(request, batch, transistors, band_edges=edges,
                       large_signal="thd" if request.thd_max_pct is not None else False,
                       temp_c=temps, betas=betas)
    fig = {k: np.asarray(v) for k, v in ev.metrics.items()
           if k in ("gain", "gain_db", "zin_ohm", "zout_ohm")
           or (k in ("f_low_hz", "f_high_hz") and edges)
           or (k == "thd_pct" and request.thd_max_pct is not None)}
    has_fhigh = all(m.has_ft and m.has_cob for m in ev.models)
    if request.f_high_min_hz is None:
        fig.pop("f_high_hz", None)
    fails = _target_fails(request, fig, has_fhigh)
    for r in ev.rules:              # the THD target as the engine judges it (thd_rule)
        if r.key == "thd_pct":
            fails["thd_pct"] = np.asarray(r.fail, dtype=bool)
    fa = np.ones(n, bool)
    lim = np.ones(n, bool)
    for stage, op, m, st in zip(form.stages, ev.ops, ev.models, ev.stages, strict=True):
        if request.ic_min_a is not None:
            fails[f"{stage}.ic_a"] = ~(st["ic_a"] >= request.ic_min_a)
        f, lm = _within_limits(op, m, request.supply_v)
        fa &= f
        lim &= lm
        fig[f"{stage}.ic_a"] = np.asarray(st["ic_a"])
        fig[f"{stage}.vce_v"] = np.asarray(st["vce_v"])
    fails["forward_active"] = ~fa
    fails["limits"] = ~lim
    smp = {r: batch.role(r) for r in form.role_names}
    smp.update({f"{s}.beta25": b for s, b in zip(form.stages, betas, strict=True)})
    smp.update(temp_c=temps, **fig)
    smp.update({f"V({node})": np.asarray(ev.volts[node]) for node in form.nodes()
                if node in ev.volts})
    spread_keys = ("gain", "gain_db", "f_low_hz") + tuple(
        f"{s}.{k}" for s in form.stages for k in ("ic_a", "vce_v"))
    return _result(fails, fig, spread_keys, smp, n, sd)


@dataclass
class WorstCase:
    """Extreme figures over the tolerance box, found at sensitivity-guided corners.

    ``ranges[key] = (low, high)`` for gain, gain_db, ic_a, vce_v, zin_ohm (and
    f_low_hz when the request bounds it); ``meets`` says whether every target holds
    at every corner examined (then the design is guaranteed within the first-order
    picture); ``failing`` lists the targets missed at some corner.
    """

    ranges: dict[str, tuple[float, float]]
    meets: bool
    failing: list[str]

    def to_json(self) -> dict:
        return {"ranges": {k: list(v) for k, v in self.ranges.items()}, "meets": self.meets,
                "failing": list(self.failing)}


def worst_case(request: Request, values: dict[str, float], transistor: Transistor,
               tolerances: dict[str, float] | None = None, *, rel_step: float = 1e-4) -> WorstCase:
    """Corner analysis: each tolerance at the end its sensitivity sign points to.

    Sensitivities of each figure to every part value, hFE and temperature are taken by
    one-sided finite differences at the nominal point; for each figure the two corners
    (all parameters pushed to raise it, and to lower it) are then evaluated exactly.
    """
    topo = request.topology
    roles = [r for r in stage_module(topo).ROLE_NAMES if (values.get(r, 0.0) or 0.0) > 0]
    lo_b, hi_b = float(transistor.hfe_min), float(transistor.hfe_max)
    b0 = math.sqrt(lo_b * hi_b) if transistor.hfe_typ is None else float(transistor.hfe_typ)
    t_lo, t_hi = float(request.temp_c[0]), float(request.temp_c[1])
    t0 = 0.5 * (t_lo + t_hi)
    params = roles + ["beta", "temp"]
    base = {r: float(values[r]) for r in roles}
    P = len(params)
    # nominal + one step per parameter
    rows = []
    for j in range(P + 1):
        v = dict(base)
        beta, temp = b0, t0
        if j < P:
            name = params[j]
            if name == "beta":
                beta = b0 * (1 + rel_step)
            elif name == "temp":
                temp = t0 + 0.01
            else:
                v[name] = base[name] * (1 + rel_step)
        rows.append((v, beta, temp))
    edges = request.f_low_max_hz is not None
    fig = _rows_figures(request, transistor, topo, rows, edges)
    keys = [k for k in ("gain", "gain_db", "ic_a", "vce_v", "zin_ohm", "f_low_hz") if k in fig]
    corners = []
    for k in keys:
        d = fig[k][:P] - fig[k][P]
        for sense in (+1, -1):
            v = dict(base)
            beta, temp = b0, t0
            for j, name in enumerate(params):
                up = (d[j] * sense) >= 0
                if name == "beta":
                    beta = hi_b if up else lo_b
                elif name == "temp":
                    temp = t_hi if up else t_lo
                else:
                    tol = _tol(name, tolerances)
                    v[name] = base[name] * (1 + tol if up else 1 - tol)
            corners.append((v, beta, temp))
    cf = _rows_figures(request, transistor, topo, corners, edges)
    ranges = {k: (float(np.nanmin(cf[k])), float(np.nanmax(cf[k]))) for k in keys}
    model = device_from_transistor(transistor)
    fails = _target_fails(request, cf, model)
    fails.pop("thd_pct", None)
    failing = [k for k, f in fails.items() if f.any()]
    fa_bad = (cf["vce_v"] < model.vce_sat).any()
    if fa_bad:
        failing.append("forward_active")
    return WorstCase(ranges=ranges, meets=not failing, failing=failing)


def _rows_figures(request, transistor, topo, rows, edges):
    n = len(rows)
    roles = stage_module(topo).ROLE_NAMES
    vals = {r: np.array([row[0].get(r, 0.0) for row in rows]) for r in roles}
    batch = StageBatch.from_values(topo, **vals)
    beta = np.array([row[1] for row in rows])
    temps = np.array([row[2] for row in rows])
    fig, _, _, _ = _figures(request, batch, transistor, beta, temps, edges=edges, thd=False)
    if request.f_high_min_hz is not None and "f_high_hz" not in fig:
        fig["f_high_hz"] = np.full(n, np.nan)
    return fig


def yield_violation(result: YieldResult, request: Request) -> str | None:
    """The violation text when the yield is below ``min_yield_pct``, else None."""
    if request.min_yield_pct is not None and result.yield_pct < request.min_yield_pct:
        return f"yield_pct {result.yield_pct:.1f} < {request.min_yield_pct:g}"
    return None


def apply_yield(design, result: YieldResult, request: Request) -> None:
    """Put ``yield_pct`` into a Design's metrics and judge ``min_yield_pct``."""
    design.metrics["yield_pct"] = result.yield_pct
    design.extra["yield"] = result.to_json()
    miss = yield_violation(result, request)
    if miss:
        design.meets_spec = False
        design.violations.append(miss)
