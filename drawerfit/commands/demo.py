"""`drawerfit demo`: the invented demo drawer in a throwaway store, shown as tables.

The demo never touches your own store (``--db`` is ignored): it loads
``drawerfit/data/demo_stock.csv`` into a store in a temporary folder that is
deleted afterwards.  ``--save-csv FILE`` writes the demo stock file so that you
can import it into a store of your own.
"""

from __future__ import annotations

import shutil
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING

import click

from drawerfit.console import out
from drawerfit.render.stock import print_stock

if TYPE_CHECKING:
    from inventory.store import Store

__all__ = ["command", "demo_csv_path", "demo_store", "show_demo_stock"]


@contextmanager
def demo_csv_path() -> Iterator[Path]:
    """The packaged demo stock file as a real path."""
    with resources.as_file(resources.files("drawerfit") / "data" / "demo_stock.csv") as p:
        yield Path(p)


@contextmanager
def demo_store() -> Iterator[Store]:
    """A throwaway store in a temporary folder, loaded with the demo drawer."""
    from inventory.store import open_store  # the store loads when first needed

    with tempfile.TemporaryDirectory(prefix="drawerfit-demo-") as tmp:
        store = open_store(str(Path(tmp) / "demo.sqlite"))
        try:
            with demo_csv_path() as csv_path:
                store.import_csv(csv_path)
            yield store
        finally:
            store.close()


def show_demo_stock(store: Store) -> None:
    """Print the demo drawer as the stock tables."""
    print_stock(out, store.parts(),
                title="The demo drawer: the Millbrook Street electronics club's cabinet (invented)")


@click.command(name="demo")
@click.option("--save-csv", type=click.Path(dir_okay=False), default=None,
              help="Also write the demo stock file here, to import into your own store.")
def command(save_csv: str | None) -> None:
    """Show what drawerfit does on an invented club's drawer (your store is not touched)."""
    if save_csv:
        with demo_csv_path() as src:
            shutil.copyfile(src, save_csv)
        out.print(f"Wrote the demo stock file to {save_csv}.")
    with demo_store() as store:
        show_demo_stock(store)
        from drawerfit.commands.design import show_demo_design

        show_demo_design(store)
