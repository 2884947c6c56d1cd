"""`drawerfit stock …`: import, export, list, add, adjust, history, undo, low, receive."""

from __future__ import annotations

import click

from drawerfit.cli import pass_app
from drawerfit.console import emit_json, out
from drawerfit.render import stock as view
from inventory.errors import InputError

__all__ = ["command"]

KINDS = ("resistor", "capacitor", "npn", "pnp")


@click.group(name="stock")
def command() -> None:
    """The parts in the drawer: import, list, change, undo."""


@command.command(name="import")
@click.argument("file", type=click.Path(dir_okay=False))
@pass_app
def import_(app, file: str) -> None:
    """Add the rows of a stock file (CSV) to the store: all rows or none.

    Rows naming an item already in stock (same kind, value, ratings and
    location; for transistors the same label) add to its quantity. The columns:
    docs/stock.md.
    """
    store = app.store()
    batch = store.import_csv(file)
    moves = store.batch(batch)["movements"]
    out.print(f"Imported {file}: {len(moves)} items, {sum(m['change'] for m in moves)} "
              f"pieces (batch {batch}; undo with [bold]drawerfit stock undo {batch}[/bold]).")


@command.command(name="export")
@click.argument("file", type=click.Path(dir_okay=False))
@pass_app
def export(app, file: str) -> None:
    """Write the whole stock as a stock file (the format `stock import` reads)."""
    store = app.store()
    store.export_csv(file)
    out.print(f"Wrote {len(store.parts())} rows to {file}.")


@command.command(name="list")
@click.option("--kind", type=click.Choice(KINDS, case_sensitive=False),
              help="Only this kind of part.")
@click.option("--min", "vmin", metavar="VALUE", help="Smallest value shown (e.g. 1k, 10n).")
@click.option("--max", "vmax", metavar="VALUE", help="Largest value shown (e.g. 100k, 1u).")
@click.option("--json", "as_json", is_flag=True, help="Print a JSON list instead of tables (shape: docs/json.md).")
@pass_app
def list_(app, kind: str | None, vmin: str | None, vmax: str | None, as_json: bool) -> None:
    """Show the stock, grouped by kind and sorted by value."""
    from inventory.values import parse_value

    vkind = kind.lower() if kind in ("resistor", "capacitor") else None
    lo = parse_value(vmin, vkind) if vmin else None
    hi = parse_value(vmax, vkind) if vmax else None
    if (lo is not None or hi is not None) and kind and vkind is None:
        raise InputError("--min/--max filter resistor and capacitor values, not transistors")
    parts = app.store().parts()
    if kind:
        parts = [p for p in parts if p.kind == kind.lower()]
    if lo is not None or hi is not None:
        parts = [p for p in parts if getattr(p, "value", None) is not None
                 and (lo is None or p.value >= lo * (1 - 1e-9))
                 and (hi is None or p.value <= hi * (1 + 1e-9))]
    if as_json:
        emit_json([view.part_json(p) for p in parts])
        return
    view.print_stock(out, parts)


def _add_options(f):
    opts = [
        click.option("--kind", required=True, type=click.Choice(KINDS, case_sensitive=False)),
        click.option("--value", required=True,
                     help="4k7, 100n, 104 … ; for a transistor its label."),
        click.option("--qty", required=True, help="Pieces (0 or more)."),
        click.option("--tolerance", default="", help="5% or 0.05."),
        click.option("--power", default="", help="Resistor rating, e.g. 0.25W."),
        click.option("--voltage", default="", help="Capacitor rating, e.g. 25V."),
        click.option("--dielectric", default="", help="c0g, x7r, film, electrolytic …"),
        click.option("--location", default="", help="Drawer, bin or bag."),
        click.option("--min-qty", "min_qty", default="", help="Restock level."),
    ]
    for name in ("hfe_min", "hfe_max", "hfe_typ", "vbe", "ic_ref", "vaf", "vce_sat", "vceo",
                 "ic_max", "pd", "ft", "cob"):
        opts.append(click.option(f"--{name.replace('_', '-')}", name, default="",
                                 help=f"Transistor: {name} (stock-file column)."))
    for o in reversed(opts):
        f = o(f)
    return f


@command.command(name="add")
@_add_options
@pass_app
def add(app, **cells: str) -> None:
    """Add one item (or pieces of an identical one) from options.

    The options are the stock-file columns and are checked the same way.
    """
    from inventory.tabular import part_from_cells

    part, min_qty = part_from_cells({k: v for k, v in cells.items() if v is not None})
    if min_qty is not None:
        from dataclasses import replace

        part = replace(part, min_qty=min_qty)
    store = app.store()
    item_id = store.add_item(part, note="stock add")
    out.print(f"Item {item_id} now holds {store.item(item_id).qty} pieces.")


@command.command(name="adjust", context_settings={"ignore_unknown_options": True})
@click.argument("item_id", type=int)
@click.argument("change", type=int)
@click.option("--reason", default="", help="Why (kept in the history). Needed for a change.")
@click.option("--min", "min_qty", type=click.IntRange(min=0), default=None,
              help="Also set the item's restock level.")
@pass_app
def adjust(app, item_id: int, change: int, reason: str, min_qty: int | None) -> None:
    """Change an item's quantity by CHANGE, such as -3 or +10.

    A change that would take the quantity below zero is refused; nothing changes.
    With a CHANGE of 0, only --min is applied.
    """
    store = app.store()
    if change == 0 and min_qty is None:
        raise InputError("CHANGE is 0 and no --min given: nothing to do")
    if change != 0 and not reason.strip():
        raise InputError("say why with --reason TEXT (it goes into the history)",
                         field="--reason")
    if change != 0:
        batch = store.adjust(item_id, change, reason.strip())
        out.print(f"Item {item_id}: {change:+d} (batch {batch}); now "
                  f"{store.item(item_id).qty} pieces.")
    if min_qty is not None:
        store.set_min_qty(item_id, min_qty)
        out.print(f"Item {item_id}: restock level {min_qty}.")


@command.command(name="history")
@click.option("--limit", type=click.IntRange(min=1), default=None,
              help="Only the newest N batches.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
@pass_app
def history(app, limit: int | None, as_json: bool) -> None:
    """Every batch of stock movements, newest first."""
    entries = app.store().history(limit)
    if as_json:
        emit_json(entries)
        return
    view.print_history(out, entries)


@command.command(name="undo")
@click.argument("batch", type=int)
@pass_app
def undo(app, batch: int) -> None:
    """Reverse a whole batch (an import, adjustment, build or receipt).

    Refused, with nothing changed, where it would take a quantity below zero.
    """
    new = app.store().undo(batch)
    out.print(f"Batch {batch} undone (batch {new}).")


@command.command(name="low")
@click.option("--order", "order_file", type=click.Path(dir_okay=False), default=None,
              help="Also write an order file (stock-file format) to bring each item back "
                   "to its restock level.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
@pass_app
def low(app, order_file: str | None, as_json: bool) -> None:
    """Items whose quantity is below their restock level (set with --min)."""
    from dataclasses import replace

    from inventory.tabular import write_stock_csv

    parts = app.store().low()
    if order_file:
        write_stock_csv(order_file, [replace(p, qty=p.min_qty - p.qty, min_qty=0)
                                     for p in parts])
    if as_json:
        emit_json([{**view.part_json(p), "to_order": p.min_qty - p.qty} for p in parts])
        return
    view.print_low(out, parts)
    if order_file:
        out.print(f"Wrote {len(parts)} rows to {order_file}; book them when they arrive with "
                  f"[bold]drawerfit stock receive {order_file}[/bold].")


@command.command(name="receive")
@click.argument("file", type=click.Path(dir_okay=False))
@pass_app
def receive(app, file: str) -> None:
    """Book an arrived order (stock-file format; packs and cost columns are ignored)."""
    store = app.store()
    batch = store.receive(file)
    moves = store.batch(batch)["movements"]
    out.print(f"Received {file}: {len(moves)} items, {sum(m['change'] for m in moves)} pieces "
              f"(batch {batch}). {len(store.pending_orders())} orders still awaited.")


@command.command(name="orders")
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
@pass_app
def orders(app, as_json: bool) -> None:
    """Parts ordered with a committed plan and not yet received."""
    pending = app.store().pending_orders()
    if as_json:
        emit_json(pending)
        return
    view.print_orders(out, pending)
