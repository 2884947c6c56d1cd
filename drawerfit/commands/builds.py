"""`drawerfit builds …`: the builds taken out of stock; show and undo them."""

from __future__ import annotations

import click

from drawerfit.cli import pass_app
from drawerfit.console import emit_json, out
from drawerfit.render import stock as view

__all__ = ["command"]


@click.group(name="builds")
def command() -> None:
    """Builds recorded with `plan --commit`: list, show, undo."""


@command.command(name="list")
@click.option("--json", "as_json", is_flag=True, help="Print JSON.")
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
@click.option("--json", "as_json", is_flag=True, help="Print JSON (with the stored design).")
@pass_app
def show(app, build_id: int, as_json: bool) -> None:
    """One build: the design it followed and the pieces it took."""
    store = app.store()
    build = store.build(build_id)
    parts = {p.id: p for p in store.parts()}
    if as_json:
        emit_json({**build,
                   "pieces": [{**view.part_json(parts[i]), "count": q} if i in parts
                              else {"id": i, "count": q}
                              for i, q in sorted(build["pieces"].items())]})
        return
    view.print_build(out, build, parts)


@command.command(name="undo")
@click.argument("build_id", type=int)
@pass_app
def undo(app, build_id: int) -> None:
    """Put a build's pieces back into stock exactly."""
    batch = app.store().undo_build(build_id)
    out.print(f"Build {build_id} undone: its pieces are back in stock (batch {batch}).")
