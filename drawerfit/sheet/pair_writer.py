"""The build sheet of a two-transistor circuit (a chain of two stages or a cascode).

:func:`write_pair_sheet` takes one evaluated circuit (a
:class:`~optimiser.pair_evaluate.PairEvaluation`, the index of the circuit in it, and
the circuit's parts) and writes, into one folder,

* ``sheet.html``    one self-contained printable page,
* ``schematic.svg`` both stages on one drawing (:mod:`drawerfit.sheet.pair_schematic`),
* ``stage.cir``     the whole circuit as a plain SPICE netlist
  (:func:`optimiser.spice_netlist.pair_spice_netlist`),
* ``response.png`` and ``response.svg``  Bode magnitude and phase,
* ``waveform.png``  one period of the load voltage at the request's input level,
* ``drift.png``     each transistor's I_C at the drift corners (and the yield histogram),
* ``parts.csv``     one row per role (``S1.RC``, ``C_COUPLE``, …), then ``S1.Q``, ``S2.Q``.

The figures on the page are the evaluation's own (the numbers ``--json`` prints); the
engine is called for the curves and the spread of the DC voltages only.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from drawerfit.sheet import fmt
from drawerfit.sheet.writer import WrittenSheet
from optimiser.design import Piece, RolePick

__all__ = ["write_pair_sheet", "circuit_picks", "PAIR_SHEET_FILES"]

PAIR_SHEET_FILES = ("sheet.html", "schematic.svg", "stage.cir", "response.png", "response.svg",
                    "waveform.png", "drift.png", "parts.csv")


def circuit_picks(ev, i: int, circuit) -> dict[str, RolePick]:
    """Each role of a circuit file as a :class:`~optimiser.design.RolePick`: its value,
    one piece carrying the stock row's bin, tolerance, rating and dielectric (when the
    file names a stock item), and ``plus``, the node on its higher-DC side."""
    form = ev.batch.form
    plus = ev.extra.get("plus", {})
    picks = {}
    for role in form.role_names:
        if role not in circuit.values:
            continue
        kind = form.kind(role)
        value = float(circuit.values[role])
        stock = circuit.stock_parts.get(role)
        piece = Piece(value, 1, circuit.stock_ids.get(role),
                      getattr(stock, "location", "") or "", kind,
                      circuit.tolerances.get(role),
                      getattr(stock, "power_w" if kind == "resistor" else "voltage_v", None),
                      None if kind == "resistor" else getattr(stock, "dielectric", None))
        picks[role] = RolePick(role, value, circuit.labels.get(role) or fmt.value(value, kind),
                               (piece,), plus=str(plus[role][i]) if role in plus else None)
    return picks


def _tolerances(picks: dict[str, RolePick]) -> dict[str, float]:
    """Each role's tolerance: the widest of its pieces' (pieces without one: the default)."""
    out = {}
    for role, pick in picks.items():
        t = [pc.tolerance for pc in pick.pieces if pc.tolerance is not None]
        if t:
            out[role] = max(t)
    return out


def _probes(ev, i: int, picks, request, yield_result):
    from drawerfit.sheet.spread import Probe
    from optimiser.pair_report import probe_nodes, probe_ranges

    nominal = probe_nodes(ev, i)
    ranges = probe_ranges(ev, i, _tolerances(picks), nominal)
    temps = sorted(set(request.temp_c))
    spreads = ", ".join(f"hFE {t.hfe_min:g}–{t.hfe_max:g}" for t in
                        dict.fromkeys(ev.transistors))
    basis = (f"worst case over resistor tolerances, {spreads}, " +
             (f"{temps[0]:g}–{temps[-1]:g} °C" if len(temps) > 1 else f"{temps[0]:g} °C"))
    samples = getattr(yield_result, "samples", None) or {}
    out = []
    for node, volts in nominal.items():
        low, high = ranges.get(node, (None, None))
        p5 = p95 = None
        v = samples.get(f"V({node})")
        if v is not None:
            v = np.asarray(v, float)
            v = v[np.isfinite(v)]
            if v.size:
                p5, p95 = (float(x) for x in np.percentile(v, [5, 95]))
        out.append(Probe(node, float(volts), low, high, basis if low is not None else "nominal",
                         p5, p95))
    return out


def _corners(ev, i: int) -> list[dict]:
    from optimiser.pair_evaluate import CORNERS

    out = []
    for k in range(2):
        c = ev.corners[k]
        betas = [tuple(float(ev.corners[j]["beta25"][i, n]) for j in range(2))
                 for n in range(len(CORNERS))]
        out.append({"ic_a": np.asarray(c["ic_a"])[i], "temp_c": np.asarray(c["temp_c"])[i],
                    "betas": betas})
    return out


def write_pair_sheet(directory, ev, i: int, circuit, *, picks: dict[str, RolePick] | None = None,
                     yield_result=None, notes=None, rank: int | None = None) -> WrittenSheet:
    """Write the build sheet of circuit ``i`` of ``ev`` into ``directory`` (created if needed).

    Parameters
    ----------
    directory : path
        Folder to write into; existing sheet files there are replaced.
    ev : optimiser.pair_evaluate.PairEvaluation
        The evaluated circuits (request, form, transistors, figures).
    i : int
        Which circuit of ``ev``.
    circuit : optimiser.circuit_file.PairCircuit
        Its values, labels, tolerances, ratings and stock rows (for the cautions and the
        SPICE deck).
    picks : dict, optional
        role -> :class:`~optimiser.design.RolePick` with the pieces to take (bins,
        ratings, dielectrics, several pieces joined); default :func:`circuit_picks`.
    yield_result : optional
        :func:`optimiser.yield_.monte_carlo_pair`'s result: the yield on the page, the
        histogram, and where 90 % of the samples put each DC voltage.
    notes : list of Caution, optional
        The cautions; default :func:`optimiser.pair_report.pair_cautions`.
    rank : int, optional
        The chain's rank in ``design``'s answer (said under the title).
    """
    from drawerfit.sheet import html, parts_csv, plots
    from drawerfit.sheet.pair_schematic import write_pair_schematic
    from optimiser.pair_report import pair_cautions, pair_report, pair_response, pair_waveform
    from optimiser.spice_netlist import pair_spice_netlist

    request = ev.request
    form = ev.batch.form
    picks = circuit_picks(ev, i, circuit) if picks is None else picks
    items = pair_cautions(ev, i, circuit) if notes is None else notes
    report = pair_report(ev, i, circuit, items, yield_result=yield_result)
    out_dir = Path(directory)
    out_dir.mkdir(parents=True, exist_ok=True)
    probes = _probes(ev, i, picks, request, yield_result)
    labels = tuple(t.label for t in ev.transistors)

    written = WrittenSheet()
    sch = write_pair_schematic(out_dir / "schematic.svg", form, picks, request, labels,
                               {p.node: p.volts for p in probes})
    written.append(sch)
    cir = out_dir / "stage.cir"
    cir.write_text(pair_spice_netlist(circuit, ev.transistors), encoding="utf-8")
    written.append(cir)

    metrics = report["metrics"]
    freqs = plots.frequency_grid(request, metrics)
    written += plots.plot_response([out_dir / "response.png", out_dir / "response.svg"],
                                   freqs, pair_response(ev, i, freqs), request, metrics)
    emf, v = pair_waveform(ev, i)
    written.append(plots.plot_waveform(out_dir / "waveform.png", emf, v, request,
                                       metrics.get("gain"), metrics.get("thd_pct")))
    samples = getattr(yield_result, "samples", None)
    hist = {"gain_db": np.asarray(samples["gain_db"], float)} if samples else None
    written.append(plots.plot_pair_drift(
        out_dir / "drift.png", form.stages,
        [report["stages"][s]["ic_a"] for s in form.stages], _corners(ev, i), request, hist,
        metrics.get("yield_pct")))

    plus = {r: p.plus for r, p in picks.items() if p.plus}
    rows = parts_csv.pair_part_rows(form, picks, request, ev.transistors, plus)
    written.append(parts_csv.write_parts_csv(out_dir / "parts.csv", rows))

    page = html.render_pair_html(
        report, request, node_words=form.node_words, schematic_svg=sch.read_bytes(),
        response_png=(out_dir / "response.png").read_bytes(),
        waveform_png=(out_dir / "waveform.png").read_bytes(),
        drift_png=(out_dir / "drift.png").read_bytes(),
        route=parts_csv.pair_pick_route(form, picks, request, ev.transistors),
        probes=probes, cautions=items, rank=rank)
    written.insert(0, html.write_html(out_dir / "sheet.html", page))
    written.cautions = items
    return written
