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
    first_gain_floor,
    floor,
    gain_floor_term,
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


def test_a_stage_that_peaks_alone_is_not_left_out():
    """The drawer on which the proof once said "proven" above a better chain (random
    drawer 5 of seed 11 of test_chain_search's random run): the enumeration's best
    chain has a first stage (RC 330 Ω, RE 680 Ω unbypassed, a gain of −6 dB) whose gain
    alone, into an open load, rises 4.9 dB above its mid_hz value inside the passband —
    the flat-passband validity failed it in the relaxed search, though its chain is
    flat.  The relaxed requests no longer judge that validity."""
    req = _request(("ce", "cc"), supply_v=12.0, load_ohm=1e3, source_ohm=50.0)
    snap = _drawer([330.0, 680.0, 220e3], [2, 3, 5])
    assert all(not r.flat_passband for r in proof_requests(req))
    res = search_chains(req, snap, top=3)
    best, _ = enumerate_chains(req, snap)
    assert res.search["proven"] is True
    assert res.designs[0].score == pytest.approx(best, rel=1e-9, abs=1e-9)


#: 10 V capacitors at a 9–12 V supply: drawers 8 and 11 of seed 5 of the random run of
#: test_chain_search with CAP rated 10 V, where the proof once said "proven" above the
#: enumeration's best (0.502 against 1.558; 3.411 against 4.479).
LOW_RATED = [
    (("ce", "cc"), [680.0, 10e3, 47e3], [4, 1, 4],
     dict(supply_v=12.0, load_ohm=1e3, source_ohm=1e3)),
    (("cb", "cc"), [3.3e3, 15e3, 47e3], [1, 2, 4],
     dict(supply_v=12.0, load_ohm=1e3, source_ohm=50.0, gain_db=20.0, gain_tol_db=3.0)),
]


@pytest.mark.parametrize("topo,values,qty,kw", LOW_RATED)
def test_a_coupling_capacitor_is_judged_in_the_chain_not_alone(topo, values, qty, kw):
    """A first stage's C_OUT sees V_C alone (into the open load) but V_C1 − V_B2 as the
    chain's C_COUPLE (and a follower's C_IN V_B2 alone): with capacitors rated 10 V
    the relaxed searches left out stages whose chains meet.  Those two roles' ratings
    are not judged there; the chain's C_COUPLE is, by the pair engine."""
    from dataclasses import replace

    cap = replace(CAP, voltage_v=10.0)
    res = tuple(Resistor(float(v), int(q), id=i, location=f"R{i}")
                for i, (v, q) in enumerate(zip(values, qty, strict=True)))
    req, snap = _request(topo, **kw), StockSnapshot(res, (cap,), (T,))
    assert [r.unrated_caps for r in proof_requests(req)] == [("C_OUT",), ("C_IN",)]
    found = search_chains(req, snap, top=3)
    best, _ = enumerate_chains(req, snap)
    assert found.search["proven"] is True and best is not None
    assert found.designs[0].score == pytest.approx(best, rel=1e-9, abs=1e-9)


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
    bound = outside_bound(*lists, req)
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
                assert d.score >= pair_floor(a, b, req) - 1e-9, (d.score, pair_floor(a, b, req))
                checked += 1
    assert checked >= 20


def _random_chains(seed: int, topo, n: int):
    """Up to ``n`` chains of a seeded tiny drawer (see :func:`_seeded`) with a gain
    target: random pairs of the first 40 stages of each relaxed request, composed and
    evaluated by the pair engine, with the first-stage design each was built from."""
    from optimiser.search.answer import search

    rng = np.random.default_rng(seed)
    req, snap = _seeded(seed, topo)
    if req.gain_db is None:
        return req, []
    firsts, followers = (search(r, snap, top=40, misses=0).designs for r in proof_requests(req))
    out = []
    for _ in range(n):
        if not firsts or not followers:
            break
        a = firsts[int(rng.integers(len(firsts)))]
        b = followers[int(rng.integers(len(followers)))]
        meeting, missing = confirm_chains(req, snap, [(chain_parts(a, b),
                                                       (a.transistor, b.transistor))], {}, 1)
        out += [(a, b, d) for d in meeting + missing]
    return req, out


def test_the_gain_floor_lies_below_every_chains_gain_term():
    """:func:`first_gain_floor` (assumption 3: a chain's gain is at most its first stage's
    open-load gain) against the pair engine on random chains of seeded tiny drawers with
    a gain target (ce→cc and cb→cc): the chain's gain term never lies below it, nor its
    score below :func:`pair_floor` with the gain floor; and the floor is not empty (it is
    positive on some of them)."""
    checked, positive = 0, 0
    for topo, seed in [(("ce", "cc"), s) for s in (3, 11, 19, 29, 31)] + \
            [(("cb", "cc"), s) for s in (5, 8, 13, 21, 34)]:
        req, chains = _random_chains(seed, topo, 60)
        for a, b, d in chains:
            g = first_gain_floor(a, req)
            assert d.score_terms["gain"] >= g - 1e-9, (seed, d.metrics["gain_db"],
                                                       a.metrics["gain_db"])
            assert d.score >= pair_floor(a, b, req) - 1e-9
            checked += 1
            positive += g > 0
    assert checked >= 100 and positive >= 5, (checked, positive)


def test_gain_floor_term_follows_the_score_gain_term():
    """:func:`gain_floor_term` is the score's gain term (optimiser.score.gain_term) of a
    gain at the first stage's own, below the target; 0 above it or without a target."""
    from optimiser.score import gain_term

    g = np.array([30.0, 37.0, 40.0, 45.0])
    got = gain_floor_term(g, 40.0, 3.0)
    want = np.where(g < 40.0, gain_term(g, 40.0, 3.0), 0.0)
    assert np.allclose(got, want) and got[0] > 3.0 and got[3] == 0.0
    assert np.all(gain_floor_term(g, None, 3.0) == 0.0)
    # a first stage whose gain is not known (NaN) bounds nothing
    from types import SimpleNamespace

    req, _ = _seeded(3, ("ce", "cc"))
    unknown = SimpleNamespace(metrics={"gain_db": float("nan"), "gain_inf_db": None})
    known = SimpleNamespace(metrics={"gain_db": -100.0, "gain_inf_db": -120.0})
    assert first_gain_floor(unknown, req) == 0.0
    assert first_gain_floor(known, req) == (0.0 if req.gain_db is None else
                                            (req.gain_db + 100.0) / req.gain_tol_db)


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
