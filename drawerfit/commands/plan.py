"""`drawerfit plan` (to be written)."""

import click


@click.group(name="plan")
def command() -> None:
    """(not yet available)"""
