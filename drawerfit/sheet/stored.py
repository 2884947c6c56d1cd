"""Rebuild a :class:`Design` from its JSON (a stored build), with ratings from stock.

The design JSON (docs/json.md) names each piece's stock row by ``id``; the
ratings, tolerances and dielectrics the sheet needs come from those rows.  A
row that no longer exists keeps the stock defaults.
"""

from __future__ import annotations

from collections.abc import Iterable
from types import SimpleNamespace

from inventory.errors import InputError
from inventory.parts import Capacitor, Resistor, Transistor
from optimiser.design import Design, Piece, RolePick
from optimiser.request import Request

__all__ = ["design_from_json", "chain_from_json", "request_from_json", "transistor_named"]


def design_from_json(data: dict, parts: Iterable = ()) -> Design:
    """A Design from one entry of ``designs`` (or a stored build's design)."""
    rows = {p.id: p for p in parts if getattr(p, "id", None) is not None}
    if not isinstance(data, dict) or "parts" not in data or "topology" not in data:
        raise InputError("the stored design has no parts or topology; it cannot be drawn")
    picks = {}
    for role, pj in data["parts"].items():
        kind = "capacitor" if role.split(".")[-1].startswith("C_") else "resistor"
        pieces = []
        for pc in pj.get("pieces", []):
            row = rows.get(pc.get("id"))
            rating = tol = diel = None
            if isinstance(row, Resistor):
                rating, tol = row.power_w, row.tolerance
            elif isinstance(row, Capacitor):
                rating, tol, diel = row.voltage_v, row.tolerance, row.dielectric
            pieces.append(Piece(float(pc.get("value", pj["value"])), int(pc.get("count", 1)),
                                pc.get("id"), pc.get("location", "") or "", kind, tol, rating,
                                diel))
        picks[role] = RolePick(role, float(pj["value"]), pj.get("label", ""), tuple(pieces),
                               pj.get("joined"), pj.get("plus"))
    return Design(topology=data["topology"], transistor=data.get("transistor", ""),
                  parts=picks, metrics=dict(data.get("metrics", {})),
                  meets_spec=bool(data.get("meets_spec", True)),
                  violations=list(data.get("violations", [])),
                  warnings=list(data.get("warnings", [])), score=data.get("score"),
                  rank=data.get("rank"), form=data.get("form"))


def chain_from_json(data: dict, parts: Iterable = ()) -> SimpleNamespace:
    """A stored chain design (a plan's chain line) as
    :func:`optimiser.chain_circuit.chain_circuit` reads it: ``topology``,
    ``coupling``, ``transistors``, ``parts`` (pieces as :func:`design_from_json`
    gives them) and ``rank``."""
    d = design_from_json(data, parts)
    topo = data["topology"]
    single = isinstance(topo, str)                   # the cascode: one name, no coupling
    return SimpleNamespace(topology=topo if single else tuple(topo),
                           coupling=data.get("coupling") if single
                           else (data.get("coupling") or "capacitor"),
                           transistors=tuple(data.get("transistors") or ()), parts=d.parts,
                           rank=data.get("rank"))


def request_from_json(data: dict) -> Request:
    """A Request from ``request`` as ``--json`` prints it (SI values)."""
    known = set(Request.__dataclass_fields__)
    kw = {k: v for k, v in data.items() if k in known}
    if "temp_c" in kw:
        kw["temp_c"] = tuple(kw["temp_c"])
    if isinstance(kw.get("topology"), list):         # a chain's two stages
        kw["topology"] = tuple(kw["topology"])
    if "topology" not in kw or "supply_v" not in kw:
        raise InputError("the stored request lacks topology or supply_v")
    return Request(**kw)


def transistor_named(label: str, parts: Iterable) -> Transistor:
    """The stock transistor with ``label``; InputError if the store no longer has it."""
    for p in parts:
        if isinstance(p, Transistor) and p.label == label:
            return p
    raise InputError(f"transistor {label!r} is no longer in stock; the sheet needs its data")
