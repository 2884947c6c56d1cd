"""`drawerfit db` (to be written)."""

import click


@click.group(name="db")
def command() -> None:
    """(not yet available)"""
