"""`drawerfit db …`: check the store, back it up, restore a backup."""

from __future__ import annotations

import click

from drawerfit.cli import pass_app
from drawerfit.console import out
from inventory.errors import StoreError

__all__ = ["command"]


@click.group(name="db")
def command() -> None:
    """The store itself: integrity check, backup and restore."""


@command.command(name="check")
@pass_app
def check(app) -> None:
    """Verify the schema version, that no quantity is negative and that every
    quantity equals the sum of its logged movements."""
    store = app.store()
    problems = store.check()
    if problems:
        raise StoreError("\n".join([f"{store.url}: {len(problems)} problem(s) found:",
                                    *problems]))
    out.print(f"{store.url}: schema {store.revision()}, {len(store.parts())} items, "
              "every quantity matches its movements. OK.")


@command.command(name="backup")
@click.argument("file", type=click.Path(dir_okay=False))
@pass_app
def backup(app, file: str) -> None:
    """Write a consistent copy of the store to FILE (SQLite: a store file; else JSON)."""
    kind = app.store().backup(file)
    out.print(f"Backed up to {file} ({'SQLite store' if kind == 'sqlite' else 'JSON dump'}).")


@command.command(name="restore")
@click.argument("file", type=click.Path(dir_okay=False))
@pass_app
def restore(app, file: str) -> None:
    """Fill an EMPTY store (give it with --db) from a backup FILE."""
    store = app.store()
    store.restore(file)
    out.print(f"Restored {file} into {store.url}: {len(store.parts())} items, "
              f"{len(store.list_builds())} builds, {len(store.history())} batches.")
