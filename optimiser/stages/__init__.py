"""One module per topology (ce, cb, cc), each satisfying :class:`.base.Topology`:
its roles and forms, role rules, wiring, small-signal netlist, quasi-static
Thevenins, capacitor placement, score terms, default gain and what the stock
search needs (``SEARCH``).  :func:`module`
picks one by name; :data:`NAMES` lists them."""

from __future__ import annotations

from importlib import import_module
from types import ModuleType

__all__ = ["NAMES", "module", "modules"]

#: The topologies, each a module of this package of the same name.
NAMES: tuple[str, ...] = ("ce", "cb", "cc")


def module(topology: str) -> ModuleType:
    """The stage module of ``topology`` (one of :data:`NAMES`)."""
    if topology not in NAMES:
        raise ValueError(f"unknown topology {topology!r}")
    return import_module(f"{__name__}.{topology}")


def modules() -> tuple[ModuleType, ...]:
    """Every topology module, in :data:`NAMES` order."""
    return tuple(module(name) for name in NAMES)
