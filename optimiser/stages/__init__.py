"""One module per topology (ce, cb, cc), each satisfying :class:`.base.Topology`:
its roles and forms, role rules, wiring, small-signal netlist, quasi-static
Thevenins, capacitor placement, score terms, default gain and what the stock
search needs (``SEARCH``).  :func:`module`
picks one by name; :data:`NAMES` lists them."""

from __future__ import annotations

from importlib import import_module
from types import ModuleType

__all__ = ["NAMES", "module", "modules", "PAIR_COUPLINGS", "pair_form", "form_of"]

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


#: How the two stages of a chain may be joined (``coupling`` of a request).
PAIR_COUPLINGS: tuple[str, ...] = ("capacitor", "direct")


def pair_form(topology, coupling: str | None = None):
    """The two-transistor form (:class:`.pair.PairForm`) of a request's ``topology``
    (a list of two stage names, or ``"cascode"``) and ``coupling``; ``ValueError``
    naming what is possible when there is none."""
    if topology == "cascode":
        if coupling is not None:
            raise ValueError("a cascode has no coupling: leave coupling out")
        return import_module(f"{__name__}.cascode").form()
    first, second = topology
    if first not in NAMES or second not in NAMES:
        raise ValueError(f"each stage of a chain is one of {', '.join(NAMES)}")
    if coupling in (None, "capacitor"):
        return import_module(f"{__name__}.chain").form(first, second)
    if coupling == "direct":
        if (first, second) != ("ce", "cc"):
            raise ValueError('coupling = "direct" is for ["ce", "cc"] (the follower\'s base '
                             'on the first collector)')
        return import_module(f"{__name__}.direct").form()
    raise ValueError(f"unknown coupling {coupling!r}: use {' or '.join(PAIR_COUPLINGS)}")


def form_of(topology, coupling: str | None = None):
    """The form of a request's or a design's ``topology`` and ``coupling`` as they are
    stored: ``"cascode"`` (no coupling), or two stage names with ``coupling`` (None:
    capacitor-coupled)."""
    if isinstance(topology, str):
        return pair_form(topology)
    return pair_form(tuple(topology), coupling or "capacitor")
