"""`drawerfit analyse CIRCUIT.toml`: every figure of one given stage."""

from __future__ import annotations

import click

from drawerfit.cli import pass_app
from drawerfit.console import emit_json
from drawerfit.sheet.cli import sheet_for_circuit, sheet_option

__all__ = ["command"]


@click.command(name="analyse")
@click.argument("circuit", type=click.Path(dir_okay=False))
@click.option("--json", "as_json", is_flag=True, help="Print JSON: the request and the design.")
@sheet_option
@pass_app
def command(app, circuit: str, as_json: bool, sheet_dir: str | None = None) -> None:
    """Analyse a stage with given values: operating point, gain, band edges, Zin, Zout,
    drift, swing, distortion, and every rule it breaks.

    CIRCUIT is a TOML file with the request keys, a [parts] table (role = value, or
    "#id" for a stock item) and a [transistor] table (or transistor = "LABEL" from stock).
    The store is opened only when the file refers to stock.
    """
    from optimiser.circuit_file import load_circuit
    from optimiser.evaluate import design_of, evaluate

    c = load_circuit(circuit, store=app.store)
    batch = c.batch()
    ev = evaluate(c.request, batch, c.transistor, c.ratings)
    design = design_of(ev, 0, label=c.transistor.label)
    yres = None
    if c.request.wants_yield:
        from optimiser.yield_ import apply_yield, monte_carlo, worst_case

        yres = monte_carlo(c.request, c.values, c.transistor, c.tolerances,
                           samples=c.request.samples, seed=c.request.seed)
        apply_yield(design, yres, c.request)
        design.extra["worst_case"] = worst_case(c.request, c.values, c.transistor,
                                                c.tolerances).to_json()
    if as_json:
        emit_json({"request": c.request.to_json(), "design": design.to_json()})
        if sheet_dir is not None:
            sheet_for_circuit(sheet_dir, design, ev, c, yres, quiet=True)
        return
    from drawerfit.render.analysis import show_analysis

    show_analysis(design, ev, 0, c, yres)
    if sheet_dir is not None:
        sheet_for_circuit(sheet_dir, design, ev, c, yres)
