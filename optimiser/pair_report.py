"""One analysed two-transistor circuit as JSON (docs/json.md) and its cautions.

:func:`pair_report` gives the ``design`` object of ``analyse --json`` for a chain or
a cascode; :func:`pair_cautions` the builder's cautions of each stage, with the
thresholds of :class:`optimiser.cautions.CautionSettings` (the single stages' own).
"""

from __future__ import annotations

import numpy as np

from inventory.parts import DEFAULT_CAPACITOR_VOLTAGE_V, DEFAULT_RESISTOR_POWER_W

from .cautions import DEFAULT_SETTINGS, POLARISED_DIELECTRICS, SEVERITIES, Caution, cautions
from .design import Design, _clean
from .pair_evaluate import CORNERS, PairEvaluation

__all__ = ["pair_report", "pair_cautions", "probe_nodes", "pair_response", "pair_waveform",
           "probe_ranges"]


def _fmt_v(v: float) -> str:
    return f"{v:.3g} V" if abs(v) < 100 else f"{v:.0f} V"


def _fmt_w(w: float) -> str:
    return f"{w:.3g} W" if abs(w) >= 1 else f"{w * 1e3:.3g} mW"


def probe_nodes(ev: PairEvaluation, i: int) -> dict[str, float]:
    """The DC voltage of each node to check with a meter (V to ground), in form order:
    one node of each set joined by an absent resistor, none joined to supply or ground."""
    form = ev.batch.form
    values = ev.batch.one(i)
    parent: dict[str, str] = {}

    def find(n):
        while parent.get(n, n) != n:
            n = parent[n]
        return n

    for role, a, b in form.wiring:
        if form.kind(role) == "resistor" and values.get(role, 0.0) == 0.0:
            ra, rb = find(a), find(b)
            if ra != rb:
                if rb in ("supply", "ground"):
                    ra, rb = rb, ra
                parent[rb] = ra
    out, seen = {}, set()
    for n in form.nodes():
        r = find(n)
        if r in ("supply", "ground") or r in seen or n not in ev.volts:
            continue
        seen.add(r)
        out[n] = float(ev.volts[n][i])
    return out


def _one(ev: PairEvaluation, i: int):
    """Circuit ``i`` of ``ev``: (batch, operating points, node voltages), each of one row."""
    return (ev.batch.take([i]), [op.take([i]) for op in ev.ops],
            {k: np.asarray(v)[[i]] for k, v in ev.volts.items()})


def pair_response(ev: PairEvaluation, i: int, freqs) -> np.ndarray:
    """v_load / v_emf of circuit ``i`` at ``freqs`` (Hz), source and load in place, at
    its nominal operating points: complex (nf,)."""
    from . import ac
    from .stages.pair import ac_network

    batch, ops, _ = _one(ev, i)
    ss = tuple(ac.small_signal(op, m) for op, m in zip(ops, ev.models, strict=True))
    return ac.response_of(ac_network(batch), ss, freqs, ev.request.source_ohm,
                          ev.request.load_ohm)[:, 0]


def pair_waveform(ev: PairEvaluation, i: int, amplitude: float | None = None,
                  points: int = 256) -> tuple[np.ndarray, np.ndarray]:
    """One period of the load voltage of circuit ``i`` for a sine EMF of ``amplitude``
    (default the request's ``input_vpk``), through the quasi-static midband network that
    gives its THD: (emf, v_load), each (points,)."""
    from . import distortion
    from .pair_evaluate import pair_transfer

    batch, ops, volts = _one(ev, i)
    a = ev.request.input_vpk if amplitude is None else amplitude
    emf, v = distortion.waveform_of(
        lambda e: pair_transfer(ev.request, batch, ev.models, ops, volts, e)[0], a, 1, points)
    return emf[0], v[0]


def probe_ranges(ev: PairEvaluation, i: int, tolerances: dict[str, float],
                 nodes=None) -> dict[str, tuple[float, float]]:
    """The range of each probed node's DC voltage (V) over every vertex of the resistor
    tolerance box (each resistor at value × (1 ± its tolerance)), each at the nominal
    point and at the eight drift corners (both hFE spreads × the ends of ``temp_c``).
    ``tolerances``: role -> fraction (a resistor not named: 5 %)."""
    import itertools

    from inventory.parts import DEFAULT_RESISTOR_TOLERANCE

    from .pair_evaluate import _corner_arrays, pair_operating_point
    from .stages.pair import PairBatch

    form = ev.batch.form
    values = ev.batch.one(i)
    nodes = list(probe_nodes(ev, i) if nodes is None else nodes)
    roles = [r for r in form.role_names if form.kind(r) == "resistor" and r in values]
    signs = np.array(list(itertools.product((-1.0, 1.0), repeat=len(roles))))
    arrays = {r: np.full(len(signs), v) for r, v in values.items()}
    for j, r in enumerate(roles):
        t = tolerances.get(r, DEFAULT_RESISTOR_TOLERANCE)
        arrays[r] = values[r] * (1.0 + signs[:, j] * t)
    batch = PairBatch.from_values(form, **arrays)
    _, nominal = pair_operating_point(batch, ev.request.supply_v, ev.models)
    t_c, b_c = _corner_arrays(ev.request, ev.models)
    _, corner = pair_operating_point(batch, ev.request.supply_v, ev.models, temp_c=t_c,
                                     betas=b_c)
    out = {}
    for n in nodes:
        pool = np.concatenate([np.ravel(nominal[n]), np.ravel(corner[n])])
        pool = pool[np.isfinite(pool)]
        if pool.size:
            out[n] = (float(pool.min()), float(pool.max()))
    return out


def _stage_design(ev: PairEvaluation, i: int, k: int) -> Design:
    """Stage ``k``'s transistor figures as a single-stage Design without parts (for the
    transistor cautions of :func:`optimiser.cautions.cautions`)."""
    st = ev.stages[k]
    metrics = {key: float(st[key][i]) for key in ("ic_a", "vce_v", "pd_q_w", "vb_v", "ve_v",
                                                  "vc_v")}
    return Design(topology=ev.batch.form.stage_kinds[k], transistor=ev.transistors[k].label,
                  parts={}, metrics=metrics, meets_spec=True)


def pair_cautions(ev: PairEvaluation, i: int, circuit, settings=DEFAULT_SETTINGS) -> list[Caution]:
    """The cautions for building circuit ``i``: capacitor voltage and polarity, resistor
    dissipation, each transistor's dissipation, heat and V_CEO, the supply; the
    bench note.  Most serious first."""
    s = settings
    form = ev.batch.form
    words = form.node_words
    out: list[Caution] = []
    for role, (v, a, b) in ev.capacitors.items():
        if role not in circuit.values:
            continue
        volts = float(v[i])
        high, low = (a, b) if volts >= 0 else (b, a)
        volts = abs(volts)
        rating = float(np.asarray(circuit.ratings.voltage_v.get(role,
                                                                DEFAULT_CAPACITOR_VOLTAGE_V)))
        limit = s.capacitor_derating * rating
        if volts > limit:
            out.append(Caution(
                "capacitor_voltage",
                f"{role}: {_fmt_v(volts)} DC across a {_fmt_v(rating)} part, above "
                f"{s.capacitor_derating:.0%} of its rating ({_fmt_v(limit)}); use a part rated "
                f"at least {_fmt_v(volts / s.capacitor_derating)}; an over-stressed "
                f"capacitor can fail, and an electrolytic can burst.", role, "danger"))
        part = circuit.stock_parts.get(role)
        diel = getattr(part, "dielectric", None)
        polar = None if not diel else diel.lower() in POLARISED_DIELECTRICS
        where = f"+ toward {words.get(high, high)}, − toward {words.get(low, low)}"
        if polar:
            out.append(Caution("polarity", f"{role}: polarised; {where} ({_fmt_v(volts)} DC "
                                           "across it). Reversed, it heats and can burst.",
                               role, "warning"))
        elif polar is None and circuit.values[role] >= s.polarity_hint_f:
            out.append(Caution("polarity", f"{role}: if you use a polarised (electrolytic or "
                                           f"tantalum) part, put {where} ({_fmt_v(volts)} DC "
                                           "across it).", role, "note"))
    for rule in ev.rules:
        if rule.key.startswith("power_") and "power_w" in rule.data:
            role = rule.key[len("power_"):]
            if role not in circuit.values:
                continue
            watts = float(rule.data["power_w"][i])
            rating = float(np.asarray(circuit.ratings.power_w.get(role,
                                                                  DEFAULT_RESISTOR_POWER_W)))
            limit = s.resistor_derating * rating
            if watts > limit:
                out.append(Caution(
                    "resistor_power",
                    f"{role}: dissipates {_fmt_w(watts)}, above {s.resistor_derating:.0%} of "
                    f"its {_fmt_w(rating)} rating ({_fmt_w(limit)}); use a higher-rated part.",
                    role, "warning"))
    # each transistor: the single-stage rules on its own figures, named by its stage
    general = []
    for k, stage in enumerate(form.stages):
        corners = {key: np.asarray(ev.corners[k][key])[i] for key in ("ic_a", "vce_v", "pq_w")}
        for c in cautions(_stage_design(ev, i, k), ev.request, ev.transistors[k],
                          corners=corners, settings=s):
            if c.role == "Q":
                out.append(Caution(c.kind, f"{stage}{c.text[1:]}", stage, c.severity))
            elif k == 0:
                general.append(c)
    out += general
    first = [c for c in out if c.kind == "mains"]
    rest = [c for c in out if c.kind != "mains"]
    rest.sort(key=lambda c: SEVERITIES.index(c.severity))
    return first + rest


def pair_report(ev: PairEvaluation, i: int, circuit, notes=None, yield_result=None) -> dict:
    """The ``design`` object of ``analyse --json`` for a two-transistor circuit.

    With ``yield_result`` (:func:`optimiser.yield_.monte_carlo_pair`), ``yield_pct`` is
    among the metrics, the Monte Carlo summary under ``yield``, and a yield below the
    request's ``min_yield_pct`` is a violation."""
    form = ev.batch.form
    plus = ev.extra.get("plus", {})
    parts = {}
    for role in form.role_names:
        if role not in circuit.values:
            continue
        d = {"value": circuit.values[role], "label": circuit.labels.get(role, ""),
             "pieces": []}
        if role in circuit.stock_ids:
            d["pieces"] = [{"id": circuit.stock_ids[role], "count": 1,
                            "value": circuit.values[role],
                            "location": getattr(circuit.stock_parts.get(role), "location", "")
                            or ""}]
        if role in plus:
            d["plus"] = str(plus[role][i])
        parts[role] = d
    stages = {}
    for k, stage in enumerate(form.stages):
        st = {key: _clean(v[i]) for key, v in ev.stages[k].items()}
        st["kind"] = form.stage_kinds[k]
        st["transistor"] = ev.transistors[k].label
        c = ev.corners[k]
        st["drift"] = [{"beta25": _clean(c["beta25"][i, j]), "temp_c": _clean(c["temp_c"][i, j]),
                        "ic_a": _clean(c["ic_a"][i, j]), "vce_v": _clean(c["vce_v"][i, j]),
                        "pq_w": _clean(c["pq_w"][i, j])} for j in range(len(CORNERS))]
        stages[stage] = st
    metrics = {k: _clean(v[i]) for k, v in ev.metrics.items()}
    meets, violations = bool(ev.meets[i]), ev.violations(i)
    extra = {}
    if yield_result is not None:
        from .yield_ import yield_violation

        metrics["yield_pct"] = yield_result.yield_pct
        extra["yield"] = yield_result.to_json()
        miss = yield_violation(yield_result, ev.request)
        if miss:
            meets = False
            violations.append(miss)
    return {
        "topology": list(form.topology) if isinstance(form.topology, list) else form.topology,
        "coupling": form.coupling,
        "form": form.long_name,
        "transistors": {stage: t.label for stage, t in zip(form.stages, ev.transistors,
                                                           strict=True)},
        "parts": parts,
        "metrics": metrics,
        "stages": stages,
        "nodes": {n: _clean(v) for n, v in probe_nodes(ev, i).items()},
        "meets_spec": meets,
        "violations": violations,
        "warnings": ev.warnings(i),
        "cautions": [c.to_json() for c in (notes or [])],
        **extra,
    }


