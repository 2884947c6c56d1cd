"""parts.csv: one row per role (role, value, kind, rating, pieces, location).

``pieces`` counts the pieces for all ``builds`` copies; ``per_copy`` for one.
Extra columns: ``dielectric`` and ``plus`` (the node the + terminal of a
polarised capacitor faces).
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass
from pathlib import Path

from drawerfit.sheet import fmt
from inventory.parts import (
    DEFAULT_CAPACITOR_VOLTAGE_V,
    DEFAULT_RESISTOR_POWER_W,
    POLARISED_DIELECTRICS,
)
from optimiser import stages
from optimiser.design import Design
from optimiser.request import Request
from optimiser.stage import RESISTOR_ROLES

__all__ = ["COLUMNS", "PartRow", "part_rows", "pick_route", "location_key", "write_parts_csv",
           "pair_part_rows", "pair_pick_route"]

COLUMNS = ("role", "value", "kind", "rating", "pieces", "location", "per_copy", "dielectric",
           "plus")


@dataclass(frozen=True)
class PartRow:
    role: str
    value: str
    kind: str
    rating: str
    pieces: int
    location: str
    per_copy: int
    dielectric: str = ""
    plus: str = ""


def location_key(loc: str) -> tuple:
    """Natural order of bin names: A2 before A10, empty last."""
    if not loc:
        return ((1,),)
    parts = re.split(r"(\d+)", loc.strip().lower())
    return ((0,),) + tuple((0, int(p)) if p.isdigit() else (1, p) for p in parts if p)


def _role_order(design: Design) -> list[str]:
    known = stages.module(design.topology).ROLE_NAMES if design.topology in stages.NAMES else ()
    order = [r for r in known if r in design.parts]
    return order + [r for r in design.parts if r not in order]


def _kind(role: str) -> str:
    return "resistor" if role in RESISTOR_ROLES else "capacitor"


def _rating(kind: str, pick) -> str:
    vals = sorted({pc.rating for pc in pick.pieces if pc.rating})
    if kind == "resistor":
        vals = vals or [DEFAULT_RESISTOR_POWER_W]
        return " / ".join(fmt.si(v, "W") for v in vals)
    vals = vals or [DEFAULT_CAPACITOR_VOLTAGE_V]
    return " / ".join(fmt.si(v, "V") for v in vals)


def _role_row(role: str, pick, kind: str, request: Request, plus: dict[str, str]) -> PartRow:
    per_copy = sum(pc.count for pc in pick.pieces) or 1
    diel = sorted({pc.dielectric for pc in pick.pieces if pc.dielectric})
    polar = any(d.lower() in POLARISED_DIELECTRICS for d in diel)
    value = pick.label or fmt.value(pick.value, kind)
    if pick.joined:
        sep = " + " if pick.joined == "series" else " || "
        value += " (" + sep.join(fmt.value(pc.value, kind) for pc in pick.pieces
                                 for _ in range(pc.count)) + ")"
    return PartRow(role, value, kind, _rating(kind, pick), per_copy * request.builds,
                   fmt.location_of(pick), per_copy, "/".join(diel),
                   plus.get(role, "") if polar else "")


def _transistor_row(role: str, label: str, transistor, request: Request) -> PartRow:
    rating = []
    if transistor is not None:
        if getattr(transistor, "pd", None):
            rating.append(f"pd {fmt.si(transistor.pd, 'W')}")
        if getattr(transistor, "vceo", None):
            rating.append(f"V_CEO {fmt.si(transistor.vceo, 'V')}")
        if getattr(transistor, "ic_max", None):
            rating.append(f"I_C max {fmt.si(transistor.ic_max, 'A')}")
    return PartRow(role, label, getattr(transistor, "polarity", "npn") or "npn",
                   ", ".join(rating), request.builds,
                   getattr(transistor, "location", "") or "", 1)


def part_rows(design: Design, request: Request, transistor=None,
              plus: dict[str, str] | None = None) -> list[PartRow]:
    """The rows of parts.csv, in role order, the transistor last."""
    plus = plus or {}
    rows = [_role_row(role, design.parts[role], _kind(role), request, plus)
            for role in _role_order(design)]
    rows.append(_transistor_row("Q", design.transistor, transistor, request))
    return rows


def pair_part_rows(form, picks: dict, request: Request, transistors,
                   plus: dict[str, str] | None = None) -> list[PartRow]:
    """The rows of parts.csv of a two-transistor circuit: its roles in the form's order,
    then each transistor (``S1.Q``, ``S2.Q``)."""
    plus = plus or {}
    rows = [_role_row(role, picks[role], form.kind(role), request, plus)
            for role in form.role_names if role in picks]
    rows += [_transistor_row(f"{stage}.Q", t.label, t, request)
             for stage, t in zip(form.stages, transistors, strict=True)]
    return rows


def _piece_rating(kind: str, rating: float | None) -> str:
    """The piece's rating; the stock default, marked so, when the piece has none."""
    if rating:
        return fmt.si(rating, "W" if kind == "resistor" else "V")
    if kind == "resistor":
        return fmt.si(DEFAULT_RESISTOR_POWER_W, "W") + " (default)"
    return fmt.si(DEFAULT_CAPACITOR_VOLTAGE_V, "V") + " (default)"


def _route_lines(role: str, pick, kind: str, request: Request) -> list[dict]:
    lines = [{"location": pc.location or "", "role": role,
              "value": fmt.value(pc.value, kind), "kind": kind,
              "count": pc.count * request.builds, "rating": _piece_rating(kind, pc.rating),
              "dielectric": pc.dielectric or ""} for pc in pick.pieces]
    if not pick.pieces:
        lines.append({"location": "", "role": role, "value": pick.label, "kind": kind,
                      "count": request.builds, "rating": "", "dielectric": ""})
    return lines


def _transistor_line(role: str, label: str, transistor, request: Request) -> dict:
    return {"location": getattr(transistor, "location", "") or "", "role": role,
            "value": label, "kind": getattr(transistor, "polarity", "npn"),
            "count": request.builds, "rating": "", "dielectric": ""}


def pick_route(design: Design, request: Request, transistor=None) -> list[dict]:
    """One line per stock row to take from, sorted as a walk past the bins."""
    lines = []
    for role in _role_order(design):
        lines += _route_lines(role, design.parts[role], _kind(role), request)
    lines.append(_transistor_line("Q", design.transistor, transistor, request))
    lines.sort(key=lambda r: (location_key(r["location"]), r["role"]))
    return lines


def pair_pick_route(form, picks: dict, request: Request, transistors) -> list[dict]:
    """:func:`pick_route` of a two-transistor circuit (both transistors as ``S1.Q``,
    ``S2.Q``; one transistor type for both is taken as one line)."""
    lines = []
    for role in form.role_names:
        if role in picks:
            lines += _route_lines(role, picks[role], form.kind(role), request)
    labels = [t.label for t in transistors]
    if len(set(labels)) == 1 and transistors[0] == transistors[1]:
        line = _transistor_line(" + ".join(f"{s}.Q" for s in form.stages), labels[0],
                                transistors[0], request)
        line["count"] = 2 * request.builds
        lines.append(line)
    else:
        lines += [_transistor_line(f"{stage}.Q", t.label, t, request)
                  for stage, t in zip(form.stages, transistors, strict=True)]
    lines.sort(key=lambda r: (location_key(r["location"]), r["role"]))
    return lines


def write_parts_csv(path: Path, rows: list[PartRow]) -> Path:
    path = Path(path)
    with path.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(COLUMNS)
        for r in rows:
            w.writerow([getattr(r, c) for c in COLUMNS])
    return path
