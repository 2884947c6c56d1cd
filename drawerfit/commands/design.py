"""`drawerfit design` (to be written)."""

import click


@click.group(name="design")
def command() -> None:
    """(not yet available)"""
