"""`drawerfit plan BUILDLIST.toml`: several builds against one drawer, and what to order."""

from __future__ import annotations

import click

from drawerfit.cli import pass_app
from drawerfit.console import emit_json, err, out
from inventory.errors import InputError, StockShortage

__all__ = ["command", "write_order"]


def write_order(plan, path: str, *, committed: bool = False, snapshot=None) -> None:
    """Write the shopping list as a stock file (plus the columns ``packs`` and ``cost``).

    ``stock receive`` books it when the parts arrive.  A value the drawer already
    holds is sent to that bin (the bin with the most pieces of it, from
    ``snapshot``); a new value's location is left empty for the owner to fill in
    (or to give with ``stock receive --bin``).  ``qty`` is what goes into the drawer: all
    the pieces bought, or, when the builds were committed (and so already took
    their share of the order), the pieces left over after them.
    """
    from inventory.parts import Capacitor, Resistor
    from inventory.tabular import write_stock_csv

    parts, extra = [], []
    bins: dict[tuple[str, float], tuple[int, str]] = {}
    rows = () if snapshot is None else (*snapshot.resistors, *snapshot.capacitors)
    for row in rows:
        if row.location:
            key = (row.kind, round(float(row.value), 15))
            if row.qty > bins.get(key, (-1, ""))[0]:
                bins[key] = (row.qty, row.location)

    def _qty(p) -> int:
        return p.qty - p.used if committed else p.qty

    def _bin(p) -> str:
        return bins.get((p.kind, round(float(p.value), 15)), (0, ""))[1]
    for p in plan.purchases:
        if p.kind == "resistor":
            parts.append(Resistor(value=p.value, qty=_qty(p), tolerance=p.tolerance,
                                  power_w=p.rating, location=_bin(p)))
        else:
            parts.append(Capacitor(value=p.value, qty=_qty(p), tolerance=p.tolerance,
                                   voltage_v=p.rating, dielectric=p.dielectric or "ceramic",
                                   location=_bin(p)))
        extra.append({"packs": str(p.packs), "cost": f"{p.cost:.2f}"})
    write_stock_csv(path, parts, extra=extra)


def _build_lines(plan, blist) -> list[dict]:
    """The plan's allocations as the lines of one build: each line's design carries its
    request (so that `builds show --sheet` needs no search), each order the pieces the
    builds take from it on arrival."""
    from optimiser.planning import commit_entries

    requests = {b.name: b.request for b in blist.builds}
    used = {(p.kind, round(p.value, 15)): p.used for p in plan.purchases}
    lines = commit_entries(plan)
    for line in lines:
        req = requests.get(line["request"])
        if req is not None:
            line["design"] = {**line["design"], "request": req.to_json()}
        for o in line["orders"]:
            o["used"] = used.get((o["kind"], round(o["value"], 15)), 0)
    return lines


@click.command(name="plan")
@click.argument("buildlist", metavar="BUILDLIST.toml", type=click.Path(dir_okay=False))
@click.option("--json", "as_json", is_flag=True, help="Print JSON (shape: docs/json.md).")
@click.option("--solver", type=click.Choice(["cbc", "highs"]), default="cbc", show_default=True,
              help="Mixed-integer solver: CBC (shipped with PuLP) or HiGHS (needs highspy).")
@click.option("--order", "order_path", metavar="FILE.csv", type=click.Path(dir_okay=False),
              help="Write the shopping list as a stock file that `stock receive` can book.")
@click.option("--commit", is_flag=True,
              help="Record the plan as one build (a line per request and design) and take its "
                   "pieces out of stock in one transaction; purchases are recorded as awaited "
                   "orders. `builds undo ID` reverses it in one step.")
@click.option("--candidates", type=click.IntRange(1, 500), default=20, show_default=True,
              help="Designs the search offers per request (and per source).")
@click.option("--time-limit", type=click.FloatRange(min=0.1), default=None, metavar="SECONDS",
              help="Stop the solver after this long; the status then says so.")
@click.option("--search-time", type=click.FloatRange(min=0), default=20.0, show_default=True,
              metavar="SECONDS",
              help="Time limit of each candidate search (0: search to the end). The plan is "
                   "optimal over the candidates found.")
@click.option("--pricing-time", type=click.FloatRange(min=0), default=60.0, show_default=True,
              metavar="SECONDS",
              help="Time for adding designs the plan's prices ask for and then for listing "
                   "every design that could still beat the plan, which proves how close the "
                   "plan is to the best possible (0: the candidates alone).")
@pass_app
def command(app, buildlist: str, as_json: bool, solver: str, order_path: str | None,
            commit: bool, candidates: int, time_limit: float | None,
            search_time: float = 20.0, pricing_time: float = 60.0) -> None:
    """Plan several builds from one drawer at the least purchase cost.

    BUILDLIST.toml lists [[build]] entries (a request file or table, a count,
    identical = true/false) and an optional [purchase] table saying which
    values may be bought and at what price (docs/requests.md, docs/plan.md).
    A request may be a single stage or a chain (topology = ["ce", "cc"]); a
    chain build is planned over the designs the chain search offers.
    """
    from optimiser.buildlist import load_buildlist
    from optimiser.planning import make_plan

    blist = load_buildlist(buildlist)
    store = app.store()
    snapshot = store.snapshot()
    progress = None if as_json else (lambda text: err.print(f"[dim]{text} …[/dim]"))
    plan = make_plan(blist, snapshot, solver=solver, candidates=candidates,
                     time_limit=time_limit, progress=progress,
                     search_time_s=search_time or None, pricing_time_s=pricing_time or None)
    build_id = None
    if commit:
        if not plan.feasible:
            raise InputError("nothing was recorded: the plan does not meet every build",
                             field="--commit")
        try:
            build_id = store.commit_builds(_build_lines(plan, blist))
        except StockShortage as exc:
            raise InputError(f"the stock changed since planning, nothing was recorded "
                             f"({exc.message}); run the plan again", field="--commit") from None
    if order_path and plan.feasible:
        write_order(plan, order_path, committed=build_id is not None, snapshot=snapshot)
    if as_json:
        data = plan.to_json()
        if build_id is not None:
            data["build_id"] = build_id
            data["build_ids"] = [build_id]     # the list form scripts already read
        emit_json(data)
    else:
        from drawerfit.render.plan import print_plan
        print_plan(out, plan, build_id=build_id,
                   polarity={t.label: t.polarity for t in snapshot.transistors})
        if order_path and plan.feasible:
            out.print(f"Order written to {order_path} "
                      f"({'nothing to order' if not plan.purchases else 'book it on arrival with `drawerfit stock receive`'}).")
