"""The build sheet: files to print and build from (``--sheet DIR``).

:func:`write_sheet` is the single entry point.  It writes, into one folder,

* ``sheet.html``    one self-contained printable page,
* ``schematic.svg`` the stage drawn with schemdraw (text kept as SVG text),
* ``stage.cir``     the stage as a plain SPICE netlist (:mod:`optimiser.spice_netlist`),
* ``response.png`` and ``response.svg``  Bode magnitude and phase,
* ``drift.png``     I_C and gain at the drift corners (and the yield histogram),
* ``parts.csv``     one row per role.

The figures on the page are the design's own metrics (the same numbers that
``--json`` prints); the engine is called only for the curves, the drift
corners and the spread of the DC voltages.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from optimiser.cautions import Caution, capacitor_bias, cautions
from optimiser.chain_circuit import picks_ratings
from optimiser.design import Design
from optimiser.request import Request
from optimiser.stage import CAPACITOR_ROLES, RESISTOR_ROLES, PartRatings, StageBatch

__all__ = ["write_sheet", "WrittenSheet", "ratings_of", "echo_sheet", "SHEET_FILES"]

SHEET_FILES = ("sheet.html", "schematic.svg", "stage.cir", "response.png", "response.svg",
               "drift.png", "parts.csv")


class WrittenSheet(list):
    """The paths written (a list of Path), with the cautions shown on the sheet."""

    cautions: list[Caution]


def ratings_of(design: Design) -> PartRatings:
    """Piece ratings of the design's roles for the engine's derating rules."""
    def kind_of(role: str) -> str | None:
        if role in RESISTOR_ROLES:
            return "resistor"
        return "capacitor" if role in CAPACITOR_ROLES else None

    return picks_ratings(design.parts, kind_of)


def _batch(design: Design) -> StageBatch:
    return StageBatch.from_values(design.topology, **design.values())


def _row(d: dict, i: int = 0) -> dict:
    out = {}
    for k, v in d.items():
        a = np.asarray(v)
        out[k] = a[i] if a.ndim >= 2 else a
    return out


def _matching_row(evaluation, design: Design) -> int | None:
    """The row of ``evaluation`` whose values are the design's (None if none is)."""
    try:
        b = evaluation.batch
        vals = design.values()
        ok = np.ones(b.n, bool)
        for role in ("R1", "R2", "RC", "RE", "RE_BYP", "C_IN", "C_OUT", "C_BYP", "C_B"):
            ok &= np.isclose(b.role(role), vals.get(role, 0.0), rtol=1e-9, atol=0.0)
        hits = np.nonzero(ok)[0]
    except AttributeError:
        return None
    return int(hits[0]) if hits.size else None


def _yield_samples(yield_result) -> tuple[dict | None, float | None]:
    """Per-sample arrays and yield % from the Monte Carlo result, whatever its shape."""
    if yield_result is None:
        return None, None
    pct = getattr(yield_result, "yield_pct", None)
    samples = None
    for name in ("samples", "metrics", "per_sample"):
        d = getattr(yield_result, name, None)
        if isinstance(d, dict) and d:
            samples = {k: np.asarray(v, float).ravel() for k, v in d.items()
                       if np.ndim(v) >= 1 and np.size(v) > 1}
            break
    if samples is None:
        samples = {}
        for key in ("gain_db", "gain", "ic_a", "f_low_hz"):
            v = getattr(yield_result, key, None)
            if v is not None and np.ndim(v) >= 1 and np.size(v) > 1:
                samples[key] = np.asarray(v, float).ravel()
    if "gain_db" not in samples and "gain" in samples:
        with np.errstate(divide="ignore"):
            samples["gain_db"] = 20 * np.log10(samples["gain"])
    return (samples or None), (None if pct is None else float(pct))


def write_sheet(directory, design: Design, request: Request, transistor, *,
                evaluation=None, yield_result=None) -> WrittenSheet:
    """Write the build sheet files for ``design`` into ``directory`` (created if needed).

    Parameters
    ----------
    directory : path
        Folder to write into; existing sheet files there are replaced.
    design : Design
        The stage, with its parts (values, pieces, bins, ratings) and metrics.
    request : Request
        What was asked (targets are marked on the plots and listed on the page).
    transistor : inventory.parts.Transistor
        The transistor type (device model for the curves, limits for the cautions).
    evaluation : optimiser.evaluate.Evaluation, optional
        The engine's evaluation of this one design (its drift corners are used);
        computed here when not given.
    yield_result : optional
        The Monte Carlo result, for the histogram.

    Returns
    -------
    WrittenSheet
        The paths written, with ``.cautions``.
    """
    from drawerfit.sheet import html, parts_csv, plots, schematic, spread
    from optimiser.evaluate import evaluate, frequency_response_of
    from optimiser.spice_netlist import spice_netlist

    out_dir = Path(directory)
    out_dir.mkdir(parents=True, exist_ok=True)
    batch = _batch(design)
    ratings = ratings_of(design)
    row = _matching_row(evaluation, design) if evaluation is not None else None
    if row is None:
        evaluation, row = evaluate(request, batch, transistor, ratings), 0
    corners = _row(evaluation.corners, row) if evaluation.corners else None

    items = cautions(design, request, transistor, corners=corners)

    # DC voltages to probe, with the worst-case spread over the tolerance box.
    vbatch = spread.tolerance_vertices(design)
    veval = evaluate(request, vbatch, transistor, ratings, band_edges=False,
                     large_signal=False, corner_gain=False)
    probes = spread.probes(design, request, transistor, vertices_eval=veval, batch=vbatch)
    raw = getattr(yield_result, "samples", None)
    if isinstance(raw, dict):
        probes = spread.with_percentiles(probes,
                                         spread.sample_percentiles(request.supply_v, raw))

    written = WrittenSheet()
    sch_path = schematic.write_schematic(out_dir / "schematic.svg", design, request,
                                         {p.node: p.volts for p in probes})
    written.append(sch_path)
    cir_path = out_dir / "stage.cir"
    cir_path.write_text(spice_netlist(design, request, transistor), encoding="utf-8")
    written.append(cir_path)

    freqs = plots.frequency_grid(request, design.metrics)
    h = np.asarray(frequency_response_of(request, batch, transistor, freqs))[:, 0]
    written += plots.plot_response([out_dir / "response.png", out_dir / "response.svg"],
                                   freqs, h, request, design.metrics)
    samples, pct = _yield_samples(yield_result)
    if pct is None and design.metrics.get("yield_pct") is not None:
        pct = float(design.metrics["yield_pct"])
    written.append(plots.plot_drift(out_dir / "drift.png", design.metrics, corners, request,
                                    samples, pct))

    plus = {r: b.plus for r, b in capacitor_bias(design, request).items()}
    plus = {r: ("emitter" if v == "junction" else v) for r, v in plus.items()}
    rows = parts_csv.part_rows(design, request, transistor, plus)
    written.append(parts_csv.write_parts_csv(out_dir / "parts.csv", rows))

    page = html.render_html(
        design, request, schematic_svg=sch_path.read_bytes(),
        response_png=(out_dir / "response.png").read_bytes(),
        drift_png=(out_dir / "drift.png").read_bytes(),
        route=parts_csv.pick_route(design, request, transistor), probes=probes,
        cautions=items, transistor=transistor)
    written.insert(0, html.write_html(out_dir / "sheet.html", page))
    written.cautions = items
    return written


def echo_sheet(written: WrittenSheet, console=None, *, show_cautions: bool = True,
               title: str = "Build sheet written:") -> None:
    """Print the cautions and the files written (for the commands' ``--sheet``).

    Goes to stderr when no console is given, so that ``--json`` output on
    stdout stays clean.  ``show_cautions=False`` when the command's own view
    has just printed the same cautions.
    """
    from drawerfit.console import caution_line

    if console is None:
        from drawerfit.console import err as console
    for c in (written.cautions if show_cautions else []):
        console.print(caution_line(c), markup=True, highlight=False)
    console.print(title, markup=False, highlight=False)
    for p in written:
        console.print(f"  {p}", markup=False, highlight=False, soft_wrap=True)
