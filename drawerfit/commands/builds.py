"""`drawerfit builds …`: the builds taken out of stock; record, show and undo them."""

from __future__ import annotations

from pathlib import Path

import click

from drawerfit.cli import pass_app
from drawerfit.console import emit_json, out
from drawerfit.render import stock as view
from inventory.errors import InputError

__all__ = ["command", "allocate_circuit"]


@click.group(name="builds")
def command() -> None:
    """Builds recorded with `plan --commit` or `builds add`: list, show, add, undo."""


@command.command(name="list")
@click.option("--json", "as_json", is_flag=True, help="Print JSON (shape: docs/json.md).")
@pass_app
def list_(app, as_json: bool) -> None:
    """Every build, oldest first."""
    builds = app.store().list_builds()
    if as_json:
        emit_json(builds)
        return
    view.print_builds(out, builds)


@command.command(name="show")
@click.argument("build_id", type=int)
@click.option("--json", "as_json", is_flag=True, help="Print JSON (with the stored designs).")
@click.option("--sheet", "sheet_dir", type=click.Path(file_okay=False), default=None,
              help="Also write the build sheet (sheet.html, schematic, plots, parts.csv) of "
                   "each line here, from the stored design (a build of several lines: one "
                   "folder per line, 1-REQUEST, 2-REQUEST …).")
@click.option("--request", "request_file", type=click.Path(dir_okay=False), default=None,
              help="The request TOML, for --sheet when the build does not store its request.")
@pass_app
def show(app, build_id: int, as_json: bool, sheet_dir: str | None = None,
         request_file: str | None = None) -> None:
    """One build: per line the roles, values, polarity and + side of polarised capacitors,
    the bins the pieces came from, and the ordered parts it still awaits."""
    store = app.store()
    build = store.build(build_id)
    parts = {p.id: p for p in store.parts()}
    if sheet_dir is not None:
        from drawerfit.sheet.cli import sheet_for_build

        lines = build["lines"]
        for n, line in enumerate(lines, start=1):
            where = Path(sheet_dir)
            if len(lines) > 1:
                where = where / f"{n}-{Path(line['request']).stem or 'line'}"
            sheet_for_build(str(where), {"id": build["id"], **line}, list(parts.values()),
                            request_file, quiet=as_json)
    if as_json:
        emit_json({**build,
                   "lines": [{**ln, "pieces": _pieces_json(ln["pieces"], parts)}
                             for ln in build["lines"]],
                   "pieces": _pieces_json(build["pieces"], parts)})
        return
    view.print_build(out, build, parts)


def _pieces_json(pieces: dict[int, int], parts: dict) -> list[dict]:
    return [{**view.part_json(parts[i]), "count": q} if i in parts else {"id": i, "count": q}
            for i, q in sorted(pieces.items())]


@command.command(name="add")
@click.argument("circuit", metavar="CIRCUIT.toml", type=click.Path(dir_okay=False))
@click.option("--copies", type=click.IntRange(min=1), default=None,
              help="Copies to build (default: the file's `builds`, else 1).")
@click.option("--json", "as_json", is_flag=True, help="Print the new build as JSON.")
@pass_app
def add(app, circuit: str, copies: int | None, as_json: bool) -> None:
    """Record a design chosen by hand (a circuit file, as `analyse` reads it) as a build and
    take its pieces out of stock, in one transaction.

    Each role takes its pieces from one stock row of its value and kind that holds
    enough pieces for every copy and whose rating the stage does not overstress
    (a role given as "#id" takes that row); the transistor is the stock type of
    its label.  A role that no row can serve is named, exit code 2, nothing changes.
    """
    from optimiser.circuit_file import load_circuit

    store = app.store()
    c = load_circuit(circuit, store=lambda: store)
    n = copies if copies is not None else max(int(c.request.builds or 1), 1)
    line = allocate_circuit(c, store.parts(), n, file=circuit)
    build_id = store.commit_builds([line])
    if as_json:
        emit_json(store.build(build_id))
        return
    out.print(f"Recorded build {build_id}: {Path(circuit).name} × {n} (see it with "
              f"[bold]drawerfit builds show {build_id}[/bold]; undo with "
              f"[bold]drawerfit builds undo {build_id}[/bold]).")


def allocate_circuit(c, parts: list, copies: int, *, file: str) -> dict:
    """A build line for ``copies`` copies of circuit ``c`` from the stock rows ``parts``.

    Each role takes one row of its kind and value (relative 1e-9) holding at least
    ``copies`` pieces; among those, the first (by id) whose rating the engine's
    derating rules accept at this stage's operating point.  Raises InputError
    naming the role (the file's ``parts.ROLE``) when no row serves it.
    """
    import math

    import numpy as np

    from inventory.parts import POLARISED_DIELECTRICS, Capacitor, Resistor, Transistor
    from optimiser.design import Piece, RolePick
    from optimiser.evaluate import design_of, evaluate
    from optimiser.stage import RESISTOR_ROLES, PartRatings

    values = c.batch().one(0)
    problems: list[InputError] = []
    cands: dict[str, list] = {}
    for role, v in values.items():
        kind = "resistor" if role in RESISTOR_ROLES else "capacitor"
        cls = Resistor if kind == "resistor" else Capacitor
        if role in c.stock_ids:
            rows = [p for p in parts if p.id == c.stock_ids[role]]
        else:
            rows = [p for p in parts if isinstance(p, cls)
                    and math.isclose(p.value, v, rel_tol=1e-9)]
        enough = sorted((p for p in rows if p.qty >= copies), key=lambda p: p.id)
        if not enough:
            have = ", ".join(f"id {p.id} ({p.location or 'no bin'}): {p.qty}" for p in rows)
            label = format_role_value(v, kind)
            problems.append(InputError(
                f"no stock row of {kind} {label} holds {copies} pieces"
                + (f" ({have})" if have else " (none in stock)")
                + "; add or receive some, or build fewer copies",
                file=file, field=f"parts.{role}"))
            continue
        cands[role] = enough
    label = c.transistor.label
    q = next((p for p in parts if isinstance(p, Transistor) and p.label == label), None)
    if q is None or q.qty < copies:
        problems.append(InputError(
            f"transistor {label!r}: " + ("not in stock" if q is None else
                                         f"stock id {q.id} holds {q.qty}, need {copies}"),
            file=file, field="transistor"))
    if problems:
        raise problems[0] if len(problems) == 1 else _errors(problems)

    # one candidate per index: row k of every role (the last row repeated)
    width = max(len(v) for v in cands.values())

    def row(role, k):
        return cands[role][min(k, len(cands[role]) - 1)]
    ratings = PartRatings(
        power_w={r: np.array([row(r, k).power_w for k in range(width)])
                 for r in cands if r in RESISTOR_ROLES},
        power_share={r: np.ones(width) for r in cands if r in RESISTOR_ROLES},
        voltage_v={r: np.array([row(r, k).voltage_v for k in range(width)])
                   for r in cands if r not in RESISTOR_ROLES},
        polarised={r: np.array([row(r, k).dielectric.lower() in POLARISED_DIELECTRICS
                                for k in range(width)])
                   for r in cands if r not in RESISTOR_ROLES})
    batch = type(c.batch()).from_values(c.request.topology, **{
        r: np.full(width, v) for r, v in values.items()})
    ev = evaluate(c.request, batch, c.transistor, ratings)
    fails = {rule.key: np.asarray(rule.fail, dtype=bool) for rule in ev.rules
             if rule.kind == "validity"}
    chosen: dict[str, int] = {}
    left = {p.id: p.qty for p in parts}
    left[q.id] -= copies
    for role in cands:
        bad = fails.get(f"power_{role}", fails.get(f"voltage_{role}"))
        ok = [k for k in range(len(cands[role])) if bad is None or not bad[k]]
        if not ok:
            rule = next(r for r in ev.rules if r.key in (f"power_{role}", f"voltage_{role}"))
            problems.append(InputError(
                f"no stock row of this value has rating enough: {rule.text(0)}",
                file=file, field=f"parts.{role}"))
            continue
        free = [k for k in ok if left[cands[role][k].id] >= copies]
        if not free:
            problems.append(InputError(
                "the rows of this value are taken by other roles of this circuit ("
                + ", ".join(f"id {cands[role][k].id}: {cands[role][k].qty}" for k in ok)
                + f"); {copies} more pieces are needed", file=file, field=f"parts.{role}"))
            continue
        chosen[role] = free[0]
        left[cands[role][free[0]].id] -= copies
    if problems:
        raise problems[0] if len(problems) == 1 else _errors(problems)
    picks = {}
    pieces: dict[int, int] = {q.id: copies}
    for role, k in chosen.items():
        p = cands[role][k]
        is_r = isinstance(p, Resistor)
        picks[role] = RolePick(role, float(values[role]), format_role_value(
            values[role], "resistor" if is_r else "capacitor"),
            (Piece(float(p.value), 1, p.id, p.location, "resistor" if is_r else "capacitor",
                   p.tolerance, p.power_w if is_r else p.voltage_v,
                   None if is_r else p.dielectric),))
        pieces[p.id] = pieces.get(p.id, 0) + copies
    # the stage once more with the rows chosen, for its figures, verdicts and + sides
    one = PartRatings(
        power_w={r: np.array([cands[r][k].power_w]) for r, k in chosen.items()
                 if r in RESISTOR_ROLES},
        power_share={r: np.ones(1) for r in chosen if r in RESISTOR_ROLES},
        voltage_v={r: np.array([cands[r][k].voltage_v]) for r, k in chosen.items()
                   if r not in RESISTOR_ROLES},
        polarised={r: np.array([cands[r][k].dielectric.lower() in POLARISED_DIELECTRICS])
                   for r, k in chosen.items() if r not in RESISTOR_ROLES})
    design = design_of(evaluate(c.request, c.batch(), c.transistor, one), 0, picks=picks,
                       label=label)
    from optimiser.cautions import cautions

    design.extra["cautions"] = [n.to_json() for n in cautions(design, c.request, q)]
    return {"request": Path(file).name, "copies": copies,
            "design": {**design.to_json(), "request": c.request.to_json()},
            "pieces": pieces}


def format_role_value(v: float, kind: str) -> str:
    from inventory.values import format_value

    return format_value(v, kind)


def _errors(problems):
    from inventory.errors import InputErrors

    return InputErrors(problems)


@command.command(name="undo")
@click.argument("build_id", type=int)
@pass_app
def undo(app, build_id: int) -> None:
    """Put a build's pieces back into stock exactly, every line in one step; the orders it
    counted on are no longer awaited."""
    store = app.store()
    before = {o["id"] for o in store.pending_orders()}
    batch = store.undo_build(build_id)
    dropped = sorted(before - {o["id"] for o in store.pending_orders()})
    out.print(f"Build {build_id} undone: its pieces are back in stock (batch {batch}).")
    if dropped:
        out.print(f"Orders {', '.join(map(str, dropped))} are no longer awaited; cancel them "
                  "with your supplier, or book them with `drawerfit stock receive` if they "
                  "arrive.")
