"""Chains from pairs of stage designs, confirmed by the two-transistor engine
(:func:`optimiser.pair_evaluate.evaluate_pair`) with the pieces of both stages counted
together against stock (docs/search.md, "Chains")."""

from __future__ import annotations

import time
from collections import Counter, defaultdict
from dataclasses import replace

import numpy as np

from inventory.parts import POLARISED_DIELECTRICS, StockSnapshot
from inventory.values import format_value
from optimiser.design import Piece, RolePick
from optimiser.pair_evaluate import evaluate_pair
from optimiser.request import Request
from optimiser.score import STOCK_PENALTY
from optimiser.search.chain_answer import ChainDesign
from optimiser.search.chain_score import chain_score_terms
from optimiser.search.stock import piece_ratings
from optimiser.stages import form_of
from optimiser.stages.pair import PairBatch

__all__ = ["chain_parts", "stock_use", "confirm_chains", "confirm_with_retry",
           "largest_capacitors", "with_swing", "chain_key", "chain_verdict", "judge_chains"]

#: What each stage's coupling capacitor becomes in the chain.
COUPLED = {0: "C_OUT", 1: "C_IN"}
COUPLE_ROLE = "C_COUPLE"


def chain_parts(d1, d2) -> dict[str, RolePick]:
    """The chain's role picks from a first-stage and a second-stage design: each role
    prefixed ``S1.``/``S2.``, the larger of S1's C_OUT and S2's C_IN as C_COUPLE."""
    parts: dict[str, RolePick] = {}
    couple = []
    for k, d in enumerate((d1, d2)):
        for role, pick in d.parts.items():
            if role == COUPLED[k]:
                couple.append(pick)
                continue
            name = f"S{k + 1}.{role}"
            parts[name] = replace(pick, role=name)
    c = max(couple, key=lambda p: p.value)
    parts[COUPLE_ROLE] = replace(c, role=COUPLE_ROLE, plus=None)
    return parts


def _rows(snapshot: StockSnapshot) -> dict:
    rows = {("resistor", r.id): r.qty for r in snapshot.resistors}
    rows.update({("capacitor", c.id): c.qty for c in snapshot.capacitors})
    return rows


def stock_use(parts: dict[str, RolePick], transistors, snapshot: StockSnapshot,
              builds: int) -> tuple[bool, int]:
    """(the stock supplies every piece of both stages for ``builds`` copies, the number
    of real resistor and transistor rows the builds would empty)."""
    rows = _rows(snapshot)
    use: Counter = Counter()
    for pick in parts.values():
        for p in pick.pieces:
            use[(p.kind, p.id)] += p.count
    emptied = 0
    for (kind, rid), n in use.items():
        if rid is None:
            continue
        qty = rows.get((kind, rid), 0)
        if n * builds > qty:
            return False, 0
        if kind == "resistor" and rid >= 0 and n * builds >= qty:
            emptied += 1
    for label, n in Counter(transistors).items():
        t = snapshot.transistor(label)
        if t is None or n * builds > t.qty:
            return False, 0
        if (t.id is None or t.id >= 0) and n * builds >= t.qty:
            emptied += 1
    return True, emptied


def largest_capacitors(parts: dict[str, RolePick], snapshot: StockSnapshot):
    """The same chain with every capacitor the largest value in stock (of those, the
    highest voltage rating)."""
    if not snapshot.capacitors:
        return parts
    big = max(snapshot.capacitors, key=lambda c: (c.value, c.voltage_v))
    piece = Piece(big.value, 1, big.id, big.location, "capacitor", big.tolerance,
                  big.voltage_v, big.dielectric)
    out = dict(parts)
    for role, pick in parts.items():
        if pick.pieces and pick.pieces[0].kind == "capacitor":
            out[role] = RolePick(role, big.value, _label(big.value), (piece,))
    return out


def _label(value: float) -> str:
    return format_value(value, "capacitor")


#: Chains evaluated with their THD at a time, in order of their score without it.
CHUNK = 48


def _batch(form, items, snapshot, labels):
    picks = [p for p, _ in items]
    values = {role: np.array([p[role].value if role in p else 0.0 for p in picks])
              for role in form.role_names}
    batch = PairBatch.from_values(form, **values)
    transistors = tuple(snapshot.transistor(x) for x in labels)
    return batch, transistors, piece_ratings(picks, form.role_names)


def _designs(request, form, ev, items, labels, terms):
    total = sum(terms.values())
    out = []
    for i, (parts, _) in enumerate(items):
        stages = []
        for k, st in enumerate(ev.stages):
            s = {key: float(st[key][i]) for key in ("ic_a", "vce_v", "vb_v", "ve_v", "vc_v",
                                                    "ic_drift_pct", "pd_q_w")}
            s["transistor"] = labels[k]
            stages.append(s)
        plus = ev.extra["plus"]
        parts_i = {r: (replace(p, plus=str(plus[r][i])) if r in plus and p.pieces
                       and (p.pieces[0].dielectric or "").lower() in POLARISED_DIELECTRICS
                       else p)
                   for r, p in parts.items()}
        out.append(ChainDesign(
            topology=form.topology if isinstance(form.topology, str) else tuple(form.topology),
            coupling=form.coupling, transistors=labels,
            parts=parts_i, metrics={k: float(v[i]) for k, v in ev.metrics.items()},
            stages=stages, meets_spec=bool(ev.meets[i]), score=float(total[i]),
            score_terms={k: float(v[i]) for k, v in terms.items()},
            violations=ev.violations(i), warnings=ev.warnings(i)))
    return out


def confirm_chains(request: Request, snapshot: StockSnapshot, candidates, stats: dict,
                   top: int, deadline: float | None = None):
    """The best ``top`` of candidate chains ``[(parts, (label1, label2))]`` by the pair
    engine, exactly ranked within the candidates.

    Each candidate is first evaluated at DC and midband; those meeting every target
    there are evaluated with their band edges (a band edge only adds targets), still
    without THD and swing: the score without the distortion term is a lower bound of
    the score (every term is ≥ 0).  Candidates meeting every target so far are then evaluated
    whole, CHUNK at a time in order of that bound, until ``top`` chains are known
    scoring at most the next bound.  A candidate the stock cannot supply for
    ``request.builds`` copies is dropped (``stats["stock_refused"]``).

    Returns (meeting, missing): :class:`ChainDesign` lists, meeting sorted by score,
    missing (without THD) by how much they miss.  When none meets, every missing
    chain is evaluated with its band edges; otherwise the ones missing at DC or midband
    are left out of ``missing`` (no chain that misses only f_low is among them).

    ``deadline`` (``time.perf_counter()`` seconds): no group of one transistor pair is
    screened, and no chunk evaluated, past it; ``stats["stopped_at_limit"]`` is then set
    and ``stats["chains_left_by_time"]`` counts the candidates left unjudged.
    """
    form = form_of(request.topology, request.coupling)
    groups: dict = defaultdict(list)
    refused = 0
    for parts, labels in candidates:
        ok, emptied = stock_use(parts, labels, snapshot, request.builds)
        if not ok:
            refused += 1
            continue
        groups[labels].append((parts, emptied))
    stats["stock_refused"] = stats.get("stock_refused", 0) + refused
    missing, queue, unedged = [], [], []

    def late() -> bool:
        return deadline is not None and time.perf_counter() > deadline

    unjudged = 0
    for labels, items in groups.items():
        if late():
            unjudged += len(items)
            continue
        # DC and midband first: a chain missing a target there misses it whatever its
        # band edges (they only add targets), so only the others get them now
        batch, transistors, ratings = _batch(form, items, snapshot, labels)
        pre = evaluate_pair(request, batch, transistors, ratings, band_edges=False,
                            large_signal=False)
        stats["chains_screened"] = stats.get("chains_screened", 0) + batch.n
        unedged += [(labels, items[i]) for i in np.flatnonzero(~pre.meets)]
        items = [items[i] for i in np.flatnonzero(pre.meets)]
        if not items:
            continue
        batch, transistors, ratings = _batch(form, items, snapshot, labels)
        ev = evaluate_pair(request, batch, transistors, ratings, large_signal=False)
        terms = chain_score_terms(ev, np.array([e for _, e in items], dtype=float))
        lb = sum(terms.values())
        designs = _designs(request, form, ev, items, labels, terms)
        for i, d in enumerate(designs):
            if d.meets_spec:
                queue.append((float(lb[i]), labels, items[i]))
            else:
                missing.append(d)
    queue.sort(key=lambda q: q[0])
    meeting: list[ChainDesign] = []
    pos = 0
    while pos < len(queue):
        if len(meeting) >= top and meeting[top - 1].score <= queue[pos][0]:
            break
        if late():
            unjudged += len(queue) - pos
            queue = queue[:pos]
            break
        chunk, pos = queue[pos:pos + CHUNK], pos + CHUNK
        by: dict = defaultdict(list)
        for _, labels, item in chunk:
            by[labels].append(item)
        for labels, items in by.items():
            batch, transistors, ratings = _batch(form, items, snapshot, labels)
            ev = evaluate_pair(request, batch, transistors, ratings, large_signal="thd")
            stats["chains_evaluated"] = stats.get("chains_evaluated", 0) + batch.n
            terms = chain_score_terms(ev, np.array([e for _, e in items], dtype=float))
            for d in _designs(request, form, ev, items, labels, terms):
                (meeting if d.meets_spec else missing).append(d)
        meeting.sort(key=lambda d: (d.score, sorted(d.values().items())))
    stats["chains_left_by_bound"] = (stats.get("chains_left_by_bound", 0)
                                     + max(0, len(queue) - pos))
    if unjudged:
        stats["stopped_at_limit"] = True
        stats["chains_left_by_time"] = stats.get("chains_left_by_time", 0) + unjudged
    if not meeting and not late():
        # the nearest misses are shown: the ones missing at DC or midband evaluated
        # whole too, so that every miss lists all its violations
        missing += _missed_whole(request, form, snapshot, unedged)
    return meeting, sorted(missing, key=lambda d: (len(d.violations), d.score))


def _missed_whole(request, form, snapshot, unedged):
    by: dict = defaultdict(list)
    for labels, item in unedged:
        by[labels].append(item)
    out = []
    for labels, items in by.items():
        batch, transistors, ratings = _batch(form, items, snapshot, labels)
        ev = evaluate_pair(request, batch, transistors, ratings, large_signal=False)
        terms = chain_score_terms(ev, np.array([e for _, e in items], dtype=float))
        out += _designs(request, form, ev, items, labels, terms)
    return out


def confirm_with_retry(request: Request, snapshot: StockSnapshot, candidates, stats: dict,
                       top: int, deadline: float | None = None):
    """:func:`confirm_chains`, then the chains missing only f_low once more with the
    largest capacitors in stock (``stats["largest_capacitor_retries"]``); ``deadline``
    as :func:`confirm_chains`'s."""
    meeting, missing = confirm_chains(request, snapshot, candidates, stats, top, deadline)
    retry = [d for d in missing if d.violations and all(v.startswith("f_low_hz")
                                                         for v in d.violations)]
    if retry:
        big = [(largest_capacitors(d.parts, snapshot), d.transistors) for d in retry]
        m2, _ = confirm_chains(request, snapshot, big, stats, top, deadline)
        meeting = sorted(meeting + m2, key=lambda d: d.score)
        stats["largest_capacitor_retries"] = (stats.get("largest_capacitor_retries", 0)
                                              + len(retry))
    return meeting, missing


def chain_key(d: ChainDesign) -> tuple:
    """What tells two chains apart: every role's value and both transistors."""
    return tuple(sorted(d.values().items())) + tuple(d.transistors)


def with_swing(request: Request, snapshot: StockSnapshot, designs: list[ChainDesign]):
    """The same chains evaluated whole, swing and its clipping warning included (the
    ranking's evaluation computes the THD only)."""
    form = form_of(request.topology, request.coupling)
    out = {}
    by: dict = defaultdict(list)
    for n, d in enumerate(designs):
        by[d.transistors].append((n, d))
    for labels, ds in by.items():
        items = [(d.parts, round(d.score_terms["stock"] / STOCK_PENALTY)) for _, d in ds]
        batch, transistors, ratings = _batch(form, items, snapshot, labels)
        ev = evaluate_pair(request, batch, transistors, ratings)
        terms = chain_score_terms(ev, np.array([e for _, e in items], dtype=float))
        for (n, old), d in zip(ds, _designs(request, form, ev, items, labels, terms),
                               strict=True):
            d.rank = old.rank
            out[n] = d
    return [out[n] for n in range(len(designs))]


def chain_verdict(request: Request, snapshot: StockSnapshot, design: ChainDesign) -> bool:
    """The pair engine's verdict on ``design`` as built (its pieces' ratings) against
    ``request``: every target and validity rule satisfied, THD and swing included."""
    form = form_of(request.topology, request.coupling)
    batch, transistors, ratings = _batch(form, [(design.parts, 0)], snapshot,
                                         tuple(design.transistors))
    return bool(evaluate_pair(request, batch, transistors, ratings).meets[0])


def judge_chains(request: Request, snapshot: StockSnapshot, designs) -> list[ChainDesign]:
    """The chains ``designs`` (found for other requests) evaluated whole against
    ``request`` with their pieces' ratings: those that miss it, each with its
    violations, sorted as :func:`confirm_chains` sorts its misses; repeats and chains
    the stock cannot supply for ``request.builds`` copies are dropped."""
    form = form_of(request.topology, request.coupling)
    by: dict = defaultdict(list)
    seen = set()
    for d in designs:
        k = chain_key(d)
        ok, emptied = stock_use(d.parts, d.transistors, snapshot, request.builds)
        if k in seen or not ok:
            continue
        seen.add(k)
        by[tuple(d.transistors)].append((d.parts, emptied))
    out = []
    for labels, items in by.items():
        batch, transistors, ratings = _batch(form, items, snapshot, labels)
        ev = evaluate_pair(request, batch, transistors, ratings, large_signal="thd")
        terms = chain_score_terms(ev, np.array([e for _, e in items], dtype=float))
        out += [d for d in _designs(request, form, ev, items, labels, terms) if not d.meets_spec]
    return sorted(out, key=lambda d: (len(d.violations), d.score))
