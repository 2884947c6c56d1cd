"""`drawerfit stock …`: import, take, export, list, add, adjust, history, undo, low,
receive, orders."""

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
    earlier = store.read_before(file)
    batch = store.import_csv(file)
    moves = store.batch(batch)["movements"]
    out.print(f"Imported {file}: {len(moves)} items, {sum(m['change'] for m in moves)} "
              f"pieces (batch {batch}; undo with [bold]drawerfit stock undo {batch}[/bold]).")
    _warn_read_before(file, earlier, batch)


def _warn_read_before(file: str, earlier: list[dict], batch: int) -> None:
    """A warning (not an error) when a file of the same content was read before."""
    from drawerfit.console import err

    standing = [b for b in earlier if b["undone_by"] is None]
    if not standing:
        return
    when = ", ".join(f"batch {b['batch']} ({b['kind']}, {b['when'].replace('T', ' ')})"
                     for b in standing)
    err.print(f"[yellow]warning:[/yellow] {file}: the same content was read before: {when}. "
              f"If this was by mistake, undo it with `drawerfit stock undo {batch}`.")


@command.command(name="take")
@click.argument("file", type=click.Path(dir_okay=False))
@click.option("--zero-missing", is_flag=True,
              help="Also set every item the file does not name to 0 (a full count of the "
                   "drawer). Without it those items are left as they are.")
@pass_app
def take(app, file: str, zero_missing: bool) -> None:
    """A stock-take: SET the quantities counted in FILE (stock-file format), all rows or none.

    Each row's qty replaces the item's quantity; the difference is logged as a
    movement, and `stock undo BATCH` puts the old counts back.  Rows naming a new
    item create it.  Items not in the file are untouched unless --zero-missing.
    """
    store = app.store()
    earlier = store.read_before(file)
    batch = store.take(file, zero_missing=zero_missing)
    moves = store.batch(batch)["movements"]
    out.print(f"Stock-take {file}: {len(moves)} items changed, net "
              f"{sum(m['change'] for m in moves):+d} pieces (batch {batch}; undo with "
              f"[bold]drawerfit stock undo {batch}[/bold]).")
    _warn_read_before(file, earlier, batch)


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
    if part.qty < 0:
        raise InputError(f"{part.qty} is negative", field="--qty")
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
    """Reverse a whole batch (an import, stock-take, adjustment, build, receipt or order
    cancellation).

    Refused, with nothing changed, where it would take a quantity below zero. The
    orders whose arrivals or state it changes are named.
    """
    store = app.store()
    before = {o["id"]: o["arrived"] for o in store.pending_orders()}
    new = store.undo(batch)
    out.print(f"Batch {batch} undone (batch {new}).")
    after = store.pending_orders()
    for o in after:
        if before.get(o["id"]) != o["arrived"]:
            again = "" if o["id"] in before else ", awaited again"
            out.print(f"  order {o['id']} ({o['kind']} {view.order_value(o)}): "
                      f"{view.arrival(o)}{again}")
    dropped = sorted(set(before) - {o["id"] for o in after})
    if dropped:
        out.print(f"  orders {', '.join(map(str, dropped))} are no longer awaited")


@command.command(name="low")
@click.option("--order", "order_file", type=click.Path(dir_okay=False), default=None,
              help="Also write an order file (stock-file format, each row's bin and "
                   "transistor figures included) to bring each item back to its restock "
                   "level; `stock receive` books it.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
@pass_app
def low(app, order_file: str | None, as_json: bool) -> None:
    """Empty bins (quantity 0) and items below their restock level (set with --min)."""
    from dataclasses import replace

    from inventory.tabular import write_stock_csv

    parts = app.store().low()
    wanted = [p for p in parts if view.restock_qty(p) > 0]
    if order_file:
        write_stock_csv(order_file, [replace(p, qty=view.restock_qty(p), min_qty=0)
                                     for p in wanted])
    if as_json:
        emit_json([{**view.part_json(p), "to_order": view.restock_qty(p)} for p in parts])
        return
    view.print_low(out, parts)
    if order_file:
        skipped = len(parts) - len(wanted)
        out.print(f"Wrote {len(wanted)} rows to {order_file}; book them when they arrive with "
                  f"[bold]drawerfit stock receive {order_file}[/bold]."
                  + (f" {skipped} empty bins have no restock level and are not in the file "
                     "(set one with `stock adjust ID 0 --min N`)." if skipped else ""))


@command.command(name="receive")
@click.argument("file", type=click.Path(dir_okay=False))
@click.option("--bin", "bin_", metavar="LOC", default=None,
              help="The bin for every row whose location cell is empty.")
@pass_app
def receive(app, file: str, bin_: str | None) -> None:
    """Book an arrived order (stock-file format; packs and cost columns are ignored).

    Every row needs a bin: its location cell, or --bin LOC. Everything that arrived
    is booked, more than was ordered included; it counts against the awaited orders
    of its value, oldest first, closing each whose share is complete (a part of an
    order leaves it awaited with what arrived counted). `stock undo BATCH` reverses it.
    """
    store = app.store()
    if bin_ is not None and not bin_.strip():
        raise InputError("empty; name the bin", field="--bin")
    batch = store.receive(file, bin=bin_)
    moves = store.batch(batch)["movements"]
    out.print(f"Received {file}: {len(moves)} items, {sum(m['change'] for m in moves)} pieces "
              f"(batch {batch}).")
    for o in store.receipt_orders(batch):
        done = "closed" if o["state"] == "received" else "still awaited"
        out.print(f"  order {o['id']} ({o['kind']} {view.order_value(o)}): {o['pieces']} "
                  f"pieces counted, {view.arrival(o)}, {done}")
    out.print(f"{len(store.pending_orders())} orders still awaited.")


@command.group(name="orders", invoke_without_command=True)
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
@click.pass_context
def orders(ctx, as_json: bool) -> None:
    """Parts ordered with a committed plan and still awaited, with what has arrived of
    each (`orders cancel ID` drops one)."""
    if ctx.invoked_subcommand is not None:
        return
    pending = ctx.obj.store().pending_orders()
    if as_json:
        emit_json(pending)
        return
    view.print_orders(out, pending)


@orders.command(name="cancel")
@click.argument("order_id", type=int)
@click.option("--reason", default="", help="Why (kept in the history).")
@pass_app
def cancel(app, order_id: int, reason: str) -> None:
    """Drop an awaited order: nothing is awaited from it any more (logged in the history;
    `stock undo BATCH` re-opens it)."""
    batch = app.store().cancel_order(order_id, reason.strip())
    out.print(f"Order {order_id} cancelled (batch {batch}; re-open it with "
              f"[bold]drawerfit stock undo {batch}[/bold]).")
