"""The chain search's proof (docs/search.md, "Chains", "What is proven"): whenever it says
proven, its best chain is the best of a plain enumeration of every chain
(tests/optimiser/chain_enumeration.py) on tiny seeded drawers, ce→cc and cb→cc; without
a budget the proof always ends (it widens until every stage is listed); with none left
it says so.

The enumeration is the reference: every assignment of the drawer's values to every role
of both stages, evaluated by the two-transistor engine (itself checked against ngspice
in tests/reference/test_ngspice_pairs.py).  The proof rests on the assumptions numbered
in docs/search.md; these comparisons are where they could fail.
"""

from __future__ import annotations

import io
import json

import numpy as np
import pytest
from rich.console import Console

from drawerfit.render.chains import show_chain_result
from inventory.parts import Resistor, StockSnapshot
from optimiser.search.chain_confirm import chain_parts, confirm_chains
from optimiser.search.chain_proof import (
    floor,
    outside_bound,
    pair_floor,
    proof_requests,
    slack,
    stage_list,
)
from optimiser.search.chains import search_chains

from .chain_enumeration import enumerate_chains
from .test_chain_search import CAP, CASES, R_VALUES, T, _drawer, _request


def _seeded(seed: int, topo):
    """A tiny drawer (three resistor values of R_VALUES, 1–5 pieces each, one capacitor
    value, one transistor type) and a chain request, drawn from ``seed``."""
    rng = np.random.default_rng(seed)
    vals = sorted(rng.choice(R_VALUES, 3, replace=False))
    res = tuple(Resistor(float(v), int(rng.integers(1, 6)), id=i, location=f"R{i}")
                for i, v in enumerate(vals))
    kw = dict(supply_v=float(rng.choice([9, 12])), load_ohm=float(rng.choice([1e3, 4.7e3])),
              source_ohm=float(rng.choice([50, 1e3])))
    g = rng.choice([None, 10, 20, 30])
    if g is not None:
        kw.update(gain_db=float(g), gain_tol_db=3.0)
    return _request(topo, **kw), StockSnapshot(res, (CAP,), (T,))


SEEDS = [(("ce", "cc"), s) for s in (3, 11, 19)] + [(("cb", "cc"), s) for s in (5, 8, 13, 21)]


@pytest.mark.parametrize("topo,seed", SEEDS)
def test_proven_best_is_the_enumerations_best(topo, seed):
    req, snap = _seeded(seed, topo)
    res = search_chains(req, snap, top=3)            # no time limit: the proof ends
    assert res.search["proven"] is True
    assert res.search["proof"]["stopped"] in ("bound", "exhausted")
    best, meeting = enumerate_chains(req, snap)
    if best is None:
        assert res.designs == [] and meeting == 0
        assert res.search["complete"] is True
        assert "Proven that no chain meets" in _shown(res)
    else:
        assert res.designs, (best, meeting)
        assert res.designs[0].score == pytest.approx(best, rel=1e-9, abs=1e-9)
        assert res.search["proven_ranks"] >= 1


@pytest.mark.parametrize("topo,values,qty,kw", CASES)
def test_fixed_cases_are_proven_and_said_so(topo, values, qty, kw):
    req, snap = _request(topo, **kw), _drawer(values, qty)
    res = search_chains(req, snap, top=3)
    best, _ = enumerate_chains(req, snap)
    assert res.search["proven"] and res.designs[0].score == pytest.approx(best, rel=1e-9)
    out = res.to_json()
    assert out["proven"] is True and json.loads(json.dumps(out))["search"]["proof"]["rounds"]
    text = _shown(res)
    assert "Proven best" in text and "Not proven" not in text


def test_no_budget_left_is_not_proven_and_said_so():
    topo, values, qty, kw = CASES[0]
    res = search_chains(_request(topo, **kw), _drawer(values, qty), top=3, time_limit_s=0.0)
    assert res.designs and res.search["proven"] is False and res.search["complete"] is False
    assert res.to_json()["proven"] is False
    assert res.search["proof"]["stopped"] == "time" and res.search["proof"]["rounds"] == []
    text = _shown(res)
    assert "Not proven best" in text and "Proven best" not in text


def test_the_bound_lies_below_every_chain_outside_the_lists():
    """Assumptions 1–2 and 6 on one drawer: of the enumeration's chains, the best one
    whose stages are not both among the first k of the relaxed stage searches scores
    at least the bound those k give."""
    from optimiser.search.answer import search

    topo, values, qty, kw = CASES[1]
    req, snap = _request(topo, **kw), _drawer(values, qty)
    lists, keys = [], []
    for r in proof_requests(req):
        found = search(r, snap, top=4, misses=0)
        lists.append(stage_list(found.designs, 4, found.stats.get("complete", True),
                                found.stats.get("open_bound"), r))
        keys.append({tuple(sorted(d.values().items())) for d in found.designs})
        # the floor lies below the stage's own score by at most its slack
        for d in found.designs:
            assert d.score - slack(r) <= floor(d) <= d.score + 1e-12
    bound = outside_bound(*lists)
    outside_best = _best_outside(req, snap, keys)
    assert outside_best is None or outside_best >= bound - 1e-9


@pytest.mark.parametrize("case", [0, 1])
def test_a_chain_scores_at_least_its_stages_floors(case):
    """Assumptions 1–2: every chain of two listed stages, evaluated by the pair engine,
    scores at least max(f(a) + I(b), f(b) + I(a)) of its stages' own terms."""
    from optimiser.search.answer import search

    topo, values, qty, kw = CASES[case]
    req, snap = _request(topo, **kw), _drawer(values, qty)
    firsts, followers = (search(r, snap, top=6, misses=0).designs for r in proof_requests(req))
    checked = 0
    for a in firsts:
        for b in followers:
            stats: dict = {}
            meeting, missing = confirm_chains(req, snap, [(chain_parts(a, b),
                                                           (a.transistor, b.transistor))],
                                              stats, 1)
            for d in meeting + missing:
                assert d.score >= pair_floor(a, b) - 1e-9, (d.score, pair_floor(a, b))
                checked += 1
    assert checked >= 20


def _best_outside(req, snap, keys):
    # every chain with its first or its second stage not listed
    score, _ = enumerate_chains(req, snap, keep=lambda r: not (_stage(r, "S1.") in keys[0]
                                                               and _stage(r, "S2.") in keys[1]))
    return score


def _stage(row, prefix):
    couple = {"S1.": "C_OUT", "S2.": "C_IN"}[prefix]
    vals = {k[len(prefix):]: v for k, v in row.items() if k.startswith(prefix) and v}
    vals[couple] = row["C_COUPLE"]
    return tuple(sorted(vals.items()))


def _shown(res) -> str:
    console = Console(width=80, record=True, file=io.StringIO())
    show_chain_result(console, res)
    return " ".join(console.export_text().split())
