"""A searched chain as a circuit with given values: :func:`chain_circuit` turns a
:class:`~optimiser.search.chain_answer.ChainDesign` into the
:class:`~optimiser.circuit_file.PairCircuit` that ``analyse`` reads from a file, so that
the build sheet and the SPICE deck of ``design`` are the ones ``analyse`` writes.

:func:`picks_ratings` is the one home of how the pieces of a role rate it (the
single-stage sheet's :func:`drawerfit.sheet.writer.ratings_of` calls it too).
"""

from __future__ import annotations

from collections.abc import Callable

from inventory.errors import InputError
from inventory.parts import (
    DEFAULT_CAPACITOR_TOLERANCE,
    DEFAULT_RESISTOR_TOLERANCE,
    POLARISED_DIELECTRICS,
    StockSnapshot,
)
from optimiser.circuit_file import PairCircuit
from optimiser.design import RolePick
from optimiser.request import Request
from optimiser.stage import PartRatings
from optimiser.stages import form_of

__all__ = ["chain_circuit", "picks_ratings"]


def picks_ratings(picks: dict[str, RolePick],
                  kind_of: Callable[[str], str | None]) -> PartRatings:
    """The ratings of each role's pieces for the engine's derating rules.

    ``kind_of(role)``: "resistor", "capacitor" or None (the role is not rated).  A
    resistor role takes its weakest piece's power rating and, made of several pieces,
    the largest share of its dissipation one piece takes; a capacitor role its weakest
    piece's voltage rating and whether any piece is polarised.
    """
    power, share, volt, pol = {}, {}, {}, {}
    for role, pick in picks.items():
        kind = kind_of(role)
        if kind == "resistor":
            r = [pc.rating for pc in pick.pieces if pc.rating]
            if r:
                power[role] = min(r)
            n = sum(pc.count for pc in pick.pieces)
            if pick.joined and n > 1:
                if pick.joined == "series":
                    share[role] = max(pc.value for pc in pick.pieces) / pick.value
                else:
                    share[role] = pick.value / min(pc.value for pc in pick.pieces)
        elif kind == "capacitor":
            v = [pc.rating for pc in pick.pieces if pc.rating]
            if v:
                volt[role] = min(v)
            pol[role] = any((pc.dielectric or "").lower() in POLARISED_DIELECTRICS
                            for pc in pick.pieces)
    return PartRatings(power, share, volt, pol)


def _stock_rows(snapshot: StockSnapshot) -> dict:
    rows = {("resistor", r.id): r for r in snapshot.resistors}
    rows.update({("capacitor", c.id): c for c in snapshot.capacitors})
    return rows


def chain_circuit(design, request: Request, snapshot: StockSnapshot) -> PairCircuit:
    """The chain ``design`` (from :func:`optimiser.search.chains.search_chains` on
    ``request`` and ``snapshot``) as a :class:`PairCircuit`.

    Each role's value and label are the design's; its tolerance the widest of its
    pieces' (none known: the default of its kind); a role made of one stock row keeps
    that row (its id, bin, rating and dielectric, as a circuit file's ``"#id"`` does);
    the ratings are :func:`picks_ratings` of the pieces.  The transistors are the
    snapshot's rows of the design's labels (InputError on ``transistor`` when one is
    gone).
    """
    form = form_of(design.topology, design.coupling)
    transistors = []
    for label in design.transistors:
        t = snapshot.transistor(label)
        if t is None:
            raise InputError(f"transistor {label!r} is not in stock", field="transistor")
        transistors.append(t)
    rows = _stock_rows(snapshot)
    values, labels, tols, ids, stock_parts = {}, {}, {}, {}, {}
    for role, pick in design.parts.items():
        kind = form.kind(role)
        values[role] = float(pick.value)
        labels[role] = pick.label
        known = [pc.tolerance for pc in pick.pieces if pc.tolerance is not None]
        tols[role] = max(known) if known else (DEFAULT_RESISTOR_TOLERANCE if kind == "resistor"
                                               else DEFAULT_CAPACITOR_TOLERANCE)
        if len(pick.pieces) == 1 and pick.pieces[0].count == 1:
            item_id = pick.pieces[0].id
            row = rows.get((kind, item_id)) if item_id is not None else None
            if row is not None:
                ids[role] = item_id
                stock_parts[role] = row
    return PairCircuit(request, form, values, tuple(transistors), tols, labels, ids,
                       picks_ratings(design.parts, form.kind), stock_parts)
