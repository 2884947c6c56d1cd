"""The command line: a thin Click layer over the libraries.

Each command lives in ``drawerfit/commands/<name>.py`` and exposes a Click
command or group named ``command``.  Errors of the project's own kind are
printed as one line per problem on stderr with their exit code (2 for bad
input); anything else is a bug and exits 1.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass

import click

from inventory.errors import DrawerfitError, InputError

__all__ = ["main", "cli", "AppContext", "pass_app"]

#: Command modules, in the order help lists them.
COMMAND_MODULES = ("stock", "design", "analyse", "plan", "builds", "demo", "db")


@dataclass
class AppContext:
    """What every command receives: where the store is."""

    db: str | None = None

    def store(self):
        """Open (create and migrate on first use) the store."""
        from inventory.store import open_store

        return open_store(self.db)


pass_app = click.make_pass_decorator(AppContext)

#: Characters that would break one problem's message over several lines.
_BREAKS = "\n\r\v\f\x1c\x1d\x1e\x85\u2028\u2029"


def _one_line(text: str) -> str:
    """One input problem on one line: line breaks quoted from the input are shown escaped."""
    return "".join(repr(c)[1:-1] if c in _BREAKS else c for c in text)


class _Group(click.Group):
    """Maps the project's errors to one line each on stderr and their exit code."""

    def invoke(self, ctx: click.Context):
        try:
            return super().invoke(ctx)
        except DrawerfitError as exc:
            lines = ([_one_line(str(e)) for e in getattr(exc, "errors", [exc])]
                     if isinstance(exc, InputError) else str(exc).splitlines())
            for line in lines or [exc.__class__.__name__]:
                click.echo(f"drawerfit: {line}", err=True)
            raise click.exceptions.Exit(exc.exit_code) from None


@click.group(cls=_Group,
             context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100})
@click.option("--db", metavar="PATH|URL", envvar="DRAWERFIT_DB", default=None,
              help="The stock store: a SQLite file path or an SQLAlchemy URL "
                   "(also DRAWERFIT_DB). Default: a SQLite file in your data folder.")
@click.version_option(package_name="drawerfit")
@click.pass_context
def cli(ctx: click.Context, db: str | None) -> None:
    """drawerfit: design BJT amplifier stages from the parts in your drawer.

    Reference: docs/requests.md (request, circuit and build-list files),
    docs/json.md (--json output, exit codes), docs/model.md (how figures are defined).
    """
    ctx.obj = AppContext(db=db)


for _name in COMMAND_MODULES:
    cli.add_command(importlib.import_module(f"drawerfit.commands.{_name}").command)


def main() -> None:
    """Console-script entry point."""
    cli.main(prog_name="drawerfit")
