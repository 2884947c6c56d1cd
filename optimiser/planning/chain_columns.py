"""Chain builds in a plan: the chain search's ranked designs as the programme's columns.

A build whose request names two stages (``topology = ["ce", "cc"]``) is offered the
best designs of :func:`optimiser.search.chains.search_chains`, searched for the copies
one column carries (:func:`~optimiser.planning.copies.carried`) over the drawer as it
is and, with a ``[purchase]`` table, over the drawer plus the values it offers (and per
transistor type, as :func:`~optimiser.planning.candidates.gather_candidates` does for
single stages).  Each becomes a :class:`ChainPlanDesign`: every piece of both stages under its
role (``S1.RC``, ``S2.RE``, ``C_COUPLE`` …) and one piece of each stage's transistor
under ``S1.Q`` and ``S2.Q``, so that the programme counts both transistors and every
piece against the same stock rows as the single-stage columns.

Column generation does not price chains: a chain build is planned over the designs
offered here (those needing a value to order among them, bought as any column's), and
the plan's bound says so (``offered_only``, docs/plan.md).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace

from inventory.errors import InputError
from inventory.parts import StockSnapshot
from optimiser.design import Design, Piece, RolePick, _clean
from optimiser.planning.candidates import (
    PER_TYPE_DIVISOR,
    PER_TYPE_MIN,
    CandidateSearches,
    design_key,
)
from optimiser.request import Request
from optimiser.search.chain_answer import ChainDesign
from optimiser.search.chains import search_chains

__all__ = ["TRANSISTOR_ROLE", "ChainPlanDesign", "chain_design", "chain_candidates"]

#: The role of each stage's transistor among a chain column's parts (``S1.Q``, ``S2.Q``).
TRANSISTOR_ROLE = "Q"


@dataclass
class ChainPlanDesign(Design):
    """A chain as a column of the plan: a :class:`~optimiser.design.Design` whose parts
    hold both stages' pieces and both transistors (roles ``S1.Q``, ``S2.Q``)."""

    coupling: str = "capacitor"
    transistors: tuple[str, ...] = ()
    stages: list = field(default_factory=list)

    @property
    def stage_topology(self) -> tuple[str, ...]:
        return tuple(self.topology.split("-"))

    def to_json(self) -> dict:
        """A chain design's JSON (docs/json.md, ``design`` of a chain request): the
        resistor and capacitor roles under ``parts``, the transistors by stage."""
        # a chain's two stage names; the cascode's one name (as ChainDesign.to_json)
        topo = list(self.stage_topology) if "-" in self.topology else self.topology
        d = {"rank": self.rank, "topology": topo,
             "coupling": self.coupling, "transistors": list(self.transistors),
             "parts": {r: p.to_json() for r, p in self.parts.items()
                       if not _is_transistor_role(r)},
             "metrics": {k: _clean(v) for k, v in self.metrics.items()},
             "stages": [{k: _clean(v) if not isinstance(v, str) else v for k, v in s.items()}
                        for s in self.stages],
             "meets_spec": bool(self.meets_spec), "score": _clean(self.score)}
        if self.violations:
            d["violations"] = list(self.violations)
        if self.warnings:
            d["warnings"] = list(self.warnings)
        return d


def _is_transistor_role(role: str) -> bool:
    return role.split(".")[-1] == TRANSISTOR_ROLE


def chain_design(c: ChainDesign, snapshot: StockSnapshot) -> ChainPlanDesign | None:
    """``c`` as a plan column, or None when a transistor it names is not in the drawer."""
    parts = dict(c.parts)
    for k, label in enumerate(c.transistors, start=1):
        t = snapshot.transistor(label)
        if t is None or t.id is None:
            return None
        role = f"S{k}.{TRANSISTOR_ROLE}"
        parts[role] = RolePick(role, 0.0, label, (Piece(0.0, 1, t.id, t.location, t.kind),))
    return ChainPlanDesign(topology=(c.topology if isinstance(c.topology, str)
                                     else "-".join(c.topology)), transistor=c.transistors[0],
                           parts=parts, metrics=dict(c.metrics), meets_spec=c.meets_spec,
                           violations=list(c.violations), warnings=list(c.warnings),
                           score=c.score, rank=c.rank, coupling=c.coupling,
                           transistors=tuple(c.transistors), stages=list(c.stages))


def chain_candidates(request: Request, snapshot: StockSnapshot, *, top: int,
                     search_time_s: float | None, copies: int = 1,
                     augmented: StockSnapshot | None = None
                     ) -> tuple[list[ChainPlanDesign], str, CandidateSearches]:
    """The chain search's best ``top`` designs for ``copies`` copies carried at once, and
    for a request open to any transistor the best few on each type those leave short
    (both stages on it), as plan columns ranked by score; ``note`` says why there are
    none (the search's own reasons).

    ``augmented``: the drawer plus the values the ``[purchase]`` table offers
    (:func:`optimiser.purchase.augment`); when given, the best ``top`` over it too, and
    the per-type searches over it (as :func:`~optimiser.planning.candidates.gather_candidates`
    does for single stages).  Their pieces of values to order name the virtual rows,
    which the programme prices as any column's purchases."""
    t0 = time.perf_counter()
    one = replace(request, builds=max(int(copies), 1))
    wider = augmented if augmented is not None else snapshot
    res = search_chains(one, snapshot, top=top, time_limit_s=search_time_s, unlocks=False)
    found = [c for c in res.designs if c.meets_spec]
    runs, stopped = 1, int(not res.search.get("stage_searches_complete", True))
    if wider is not snapshot:
        more = search_chains(one, wider, top=top, time_limit_s=search_time_s, unlocks=False)
        runs += 1
        stopped += int(not more.search.get("stage_searches_complete", True))
        found += [c for c in more.designs if c.meets_spec]
    if request.transistor == "any":
        # as for single stages: a type the best chains leave short gets its own
        # search (both stages on it), so that a scarce type never leaves the
        # programme without alternatives
        per = max(PER_TYPE_MIN, top // PER_TYPE_DIVISOR)
        for t in sorted({t.label for t in snapshot.transistors if t.qty > 0}):
            # (a chain counts for a type only when both its stages are on it: a chain
            # with one stage on a scarce type still draws on that type)
            if sum(all(x == t for x in c.transistors) for c in found) >= per:
                continue
            # over the drawer and over the drawer plus values to order, as the best
            # ones above: the composed search is not complete, and over the wider
            # drawer its stage lists can leave out every chain the drawer alone holds
            for drawer in dict.fromkeys((snapshot, wider)):
                try:
                    more = search_chains(replace(one, transistor=t), drawer, top=per,
                                         time_limit_s=search_time_s, unlocks=False)
                except InputError:
                    break
                runs += 1
                stopped += int(not more.search.get("stage_searches_complete", True))
                found += [c for c in more.designs if c.meets_spec]
    seen: set[tuple] = set()
    designs = []
    # (the same values from stock rows and from rows to order are two columns, as for
    # single stages: design_key names the rows)
    for c in sorted(found, key=lambda c: c.score):
        d = chain_design(c, snapshot)
        if d is not None and design_key(d) not in seen:
            seen.add(design_key(d))
            designs.append(d)
    for k, d in enumerate(designs, start=1):
        d.rank = k                       # the rank among every chain offered
    note = ""
    if not designs:
        note = "no chain meets the request from this drawer"
        if copies > 1:
            note += f" for {copies} identical copies (each piece from one row)"
        if not res.search.get("proven"):
            note += " among the chains the search composed"
        refused = int(res.search.get("stock_refused", 0) or 0)
        if refused and copies > 1:
            note += (f"; {refused} chains composed need more pieces of a row than it "
                     f"holds for {copies} copies")
        why = res.search.get("why") or []
        if why:
            note += "; " + "; ".join(why[:2])
        elif res.nearest_misses and res.nearest_misses[0].violations:
            note += "; nearest miss: " + ", ".join(res.nearest_misses[0].violations[:3])
    return designs, note, CandidateSearches(runs, time.perf_counter() - t0, stopped)
