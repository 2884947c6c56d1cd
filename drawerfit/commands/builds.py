"""`drawerfit builds` (to be written)."""

import click


@click.group(name="builds")
def command() -> None:
    """(not yet available)"""
