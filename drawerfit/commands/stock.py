"""`drawerfit stock` (to be written)."""

import click


@click.group(name="stock")
def command() -> None:
    """(not yet available)"""
