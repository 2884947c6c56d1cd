"""The DC voltages to probe, and the spread that tolerances and drift allow.

The nominal figures are the design's ``vb_v``, ``ve_v``, ``vc_v`` (25 °C,
nominal β).  The spread is a worst-case box: the engine evaluates the stage at
every vertex of the resistor tolerance box (each DC resistor at its value
× (1 ± tolerance)), each at the nominal point and at the four drift corners
(β ∈ {hfe_min, hfe_max} × the ends of temp_c).  The DC node voltages are
monotonic in each resistance, so their extremes lie on those vertices.

At a drift corner the engine gives I_C and V_CE; the node voltages follow
exactly: V_C = V_S − I_C·RC (V_S without RC), V_E = V_C − V_CE,
I_E = V_E / (RE + RE_BYP), and V_B = V_TH − R_TH·(I_E − I_C).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np

from inventory.parts import DEFAULT_RESISTOR_TOLERANCE
from optimiser.design import Design
from optimiser.request import Request
from optimiser.stage import RESISTOR_ROLES, StageBatch

__all__ = ["Probe", "nodes_at_corners", "tolerance_vertices", "probes", "sample_percentiles",
           "with_percentiles"]

NODES = ("base", "emitter", "collector")
_KEYS = {"base": "vb_v", "emitter": "ve_v", "collector": "vc_v"}


@dataclass(frozen=True)
class Probe:
    """One DC voltage to check with a meter (volts to ground)."""

    node: str
    volts: float
    low: float | None = None
    high: float | None = None
    basis: str = "nominal"
    p5: float | None = None          # 5th and 95th percentiles over Monte Carlo samples
    p95: float | None = None


def nodes_at_corners(supply_v: float, values: dict[str, np.ndarray], ic: np.ndarray,
                     vce: np.ndarray) -> dict[str, np.ndarray]:
    """Node voltages (V) from I_C (A) and V_CE (V) at corners; arrays broadcast.

    ``values`` maps roles to resistances (ohm) broadcastable against ``ic``.
    """
    get = lambda r: np.asarray(values.get(r, 0.0), float)  # noqa: E731
    r1, r2, rc = get("R1"), get("R2"), get("RC")
    re_tot = get("RE") + get("RE_BYP")
    v_th = supply_v * r2 / (r1 + r2)
    r_th = r1 * r2 / (r1 + r2)
    vc = supply_v - ic * rc
    ve = vc - vce
    with np.errstate(divide="ignore", invalid="ignore"):
        ie = np.where(re_tot > 0, ve / re_tot, np.nan)
    vb = v_th - r_th * (ie - ic)
    return {"base": vb, "emitter": ve, "collector": vc}


def tolerance_vertices(design: Design) -> StageBatch:
    """Every vertex of the DC resistors' tolerance box as a batch (2**k stages)."""
    vals = design.values()
    roles = [r for r in RESISTOR_ROLES if vals.get(r, 0.0) > 0]
    tol = {}
    for r in roles:
        t = [pc.tolerance for pc in design.parts[r].pieces if pc.tolerance is not None]
        tol[r] = max(t) if t else DEFAULT_RESISTOR_TOLERANCE
    signs = np.array(list(itertools.product((-1.0, 1.0), repeat=len(roles))))
    arrays = {r: vals[r] * (1 + signs[:, i] * tol[r]) for i, r in enumerate(roles)}
    for r, v in vals.items():
        if r not in arrays:
            arrays[r] = np.full(len(signs), v)
    return StageBatch.from_values(design.topology, **arrays)


def probes(design: Design, request: Request, transistor=None, *,
           vertices_eval=None, batch: StageBatch | None = None) -> list[Probe]:
    """The three DC voltages to probe, with their spread when the engine is at hand.

    ``vertices_eval`` is the engine's evaluation of ``batch`` (the tolerance
    vertices); with it the spread is filled in, else each probe is nominal.
    """
    nominal = {n: design.metrics.get(k) for n, k in _KEYS.items()}
    if vertices_eval is None or batch is None:
        return [Probe(n, float(v)) for n, v in nominal.items() if v is not None]
    m = vertices_eval.metrics
    c = vertices_eval.corners
    vals = {r: batch.role(r)[:, None] for r in RESISTOR_ROLES}
    at = nodes_at_corners(request.supply_v, vals, np.asarray(c["ic_a"], float),
                          np.asarray(c["vce_v"], float))
    temps = sorted(set(request.temp_c))
    basis = ("worst case over resistor tolerances, hFE " +
             f"{transistor.hfe_min:g}–{transistor.hfe_max:g}" if transistor is not None else
             "worst case over resistor tolerances, hFE spread")
    basis += f", {temps[0]:g}–{temps[-1]:g} °C" if len(temps) > 1 else f", {temps[0]:g} °C"
    out = []
    for n in NODES:
        if nominal[n] is None:
            continue
        pool = np.concatenate([np.asarray(m[_KEYS[n]], float).ravel(), at[n].ravel()])
        pool = pool[np.isfinite(pool)]
        if pool.size == 0:
            out.append(Probe(n, float(nominal[n])))
            continue
        out.append(Probe(n, float(nominal[n]), float(pool.min()), float(pool.max()), basis))
    return out


def sample_percentiles(supply_v: float, samples: dict) -> dict[str, tuple[float, float]]:
    """5th/95th percentiles (V) of the node voltages over Monte Carlo samples.

    ``samples`` holds per-sample role values (ohm) and the sample's ``ic_a`` and
    ``vce_v`` (at its own hFE and temperature), as the yield run returns them;
    empty when those are missing.
    """
    if not samples or "ic_a" not in samples or "vce_v" not in samples or "R1" not in samples:
        return {}
    vals = {r: np.asarray(samples[r], float) for r in RESISTOR_ROLES if r in samples}
    at = nodes_at_corners(supply_v, vals, np.asarray(samples["ic_a"], float),
                          np.asarray(samples["vce_v"], float))
    out = {}
    for node, v in at.items():
        v = v[np.isfinite(v)]
        if v.size:
            a, b = np.percentile(v, [5, 95])
            out[node] = (float(a), float(b))
    return out


def with_percentiles(items: list[Probe], pct: dict[str, tuple[float, float]]) -> list[Probe]:
    """The probes with their sample percentiles filled in where known."""
    from dataclasses import replace

    return [replace(p, p5=pct[p.node][0], p95=pct[p.node][1]) if p.node in pct else p
            for p in items]
