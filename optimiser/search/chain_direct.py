"""Direct-coupled ce→cc chains from one drawer: :func:`search_direct`
(docs/search.md, "Direct-coupled chains").

1. **Followers** (:func:`followers`): every usable transistor with every resistor row
   in stock as ``S2.RE`` (one piece) whose emitter current could reach ``ic_min_a``
   (at most (V_supply − V_BE)/``S2.RE``, the base at the supply), and ``S2.C_OUT``
   from :func:`output_capacitors`.  No ``S2.RC`` (the collector on the supply), no
   divider: the base is the first stage's collector.
2. **First stages**: the single-stage ce search into the loads the followers present
   (β·(r_e + ``S2.RE``‖R_load) at the nominal β, grouped in bands within
   :data:`BAND_RATIO` by :func:`.chain_followers.load_bins`), in the gain windows of
   :func:`.chain_followers.first_stage_requests`, the best ``STAGE_TOP`` of each; the
   first stage's ``C_OUT`` is dropped (its collector drives the follower's base).
3. Every first stage with every follower of the bands it was found for, the band
   below them and every band above (the follower loads the collector resistor
   lightly; a higher load changes a ce stage's gain less): pieces of both stages
   counted together against stock, the joint DC network solved by the engine's Newton
   (:func:`optimiser.pair_evaluate.evaluate_pair`), ranked by :mod:`.chain_score`
   exactly among these candidates (:func:`.chain_confirm.confirm_chains`).

Not proven to hold the best chain the drawer allows (``S2.RE`` made of several
pieces, other output capacitors, first stages outside the searches' best and first
stages with followers of lower bands are not examined); ``search`` says what was
searched.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from inventory.parts import StockSnapshot
from inventory.values import format_value
from optimiser.design import Piece, RolePick
from optimiser.device import thermal_voltage
from optimiser.evaluate import DERATING
from optimiser.request import Request
from optimiser.search.chain_followers import first_stage_requests, load_bins
from optimiser.search.tree import usable_transistors

__all__ = ["Follower", "followers", "output_capacitors", "direct_parts", "search_direct",
           "CAP_CHOICES", "BAND_RATIO"]

#: How many output capacitor values each follower is tried with (output_capacitors).
CAP_CHOICES = 2
#: Followers whose estimated input impedances lie within this ratio share one band
#: (one pair of first-stage searches); wider than the capacitor-coupled chains' bands,
#: the follower's input impedance being far above the collector resistor it loads.
BAND_RATIO = 3.0


@dataclass(frozen=True)
class Follower:
    """One follower: its transistor, ``S2.RE`` and ``S2.C_OUT``, and the estimated
    input impedance (Ω) and gain (dB) that place its first stages."""

    label: str
    re: RolePick
    c_out: RolePick
    zin_ohm: float
    gain_db: float


def _pick(role: str, row, kind: str) -> RolePick:
    rating = row.power_w if kind == "resistor" else row.voltage_v
    dielectric = None if kind == "resistor" else row.dielectric
    piece = Piece(row.value, 1, row.id, row.location, kind, row.tolerance, rating, dielectric)
    return RolePick(role, row.value, format_value(row.value, kind), (piece,))


def output_capacitors(request: Request, snapshot: StockSnapshot, re_ohm: float) -> list:
    """The capacitor rows ``S2.C_OUT`` is tried with behind an emitter resistor
    ``re_ohm``: the largest value whose voltage rating, derated, is at least the
    supply (no DC voltage in the circuit exceeds it), and the largest value of all
    (the emitter sits below the supply), each the row of its value with the highest
    rating; at most :data:`CAP_CHOICES`.  Only values whose output pole alone is at or
    below ``f_low_max_hz`` (C ≥ 1/(2π·f_low·(``re_ohm`` + R_load)): the follower's
    output impedance is at most ``re_ohm``, and a chain's f_low is at least each pole
    of its high-pass sections) are tried.  A larger C_OUT only lowers f_low; the
    chain's score sees it only through the gain at ``mid_hz``."""
    best: dict[float, object] = {}
    for c in snapshot.capacitors:
        if c.qty < request.builds:
            continue
        old = best.get(c.value)
        if old is None or (c.voltage_v, c.qty) > (old.voltage_v, old.qty):
            best[c.value] = c
    values = sorted(best)
    if request.f_low_max_hz is not None and request.load_ohm is not None:
        least = 1.0 / (2.0 * math.pi * request.f_low_max_hz * (re_ohm + request.load_ohm))
        values = [v for v in values if v >= least]
    if not values:
        return []
    rated = [v for v in values
             if best[v].voltage_v * DERATING["capacitor_voltage"] >= request.supply_v]
    chosen = ([rated[-1]] if rated else []) + [values[-1]]
    return [best[v] for v in dict.fromkeys(chosen)][:CAP_CHOICES]


def followers(request: Request, snapshot: StockSnapshot) -> list[Follower]:
    """The followers of step 1 (module docstring), with the estimates that place their
    first stages: I_C at half the supply less V_BE over ``S2.RE``, r_e = V_T/I_C,
    Z_in = β·(r_e + ``S2.RE``‖R_load), gain (``S2.RE``‖R_load)/(r_e + ``S2.RE``‖R_load)."""
    V = float(request.supply_v)
    vt = float(thermal_voltage(25.0))
    rows: dict[float, object] = {}
    for r in snapshot.resistors:
        if r.qty >= request.builds and (r.value not in rows or r.qty > rows[r.value].qty):
            rows[r.value] = r
    out = []
    for t in usable_transistors(request, snapshot):
        for value, r in sorted(rows.items()):
            if request.ic_min_a is not None and (V - t.vbe) / value < request.ic_min_a:
                continue
            caps = output_capacitors(request, snapshot, value)
            ic = max(V / 2.0 - t.vbe, 0.1) / value
            re_ = vt / ic
            load = value if request.load_ohm is None else (
                value * request.load_ohm / (value + request.load_ohm))
            zin = float(t.beta_nominal) * (re_ + load)
            gain_db = 20.0 * math.log10(load / (re_ + load))
            for c in caps:
                out.append(Follower(t.label, _pick("S2.RE", r, "resistor"),
                                    _pick("S2.C_OUT", c, "capacitor"), zin, gain_db))
    return out


def direct_parts(first, follower: Follower) -> dict[str, RolePick]:
    """The chain's role picks: the ce design's roles as ``S1.*`` (its C_OUT dropped),
    the follower's ``S2.RE`` and ``S2.C_OUT``."""
    parts = {f"S1.{role}": replace(pick, role=f"S1.{role}")
             for role, pick in first.parts.items() if role != "C_OUT"}
    parts["S2.RE"] = follower.re
    parts["S2.C_OUT"] = follower.c_out
    return parts


def search_direct(request: Request, snapshot: StockSnapshot, run, stats: dict,
                  stage_top: int) -> list:
    """The candidate chains of steps 1 to 3 of the module docstring,
    ``[(parts, (label1, label2))]``, for :func:`.chain_confirm.confirm_chains`.

    ``run(request, top)``: the single-stage search's designs.  ``stats`` gains what was
    searched (``followers``, ``first_stage_loads_ohm``, ``first_stages``, ``why``)."""
    fol = followers(request, snapshot)
    firsts: dict = {}
    bands: dict = {}
    bins = load_bins([f.zin_ohm for f in fol], BAND_RATIO)
    for b, (load, idx) in enumerate(bins):
        for req1 in first_stage_requests(request, "ce", load, [fol[i].gain_db for i in idx]):
            for a in run(req1, stage_top):
                k = (tuple(sorted(a.values().items())), a.transistor)
                firsts.setdefault(k, a)
                bands.setdefault(k, set()).add(b)
    why = []
    if not fol:
        why.append("no follower from the drawer: none of a usable transistor, a resistor "
                   "row as S2.RE that can carry ic_min_a from the supply and a capacitor "
                   "whose output pole alone is at or below f_low_max_hz")
    elif not firsts:
        at = ", ".join(f"{b[0]:.4g} Ω" for b in bins)
        why.append("no ce stage from the drawer meets the chain's gain less its "
                   f"follower's into the loads searched ({at})")
    if why:
        stats["why"] = why
    stats.update(followers=len(fol), first_stage_loads_ohm=sorted(b[0] for b in bins),
                 first_stages=len(firsts),
                 follower_re_values=len({f.re.value for f in fol}),
                 output_capacitors=sorted({f.c_out.value for f in fol}))
    # each first stage with the followers of the bands it was found for, of the band
    # below them, and of every band above (a higher load changes a ce stage less)
    out = []
    for k, a in firsts.items():
        low = max(0, min(bands[k]) - 1)
        near = range(low, len(bins))
        for i in sorted({i for b in near for i in bins[b][1]}):
            out.append((direct_parts(a, fol[i]), (a.transistor, fol[i].label)))
    return out
