"""Rich view of a plan: who gets which parts, what to order, what it costs, what the solver said.

Nothing here computes: :class:`optimiser.planning.Plan` arrives complete.  Values are
written as a technician writes them (:func:`inventory.values.format_value`,
:func:`inventory.values.format_si`).
"""

from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table
from rich.text import Text

from inventory.parts import POLARISED_DIELECTRICS
from inventory.values import format_si, format_value
from optimiser.planning import Allocation, Plan
from optimiser.planning.chain_columns import TRANSISTOR_ROLE

__all__ = ["print_plan", "bound_line", "part_lines", "plus_text"]


def _piece_text(p, kind: str, single: bool) -> str:
    where = p.location or "?"
    n = f"{p.count}× " if p.count != 1 else ""
    if single:
        return f"{n}{where}"
    return f"{n}{format_value(p.value, kind)} {where}"


def plus_text(plus: str | None, dielectrics) -> str:
    """Where the + lead of a capacitor goes: ``, + to base`` for a polarised one
    (electrolytic, tantalum, polymer), nothing for the others or when not known."""
    if not plus or not any((d or "").lower() in POLARISED_DIELECTRICS for d in dielectrics):
        return ""
    return f", + to {plus}"


def part_lines(alloc: Allocation) -> list[str]:
    """One line per role: ``R1 47k ← F1``, ``C_IN 10u, + to base ← K3`` (the + side of a
    polarised capacitor); a combination or several rows joined with +."""
    lines = []
    for role, pick in alloc.design.parts.items():
        kind = pick.pieces[0].kind if pick.pieces else (
            "capacitor" if role.startswith("C") else "resistor")
        if kind not in ("resistor", "capacitor"):
            continue
        single = pick.joined is None
        pieces = " + ".join(_piece_text(p, kind, single) for p in pick.pieces)
        joined = f" ({pick.joined})" if pick.joined else ""
        plus = plus_text(pick.plus, (p.dielectric for p in pick.pieces)) \
            if kind == "capacitor" else ""
        lines.append(f"{role} {format_value(pick.value, kind)}{joined}{plus} ← {pieces}")
    return lines


def _transistor_text(alloc: Allocation, polarity: dict[str, str]) -> str:
    """The transistor with its polarity; a chain's per stage with its bin
    (``S1 LABEL (npn) ← Q1``)."""
    def one(label: str) -> str:
        pol = polarity.get(label)
        return label + (f" ({pol})" if pol else "")

    labels = getattr(alloc.design, "transistors", ())
    if not labels:
        return one(alloc.design.transistor)
    lines = []
    for k, label in enumerate(labels, start=1):
        pick = alloc.design.parts.get(f"S{k}.{TRANSISTOR_ROLE}")
        where = " + ".join(_piece_text(p, "", True) for p in pick.pieces) if pick else "?"
        lines.append(f"S{k} {one(label)} ← {where}")
    return "\n".join(lines)


def _metric(m: dict, key: str, unit: str) -> str:
    v = m.get(key)
    return "—" if v is None else format_si(v, unit)


def _figures(alloc: Allocation) -> str:
    m = alloc.design.metrics or {}
    gain = m.get("gain_db")
    parts = [f"gain {gain:.1f} dB" if gain is not None else "gain —",
             f"f_low {_metric(m, 'f_low_hz', 'Hz')}",
             f"f_high {_metric(m, 'f_high_hz', 'Hz')}",
             f"I_C {_metric(m, 'ic_a', 'A')}"]
    stages = getattr(alloc.design, "stages", None)
    if stages:           # a chain: each stage's own operating point
        parts[-1] = "I_C " + ", ".join(f"S{k} {_metric(s, 'ic_a', 'A')}"
                                       for k, s in enumerate(stages, start=1))
    if m.get("ic_drift_pct") is not None:
        parts.append(f"drift {m['ic_drift_pct']:.1f} %")
    if m.get("thd_pct") is not None:
        parts.append(f"THD {m['thd_pct']:.2f} %")
    if alloc.design.score is not None:
        parts.append(f"score {alloc.design.score:.3g}")
    return "\n".join(parts)


def _money(x: float) -> str:
    return f"{x:.2f}"


def bound_line(bound) -> str:
    """What column generation proved of a plan, in one or two sentences."""
    b = bound
    offered = list(getattr(b, "offered_only", None) or [])
    over = "every design the drawer allows"
    if offered:
        over = ("every single-stage design the drawer allows and the designs the chain "
                f"search offered for {', '.join(offered)}")
    if b.proven_optimal and b.closed_by == "enumeration":
        return (f"Optimal over {over} (every design that could "
                f"beat the plan was enumerated and offered: {b.enumerated} added in "
                f"{b.enumeration_passes} passes; LP bound {b.lp:.6g}, plan {b.cost:.6g}).")
    if b.proven_optimal:
        return (f"Optimal over {over} (the LP bound meets the plan; "
                f"{b.columns_generated} designs added in {b.pricing_rounds} pricing rounds).")
    parts = []
    if b.proven_cheapest:
        parts.append("No cheaper order exists over "
                     + (over if offered else "any design") + " (proven by the LP bound).")
    if b.gap is not None:
        parts.append(f"Within {b.gap:.3g} of the best possible objective "
                     f"(LP bound {b.lp:.6g}, plan {b.cost:.6g}).")
    else:
        parts.append("No bound proven over designs not offered.")
    if not b.pricing_complete:
        parts.append("Pricing stopped before proving that no other design helps: "
                     + "; ".join(b.open or ["unknown reason"]) + ".")
    return " ".join(parts)


def print_plan(console: Console, plan: Plan, *, build_id: int | None = None,
               polarity: dict[str, str] | None = None) -> None:
    """Print the plan: allocations per request (each role's value, the + side of
    polarised capacitors, the bins; the transistor with its polarity, from
    ``polarity`` {label: "npn"/"pnp"}), shopping list, total, solver line."""
    polarity = polarity or {}
    solver = plan.solver
    status_style = "green" if solver.status == "Optimal" else "bold yellow"
    proven = plan.bound is not None and plan.bound.proven_infeasible
    if not plan.feasible and proven:
        console.print(Text("No plan meets every build: proven over every design the "
                           "drawer allows.", style="bold red"))
    elif not plan.feasible:
        console.print(Text("No plan from the designs offered meets every build.",
                           style="bold red"))
        console.print("The programme chose among each request's best designs for one copy "
                      "(--candidates), not among every design the drawer allows: a design "
                      "it was not offered may still fit. A single-stage build that has no "
                      "design at all is proven so by the complete search; a chain build's "
                      "reason says what its search covered.")
        for s in plan.infeasible:
            console.print(f"[bold]{escape(s.request)}[/bold]: {escape(s.reason)}")
            if s.shortage:
                t = Table(show_edge=False, box=None, padding=(0, 2))
                for col in ("kind", "part", "in stock", "needed"):
                    t.add_column(col, justify="right" if col in ("in stock", "needed") else "left")
                for row in s.shortage:
                    t.add_row(row["kind"], row["label"], str(row["have"]), str(row["need"]))
                console.print(t)
    else:
        warned = False
        for bp in plan.builds:
            mode = "identical copies" if bp.identical else "copies may differ"
            t = Table(title=f"{escape(bp.name)}: {bp.count} {'copy' if bp.count == 1 else 'copies'} "
                            f"({mode})", title_justify="left", show_lines=True)
            t.add_column("copies", justify="right")
            t.add_column("transistor")
            t.add_column("roles: values ← bins")
            t.add_column("figures")
            for a in bp.allocations:
                t.add_row(str(a.copies), escape(_transistor_text(a, polarity)),
                          escape("\n".join(part_lines(a))), _figures(a))
            console.print(t)
            for a in bp.allocations:
                for w in a.design.warnings:
                    console.print(f"  [yellow]caution[/yellow] ({escape(bp.name)}): {escape(w)}")
                    warned = True
        if warned:
            console.print("  Cautions are common practice only; local codes and licensed "
                          "practice come first.")
        if plan.purchases:
            t = Table(title="To order", title_justify="left")
            for col in ("kind", "value", "rating", "packs", "pieces", "for builds", "cost"):
                t.add_column(col, justify="left" if col in ("kind", "value", "rating")
                             else "right")
            for kind in ("resistor", "capacitor"):
                for p in (q for q in plan.purchases if q.kind == kind):
                    tol = f"{p.tolerance * 100:g} %" if p.tolerance is not None else ""
                    rating = (format_si(p.rating, "W") if kind == "resistor"
                              else f"{format_si(p.rating, 'V')} {p.dielectric or ''}".strip())
                    t.add_row(kind, p.label, f"{tol} {rating}".strip(), str(p.packs), str(p.qty),
                              str(p.used), _money(p.cost))
            console.print(t)
        else:
            console.print("Nothing to order: the drawer covers every build.")
        console.print(f"[bold]Total cost: {_money(plan.cost)}[/bold]")
    console.print(f"Solver {solver.name}: [{status_style}]{solver.status}[/{status_style}] "
                  f"in {solver.seconds:.2f} s, {plan.candidates} candidate designs")
    if solver.status == "Feasible":
        console.print("[yellow]The solver stopped before proving this plan the cheapest "
                      "(time limit); a cheaper one may exist.[/yellow]")
    if plan.bound is not None and plan.feasible:
        console.print(bound_line(plan.bound))
    if build_id is not None:
        console.print(f"Recorded as build {build_id} (see it with `drawerfit builds show "
                      f"{build_id}`; undo it with `drawerfit builds undo {build_id}`).")
