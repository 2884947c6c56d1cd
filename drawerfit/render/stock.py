"""Rich views and JSON shapes of the stock, its history, builds and orders.

Values are printed as a technician writes them (:func:`inventory.values.format_value`,
:func:`inventory.values.format_si`).  Nothing here reads the store: the commands
hand over plain objects and dicts.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

from rich.console import Console
from rich.table import Table

from inventory.parts import Capacitor, Resistor, Transistor
from inventory.values import format_si, format_value

__all__ = ["part_json", "print_stock", "print_history", "print_builds", "print_build",
           "print_low", "print_orders", "restock_qty"]

Part = Resistor | Capacitor | Transistor

_TRANSISTOR_FIELDS = ("hfe_min", "hfe_max", "hfe_typ", "vbe", "ic_ref", "vaf", "vce_sat",
                      "vceo", "ic_max", "pd", "ft", "cob")


def part_json(part: Part) -> dict:
    """One stock row as the JSON object of ``stock list --json`` (docs/json.md).

    Keys: id, kind, value (SI float; null for transistors), label (the type's label,
    or the value as written for resistors and capacitors), qty, min_qty, location,
    tolerance, power, voltage, dielectric and the transistor figures (null where
    they do not apply).  Units are SI.
    """
    out = {"id": part.id, "kind": part.kind, "value": None, "label": None, "qty": part.qty,
           "min_qty": part.min_qty, "location": part.location, "tolerance": None,
           "power": None, "voltage": None, "dielectric": None}
    out.update(dict.fromkeys(_TRANSISTOR_FIELDS))
    if isinstance(part, Transistor):
        out["label"] = part.label
        for name in _TRANSISTOR_FIELDS:
            out[name] = getattr(part, name)
        return out
    out["value"] = part.value
    out["label"] = format_value(part.value, part.kind)
    out["tolerance"] = part.tolerance
    if isinstance(part, Resistor):
        out["power"] = part.power_w
    else:
        out["voltage"] = part.voltage_v
        out["dielectric"] = part.dielectric
    return out


def _pct(x: float) -> str:
    return f"{x * 100:g} %"


def _qty(part: Part) -> str:
    if part.qty == 0:
        return "[dim]0[/dim]"
    if part.qty < part.min_qty:
        return f"[yellow]{part.qty}[/yellow]"
    return str(part.qty)


def _opt(x: float | None, unit: str) -> str:
    return "—" if x is None else format_si(x, unit)


def print_stock(console: Console, parts: Sequence[Part], *, title: str = "") -> None:
    """Tables grouped by kind, each sorted by value (transistors by label)."""
    res = sorted((p for p in parts if isinstance(p, Resistor)), key=lambda p: (p.value, p.id or 0))
    caps = sorted((p for p in parts if isinstance(p, Capacitor)),
                  key=lambda p: (p.value, p.id or 0))
    trs = sorted((p for p in parts if isinstance(p, Transistor)), key=lambda p: p.label)
    if title:
        console.print(f"[bold]{title}[/bold]")
    if not (res or caps or trs):
        console.print("The store holds no parts. Add some with "
                      "[bold]drawerfit stock import FILE.csv[/bold].")
        return
    if res:
        t = Table(title=f"Resistors ({len(res)} rows, {sum(p.qty for p in res)} pieces)",
                  title_justify="left")
        for col, just in (("id", "right"), ("value", "right"), ("tol.", "right"),
                          ("power", "right"), ("location", "left"), ("qty", "right")):
            t.add_column(col, justify=just)
        for p in res:
            t.add_row(str(p.id), format_value(p.value, "resistor"), _pct(p.tolerance),
                      format_si(p.power_w, "W"), p.location, _qty(p))
        console.print(t)
    if caps:
        t = Table(title=f"Capacitors ({len(caps)} rows, {sum(p.qty for p in caps)} pieces)",
                  title_justify="left")
        for col, just in (("id", "right"), ("value", "right"), ("dielectric", "left"),
                          ("voltage", "right"), ("tol.", "right"), ("location", "left"),
                          ("qty", "right")):
            t.add_column(col, justify=just)
        for p in caps:
            diel = p.dielectric + (" (+/−)" if p.polarised else "")
            t.add_row(str(p.id), format_value(p.value, "capacitor"), diel,
                      format_si(p.voltage_v, "V"), _pct(p.tolerance), p.location, _qty(p))
        console.print(t)
    if trs:
        t = Table(title=f"Transistors ({len(trs)} types, {sum(p.qty for p in trs)} pieces)",
                  title_justify="left", box=None, padding=(0, 1), pad_edge=False,
                  show_edge=False, header_style="bold underline")
        for col, just in (("id", "right"), ("label", "left"), ("hFE", "right"),
                          ("V_BE", "right"), ("V_AF", "right"), ("f_T", "right"),
                          ("C_ob", "right"), ("V_CEO/I_C/P_D", "right"),
                          ("location", "left"), ("qty", "right")):
            t.add_column(col, justify=just, no_wrap=True)
        for p in trs:
            hfe = f"{p.hfe_min:g}–{p.hfe_max:g}"
            limits = " ".join("—" if x is None else f"{x:g}{u}"
                              for x, u in ((p.vceo, "V"), (p.ic_max, "A"), (p.pd, "W")))
            vbe = format_si(p.vbe, "V").replace(" ", "")
            if p.ic_ref != 1e-3:
                vbe += "@" + format_si(p.ic_ref, "A").replace(" ", "")
            label = p.label if p.polarity == "npn" else f"{p.label} (PNP)"
            t.add_row(str(p.id), label, hfe, vbe,
                      format_si(p.vaf, "V").replace(" ", ""), _opt(p.ft, "Hz"),
                      _opt(p.cob, "F"), limits,
                      p.location, _qty(p))
        console.print(t)


def print_history(console: Console, entries: Iterable[dict]) -> None:
    """One row per batch, newest first, with its movements summarised."""
    t = Table(title="Stock history (newest first)", title_justify="left")
    for col, just in (("batch", "right"), ("when (UTC)", "left"), ("kind", "left"),
                      ("note", "left"), ("changes", "left"), ("undone", "left")):
        t.add_column(col, justify=just, no_wrap=col in ("when (UTC)", "kind"))
    n = 0
    for e in entries:
        n += 1
        moves = e["movements"]
        if len(moves) == 1:
            shown = f"{moves[0]['change']:+d} {moves[0]['item']}"
        else:
            shown = (f"{len(moves)} items, {sum(m['change'] for m in moves):+d} pieces"
                     if moves else "—")
        t.add_row(str(e["batch"]), (e["when"] or "")[:16].replace("T", " "), e["kind"],
                  e["note"], shown,
                  f"by batch {e['undone_by']}" if e["undone_by"] else "")
    if n == 0:
        console.print("No stock movements yet.")
        return
    console.print(t)


def print_builds(console: Console, builds: Sequence[dict]) -> None:
    if not builds:
        console.print("No builds recorded yet.")
        return
    t = Table(title="Builds", title_justify="left")
    for col, just in (("id", "right"), ("request", "left"), ("copies", "right"),
                      ("created (UTC)", "left"), ("state", "left")):
        t.add_column(col, justify=just)
    for b in builds:
        t.add_row(str(b["id"]), b["request"], str(b["copies"]),
                  (b["created"] or "").replace("T", " ").rstrip("Z"),
                  "[dim]undone[/dim]" if b["undone"] else "taken from stock")
    console.print(t)


def _plus(pick: dict, parts: dict[int, Part]) -> str:
    """``+ to NODE`` for a role whose pieces are polarised capacitors, else ``""``."""
    from inventory.parts import POLARISED_DIELECTRICS

    plus = pick.get("plus")
    rows = [parts.get(pc.get("id")) for pc in pick.get("pieces", [])]
    if plus and any(isinstance(r, Capacitor) and r.dielectric.lower() in POLARISED_DIELECTRICS
                    for r in rows):
        return f"+ to {plus}"
    return ""


def print_build(console: Console, build: dict, parts: dict[int, Part]) -> None:
    """One build: per line the roles with their values, the + side of polarised
    capacitors, the transistor with its polarity, the bins the pieces came from; then
    the ordered parts it still awaits."""
    state = "undone (pieces put back)" if build["undone"] else "taken from stock"
    console.print(f"[bold]Build {build['id']}[/bold]: {build['request']} × {build['copies']}"
                  f", {build['created']}, {state}")
    for n, line in enumerate(build.get("lines", []), start=1):
        design = line.get("design") or {}
        t = Table(title=f"Line {n}: {line['request']} × {line['copies']}",
                  title_justify="left")
        for col, just in (("role", "left"), ("value", "right"), ("polarity", "left"),
                          ("from (bin, stock id)", "left"), ("pieces", "right")):
            t.add_column(col, justify=just)
        for role, pick in (design.get("parts") or {}).items():
            kind = "capacitor" if role.startswith("C_") else "resistor"
            value = pick.get("label") or format_value(pick["value"], kind)
            where = []
            for pc in pick.get("pieces", []):
                row = parts.get(pc.get("id"))
                bin_ = (row.location if row is not None else pc.get("location")) or "?"
                where.append(f"{bin_} (id {pc['id']})" if pc.get("id") is not None
                             else "to order")
            count = sum(int(pc.get("count", 1)) for pc in pick.get("pieces", []))
            t.add_row(role, value, _plus(pick, parts), ", ".join(where),
                      str(count * line["copies"]))
        # one transistor, or a chain's per stage (S1.Q, S2.Q)
        labels = ([("Q", design["transistor"])] if design.get("transistor") else
                  [(f"S{k}.Q", lab) for k, lab in enumerate(design.get("transistors") or [], 1)])
        for role, label in labels:
            q = next((p for p in parts.values()
                      if isinstance(p, Transistor) and p.label == label), None)
            t.add_row(role, label, q.polarity if q is not None else "?",
                      f"{q.location or '?'} (id {q.id})" if q is not None else "?",
                      str(line["copies"]))
        if not design.get("parts"):
            for item_id, qty in sorted(line["pieces"].items()):
                p = parts.get(item_id)
                val = "?" if p is None else (p.label if isinstance(p, Transistor)
                                             else format_value(p.value, p.kind))
                t.add_row("?", val, "", f"{p.location if p else '?'} (id {item_id})", str(qty))
        console.print(t)
    waiting = [o for o in build.get("orders", []) if o["state"] == "awaited"]
    if waiting:
        console.print("Still to arrive for this build:")
        print_orders(console, waiting)
    elif build.get("orders"):
        console.print("Nothing is awaited for this build: its orders were "
                      + ", ".join(sorted({o["state"] for o in build["orders"]})) + ".")


def restock_qty(part: Part) -> int:
    """Pieces that bring an item back to its restock level (0 for an empty bin that
    has none: how many to buy is the owner's call)."""
    return max(part.min_qty - part.qty, 0)


def print_low(console: Console, parts: Sequence[Part]) -> None:
    if not parts:
        console.print("No bin is empty and nothing is below its restock level.")
        return
    t = Table(title="Empty or below restock level", title_justify="left")
    for col, just in (("id", "right"), ("kind", "left"), ("value", "right"),
                      ("location", "left"), ("qty", "right"), ("min", "right"),
                      ("to order", "right")):
        t.add_column(col, justify=just)
    for p in parts:
        val = p.label if isinstance(p, Transistor) else format_value(p.value, p.kind)
        t.add_row(str(p.id), p.kind, val, p.location, str(p.qty), str(p.min_qty),
                  str(restock_qty(p)))
    console.print(t)


def print_orders(console: Console, orders: Sequence[dict]) -> None:
    if not orders:
        console.print("No orders awaiting arrival.")
        return
    t = Table(title="Awaiting arrival", title_justify="left")
    for col, just in (("order", "right"), ("created (UTC)", "left"), ("kind", "left"),
                      ("value", "right"), ("qty", "right"), ("for build", "right"),
                      ("taken by it", "right"), ("arrived", "right")):
        t.add_column(col, justify=just, no_wrap=col == "arrived")
    for o in orders:
        t.add_row(str(o["id"]), (o["created"] or "").replace("T", " ").rstrip("Z"), o["kind"],
                  order_value(o), str(o["qty"]),
                  "" if o.get("build") is None else str(o["build"]), str(o.get("used", 0)),
                  arrival(o).removeprefix("arrived "))
    console.print(t)


def order_value(o: dict) -> str:
    """An order's value as a technician writes it, or its transistor label."""
    if o["value"] is not None and o["kind"] in ("resistor", "capacitor"):
        return format_value(o["value"], o["kind"])
    return o.get("label") or "—"


def arrival(o: dict) -> str:
    """What has arrived of an order's share for the drawer: ``arrived 5 of 8``."""
    return f"arrived {o.get('arrived', 0)} of {o.get('due', o['qty'])}"
