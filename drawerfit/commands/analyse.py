"""`drawerfit analyse` (to be written)."""

import click


@click.group(name="analyse")
def command() -> None:
    """(not yet available)"""
