"""One module per topology: its small-signal netlist, its quasi-static large-signal
Thevenins and its capacitor placement.  :func:`module` picks one by name."""

from __future__ import annotations

from importlib import import_module
from types import ModuleType

__all__ = ["module"]


def module(topology: str) -> ModuleType:
    """The stage module of ``topology`` ("ce", "cb" or "cc")."""
    if topology not in ("ce", "cb", "cc"):
        raise ValueError(f"unknown topology {topology!r}")
    return import_module(f"{__name__}.{topology}")
