"""`drawerfit demo` (to be written)."""

import click


@click.group(name="demo")
def command() -> None:
    """(not yet available)"""
