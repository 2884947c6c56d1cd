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
@click.option("--json", "as_json", is_flag=True, help="Print JSON (with the stored design).")
@click.option("--sheet", "sheet_dir", type=click.Path(file_okay=False), default=None,
              help="Also write the build sheet (sheet.html, schematic, plots, parts.csv) here.")
@click.option("--request", "request_file", type=click.Path(dir_okay=False), default=None,
              help="The request TOML, for --sheet when the build does not store its request.")
@pass_app
def show(app, build_id: int, as_json: bool, sheet_dir: str | None = None,
         request_file: str | None = None) -> None:
    """One build: the design it followed and the pieces it took."""
    store = app.store()
    build = store.build(build_id)
    parts = {p.id: p for p in store.parts()}
    if sheet_dir is not None:
        from drawerfit.sheet.cli import sheet_for_build

        sheet_for_build(sheet_dir, build, list(parts.values()), request_file, quiet=as_json)
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
