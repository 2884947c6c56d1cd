"""`drawerfit analyse CIRCUIT.toml`: every figure of one given stage, or of two
transistors (a chain of two stages or a cascode)."""

from __future__ import annotations

import click

from drawerfit.cli import pass_app
from drawerfit.console import emit_json
from drawerfit.sheet.cli import (
    sheet_for_circuit,
    sheet_for_pair,
    sheet_option,
    spice_for_design,
    spice_for_pair,
    spice_option,
)

__all__ = ["command"]


@click.command(name="analyse")
@click.argument("circuit", type=click.Path())
@click.option("--json", "as_json", is_flag=True, help="Print JSON: the request and the design.")
@sheet_option
@spice_option
@pass_app
def command(app, circuit: str, as_json: bool, sheet_dir: str | None = None,
            spice_file: str | None = None) -> None:
    """Analyse a stage with given values: operating point, gain, band edges, Zin, Zout,
    drift, swing, distortion, and every rule it breaks.

    CIRCUIT is a TOML file with the request keys, a [parts] table (role = value, or
    "#id" for a stock item) and a [transistor] table (or transistor = "LABEL" from stock).
    Two transistors: topology = ["ce", "cc"] (a chain; coupling = "capacitor" or
    "direct") or "cascode", parts as S1.RC, S2.RE, C_COUPLE, ... The store is opened
    only when the file refers to stock. The file's format: docs/requests.md; the
    figures: docs/model.md.
    """
    from optimiser.circuit_file import PairCircuit, load_circuit
    from optimiser.evaluate import design_of, evaluate

    c = load_circuit(circuit, store=app.store)
    if isinstance(c, PairCircuit):
        _analyse_pair(c, as_json, sheet_dir, spice_file)
        return
    batch = c.batch()
    ev = evaluate(c.request, batch, c.transistor, c.ratings)
    design = design_of(ev, 0, picks=_stock_picks(c), label=c.transistor.label)
    yres = None
    if c.request.wants_yield:
        from optimiser.yield_ import apply_yield, monte_carlo, worst_case

        yres = monte_carlo(c.request, c.values, c.transistor, c.tolerances,
                           samples=c.request.samples, seed=c.request.seed)
        apply_yield(design, yres, c.request)
        design.extra["worst_case"] = worst_case(c.request, c.values, c.transistor,
                                                c.tolerances).to_json()
    from optimiser.cautions import cautions

    notes = cautions(design, c.request, c.transistor, corners=design.extra.get("drift"))
    design.extra["cautions"] = [n.to_json() for n in notes]
    if as_json:
        emit_json({"request": c.request.to_json(), "design": design.to_json()})
        if sheet_dir is not None:
            sheet_for_circuit(sheet_dir, design, ev, c, yres, quiet=True)
        if spice_file is not None:
            spice_for_design(spice_file, design, c.request, c.transistor, quiet=True)
        return
    from drawerfit.render.analysis import show_analysis

    show_analysis(design, ev, 0, c, yres)
    _show_cautions(notes)
    from drawerfit.console import out
    from drawerfit.render.designs import assumed_line

    line = assumed_line(c.request)
    if line:
        out.print(line)
    if sheet_dir is not None:
        sheet_for_circuit(sheet_dir, design, ev, c, yres)
    if spice_file is not None:
        spice_for_design(spice_file, design, c.request, c.transistor)


def _show_cautions(notes) -> None:
    from drawerfit.render.analysis import show_cautions

    show_cautions(notes)


def _stock_picks(c):
    """RolePicks with their stock piece for roles given by stock id (ratings for cautions)."""
    from optimiser.design import Piece, RolePick

    picks = {}
    for role, item_id in c.stock_ids.items():
        part = c.stock_parts[role]
        is_r = getattr(part, "kind", "") == "resistor"
        piece = Piece(value=float(part.value), count=1, id=item_id,
                      location=getattr(part, "location", "") or "",
                      kind="resistor" if is_r else "capacitor",
                      tolerance=getattr(part, "tolerance", None),
                      rating=getattr(part, "power_w", None) if is_r else
                      getattr(part, "voltage_v", None),
                      dielectric=None if is_r else getattr(part, "dielectric", None))
        picks[role] = RolePick(role, float(part.value), c.labels.get(role, ""), (piece,))
    return picks


def _analyse_pair(c, as_json: bool, sheet_dir, spice_file) -> None:
    """``analyse`` of a two-transistor circuit: figures, yield, cautions, JSON, the build
    sheet and the SPICE deck."""
    from drawerfit.console import out
    from optimiser.pair_evaluate import evaluate_pair
    from optimiser.pair_report import pair_cautions, pair_report

    ev = evaluate_pair(c.request, c.batch(), c.transistors, c.ratings)
    yres = None
    if c.request.wants_yield:
        from optimiser.yield_ import monte_carlo_pair

        yres = monte_carlo_pair(c.request, c.form, c.values, c.transistors, c.tolerances,
                                samples=c.request.samples, seed=c.request.seed)
    notes = pair_cautions(ev, 0, c)
    report = pair_report(ev, 0, c, notes, yield_result=yres)
    if as_json:
        emit_json({"request": c.request.to_json(), "design": report})
    else:
        from drawerfit.render.analysis import show_pair_analysis
        from drawerfit.render.designs import assumed_line

        show_pair_analysis(report, ev, c)
        if yres is not None:
            from drawerfit.render.yield_view import show_yield

            show_yield(yres)
        _show_cautions(notes)
        line = assumed_line(c.request)
        if line:
            out.print(line)
    if sheet_dir is not None:
        sheet_for_pair(sheet_dir, ev, 0, c, yield_result=yres, notes=notes, quiet=as_json)
    if spice_file is not None:
        spice_for_pair(spice_file, c, quiet=as_json)
