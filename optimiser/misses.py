"""When no design meets a request: the nearest misses and what would unlock it.

* **Nearest misses.**  The search is run again with the request's targets
  loosened (gain tolerance + 6 dB, no band-edge, Z_in, drift or THD target;
  validity rules stay), and its designs are judged against the *original*
  request.  They are ranked by their distance to it: the sum, over the targets
  they miss, of the relative shortfall (gain: dB outside the window / tol; an
  upper bound: value/limit − 1; a lower bound: limit/value − 1).
* **Relax one target.**  Among those designs, the ones that miss a single
  target say how far that target alone must move: "f_low_max_hz 50 → 63".
* **Buy one value.**  The search is run on the drawer plus every E12 resistor
  and E6 capacitor within (a little beyond) the span of values the drawer holds
  (at most 10 Ω–1 MΩ, 10 pF–1000 µF) as rows "to order"; a design
  meeting the request with exactly one bought value names it.  This is a
  suggestion, not a complete list.

Pure functions over plain objects; no I/O.
"""

from __future__ import annotations

import math
from dataclasses import replace

from inventory.parts import Capacitor, Resistor, StockSnapshot
from inventory.values import format_value, series_values
from optimiser.design import Design
from optimiser.request import Request
from optimiser.stage import StageBatch

__all__ = ["explain", "miss_distance", "relaxed", "TARGETS", "MISS_BUDGET_S", "BUY_BUDGET_S"]

#: Time budgets (s) of the two suggestion searches; they are heuristics, and a
#: budget only shortens the list of suggestions.
MISS_BUDGET_S = 20.0
BUY_BUDGET_S = 10.0

#: Targets of a request: key, metric, sense ("max": metric ≤ limit, "min": ≥).
TARGETS = (("f_low_max_hz", "f_low_hz", "max"), ("f_high_min_hz", "f_high_hz", "min"),
           ("zin_min_ohm", "zin_ohm", "min"), ("ic_drift_max_pct", "ic_drift_pct", "max"),
           ("thd_max_pct", "thd_pct", "max"))
UNITS = {"f_low_max_hz": "Hz", "f_high_min_hz": "Hz", "zin_min_ohm": "Ω",
         "ic_drift_max_pct": "%", "thd_max_pct": "%"}


def relaxed(request: Request) -> Request:
    """The request with its targets loosened (validity rules are not relaxable)."""
    return replace(request, gain_tol_db=request.gain_tol_db + 6.0, f_low_max_hz=None,
                   f_high_min_hz=None, zin_min_ohm=None, ic_drift_max_pct=None,
                   thd_max_pct=None, min_yield_pct=None)


def _shortfalls(request: Request, m: dict) -> dict[str, float]:
    """Target key -> relative shortfall (> 0 means missed)."""
    out = {}
    if request.gain is not None and m.get("gain_db") is not None:
        d = abs(m["gain_db"] - request.gain_db) - request.gain_tol_db
        if d > 1e-12:
            out["gain_db"] = d / max(request.gain_tol_db, 1e-3)
    for key, metric, sense in TARGETS:
        lim = getattr(request, key)
        v = m.get(metric)
        if lim is None:
            continue
        if v is None or not math.isfinite(v):
            if key == "f_high_min_hz" and v is None and m.get("_no_fhigh"):
                out[key] = 1.0
            continue
        if sense == "max" and v > lim:
            out[key] = v / lim - 1.0
        elif sense == "min" and v < lim:
            out[key] = lim / max(v, 1e-300) - 1.0
    return out


def miss_distance(request: Request, metrics: dict, valid: bool = True) -> float:
    """Distance of a design's figures to the request (0 when it meets every target)."""
    return sum(_shortfalls(request, metrics).values()) + (0.0 if valid else 10.0)


def _judge(request: Request, designs: list[Design], snapshot: StockSnapshot) -> list[Design]:
    """Re-evaluate designs against ``request``; misses get violations and a distance."""
    from optimiser.evaluate import evaluate
    out = []
    for d in designs:
        t = snapshot.transistor(d.transistor)
        vals = {r: p.value for r, p in d.parts.items()}
        b = StageBatch.from_values(d.topology, **vals)
        ev = evaluate(request, b, t, None)
        # the loosened search sized the capacitors for no f_low target: also try the
        # largest capacitors in stock and keep whichever comes nearer
        big = max((c.value for c in snapshot.capacitors if c.qty >= request.builds), default=None)
        if big is not None and any(r.startswith("C_") for r in vals):
            vals2 = {r: (big if r.startswith("C_") else v) for r, v in vals.items()}
            ev2 = evaluate(request, StageBatch.from_values(d.topology, **vals2), t, None)
            if miss_distance(request, ev2.metrics_of(0), bool(ev2.valid[0])) < miss_distance(
                    request, ev.metrics_of(0), bool(ev.valid[0])):
                ev = ev2
                parts = dict(d.parts)
                for r in parts:
                    if r.startswith("C_"):
                        parts[r] = replace(parts[r], value=big, label=format_value(big, "capacitor"),
                                           pieces=tuple(replace(p, value=big, id=None,
                                                                location="(largest in stock)")
                                                        for p in parts[r].pieces))
                d = replace(d, parts=parts)
        m = ev.metrics_of(0)
        for k in ("gain_inf_db", "hd2_pct", "supply_a"):
            if k in d.metrics:
                m[k] = d.metrics[k]
        viol = ev.violations(0)
        if not viol:
            continue
        dist = miss_distance(request, m, bool(ev.valid[0]))
        out.append(replace(d, metrics=m, meets_spec=False, violations=viol, rank=None,
                           extra={**d.extra, "miss_distance": dist,
                                  "shortfalls": _shortfalls(request, m)}))
    out.sort(key=lambda d: d.extra["miss_distance"])
    return out


def _fmt(x: float, unit: str) -> str:
    from inventory.values import format_si
    return format_si(x, unit) if unit != "%" else f"{x:.3g} %"


def explain(request: Request, snapshot: StockSnapshot, pool, misses: int, stats: dict):
    """(nearest misses, unlock suggestions) for a request nothing in stock meets."""
    from optimiser.search import search_designs

    unlock: list[str] = []
    ts = [t for t in snapshot.transistors]
    if request.transistor != "any" and snapshot.transistor(request.transistor):
        ts = [snapshot.transistor(request.transistor)]
    if not ts:
        return [], ["no transistor in stock: add one (stock import) to design anything"]
    usable = [t for t in ts if t.qty >= request.builds]
    if not usable:
        return [], [f"no transistor type has {request.builds} pieces for {request.builds} builds"]
    rated = [t for t in usable if t.vceo is None or request.supply_v <= t.vceo]
    if not rated:
        best = max(t.vceo for t in usable)
        return [], [f"no stocked transistor is rated for {request.supply_v:g} V (highest vceo "
                    f"{best:g} V): lower supply_v to {best:g} V or buy a higher-voltage type"]
    s2: dict = {"pruned": {}}
    loose = relaxed(request)
    found, _ = search_designs(loose, snapshot, max(4 * misses, 20), s2, budget_s=MISS_BUDGET_S)
    stats["misses_search"] = {k: v for k, v in s2.items() if k != "pruned"}
    judged = _judge(request, found, snapshot)
    nearest = judged[:misses]
    for r, d in enumerate(nearest, 1):
        d.rank = r
    # one target relaxed
    best: dict[str, tuple[float, float]] = {}
    for d in judged:
        sf = d.extra["shortfalls"]
        if len(sf) != 1 or len(d.violations) != 1:
            continue
        (key, amount), = sf.items()
        if key not in best or amount < best[key][0]:
            need = (abs(d.metrics["gain_db"] - request.gain_db) if key == "gain_db"
                    else _needed(key, d.metrics))
            best[key] = (amount, need)
    for key, (_, need) in sorted(best.items(), key=lambda kv: kv[1][0]):
        if key == "gain_db":
            unlock.append(f"relax gain_tol_db from {request.gain_tol_db:g} to "
                          f"{need + 0.005:.2f} dB")
        else:
            unit = UNITS[key]
            unlock.append(f"relax {key} from {_fmt(getattr(request, key), unit)} to "
                          f"{_fmt(need, unit)}")
    # one value bought
    try:
        unlock += _buy_one(request, snapshot)
    except Exception as exc:  # a suggestion only; never fail the answer for it
        stats["buy_one_error"] = str(exc)
    if not unlock:
        unlock.append("no single relaxed target or single bought value found; "
                      "see the nearest misses")
    return nearest, unlock


def _needed(key: str, m: dict) -> float:
    metric = {k: mm for k, mm, _ in TARGETS}[key]
    return float(m[metric])


def _virtual(snapshot: StockSnapshot) -> StockSnapshot:
    res = list(snapshot.resistors)
    caps = list(snapshot.capacitors)
    k = 1
    rlo = min((r.value for r in res), default=10.0) / 2
    rhi = max((r.value for r in res), default=1e6) * 2
    clo = min((c.value for c in caps), default=10e-12) / 3
    chi = max((c.value for c in caps), default=1000e-6) * 3
    for v in series_values("E12", max(10.0, rlo), min(1e6, rhi)):
        res.append(Resistor(float(v), 10**9, id=-k, location="to order"))
        k += 1
    for v in series_values("E6", max(10e-12, clo), min(1000e-6, chi)):
        diel = "electrolytic" if v >= 1e-6 else "ceramic"
        caps.append(Capacitor(float(v), 10**9, id=-k, location="to order", dielectric=diel))
        k += 1
    return replace(snapshot, resistors=tuple(res), capacitors=tuple(caps))


def _buy_one(request: Request, snapshot: StockSnapshot) -> list[str]:
    from optimiser.search import search_designs
    s3: dict = {"pruned": {}}
    found, _ = search_designs(request, _virtual(snapshot), 20, s3, budget_s=BUY_BUDGET_S)
    out: list[str] = []
    for d in found:
        bought = {(p.kind, p.value) for rp in d.parts.values() for p in rp.pieces
                  if p.id is not None and p.id < 0}
        if len(bought) != 1:
            continue
        (kind, value), = bought
        roles = [r for r, rp in d.parts.items() if any(p.id is not None and p.id < 0
                                                       for p in rp.pieces)]
        text = (f"buy a {format_value(value, kind)} {kind} (for {', '.join(roles)}): "
                f"then a design meets the request (score {d.score:.3g})")
        if text not in out and not any(format_value(value, kind) in o for o in out):
            out.append(text)
        if len(out) >= 3:
            break
    return out
