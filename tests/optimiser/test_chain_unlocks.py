"""What would unlock a chain or cascode request nothing meets (docs/answers.md, "Chains
and the cascode"): each change, applied to the request, is met by the chain it names,
by the pair engine's own verdict (optimiser/pair_evaluate.py) on that chain as built."""

from __future__ import annotations

from dataclasses import replace

import pytest

from optimiser.pair_evaluate import evaluate_pair
from optimiser.request import parse_request
from optimiser.search import search
from optimiser.search.chain_confirm import _batch
from optimiser.search.chains import search_chains
from optimiser.stages import form_of
from tests.demo_drawer import demo_snapshot

#: ce→cc, 50 dB into 1k from 10k, f_low ≤ 2 Hz, every transistor at ≥ 4 mA, 12 V.
IMPOSSIBLE = {"topology": ["ce", "cc"], "supply_v": 12, "load_ohm": "1k",
              "source_ohm": "10k", "gain_db": 50, "gain_tol_db": 1, "f_low_max_hz": 2,
              "ic_min_a": "4m"}


#: The suggestions' clocks are wall time: on a loaded test machine (two workers and
#: other jobs) their default budgets can run out before the gain's relaxed search ends
#: (four times the defaults still did once), and these checks are of what the
#: suggestions say, not of how fast: twenty times more.  A run that finishes takes
#: only what its searches need (about 30 s here on a quiet machine).
SLACK = 20.0


def generous_budgets(mp: pytest.MonkeyPatch) -> None:
    """The chain suggestions' time budgets times :data:`SLACK` (their one home is
    optimiser.search.chain_unlocks; optimiser.search.chains reads the total by name)."""
    import optimiser.search.chain_unlocks as cu
    import optimiser.search.chains as ch

    # (the search over the drawer plus one bought value keeps its own budget: it runs
    # to its limit, and none of these checks reads it)
    for mod, name in ((ch, "CHAIN_EXPLAIN_BUDGET_S"), (cu, "CHAIN_RELAX_S")):
        mp.setattr(mod, name, SLACK * getattr(mod, name))


@pytest.fixture(scope="module")
def demo():
    return demo_snapshot()


@pytest.fixture(scope="module")
def answered(demo):
    req = parse_request(IMPOSSIBLE, pairs=True)
    with pytest.MonkeyPatch.context() as mp:
        generous_budgets(mp)
        return req, search_chains(req, demo, top=3, time_limit_s=900)


def _met_by_the_named_chain(req, d, demo) -> bool:
    """The pair engine's verdict on chain ``d`` as built against ``req``."""
    form = form_of(req.topology, req.coupling)
    batch, transistors, ratings = _batch(form, [(d.parts, 0)], demo, tuple(d.transistors))
    return bool(evaluate_pair(req, batch, transistors, ratings).meets[0])


def _applied(req, change):
    if change["target"] == "gain_db":
        return [replace(req, gain=10 ** (change["to"] / 20)),
                replace(req, gain_tol_db=change["gain_tol_db_to"])]
    return [replace(req, **{change["target"]: change["to"]})]


def test_the_request_is_truly_impossible(answered, demo):
    req, res = answered
    assert res.designs == []
    # the chain's proof listed every first stage its relaxed request allows, and none
    # exists: a ce stage from this drawer with I_C ≥ 4 mA reaches at most 49 dB into
    # an open load (the follower's gain is below 1, so the first stage needs ≥ 49 dB)
    assert res.search["proven"] is True
    # the engine itself, again and apart: the exact single-stage search, to its end, of
    # a ce stage from 10k into an open load, 49–109 dB (past the 53.4 dB bound), I_C ≥ 4 mA,
    # no other target
    stage = parse_request({"topology": "ce", "supply_v": 12, "source_ohm": "10k",
                           "gain_db": 79, "gain_tol_db": 30, "ic_min_a": "4m",
                           "thd_max_pct": "none"})
    alone = search(stage, demo, top=1, misses=0)
    assert alone.stats["complete"] and not alone.designs


def test_unlocks_are_given_and_each_is_met_by_a_chain_from_stock(answered, demo):
    req, res = answered
    assert res.unlock_changes, res.unlock
    assert len(res.unlock) >= len(res.unlock_changes)
    for change in res.unlock_changes:
        assert {"target", "from", "to", "unit", "proof", "design"} <= set(change)
        named = change["design"]
        # the named chain is from the drawer (its pieces are stock rows) ...
        assert all(p.id is not None and p.id >= 0 for r in named.parts.values()
                   for p in r.pieces)
        # ... meets the request with the change applied, by the engine's verdict ...
        for relaxed in _applied(req, change):
            assert _met_by_the_named_chain(relaxed, named, demo), change
        # ... and misses the request as written
        assert not _met_by_the_named_chain(req, named, demo)
    gain = [c for c in res.unlock_changes if c["target"] == "gain_db"]
    assert gain and gain[0]["to"] < 49.0
    # the gain windows the chain proof showed empty are said so, and they are empty:
    # a search of the widest such window finds no chain
    within = gain[0]["none_within_db"]
    if within:
        assert within < abs(gain[0]["to"] - 50.0)
        empty = search_chains(replace(req, gain_tol_db=within), demo, top=1,
                              time_limit_s=10, unlocks=False)
        assert empty.designs == []


def test_the_nearest_misses_are_chains_that_miss(answered):
    _, res = answered
    assert res.nearest_misses
    for d in res.nearest_misses:
        assert not d.meets_spec and d.violations


def test_beyond_reach_only_the_limited_target_is_relaxed(demo, monkeypatch):
    generous_budgets(monkeypatch)
    # a ce stage's gain is below V_supply/V_T (53.4 dB from 12 V, see
    # tests/optimiser/test_chain_search.py), a follower's below 1: 60 dB is beyond reach,
    # and only the gain is relaxed, from past the bound
    # (the least I_C at its default: with 4 mA, f_low ≤ 2 Hz holds at no gain)
    req = parse_request({k: v for k, v in IMPOSSIBLE.items() if k != "ic_min_a"}
                        | {"gain_db": 60}, pairs=True)
    res = search_chains(req, demo, top=3, time_limit_s=900)
    assert res.search["proven_infeasible"] and res.limits
    assert [c["target"] for c in res.unlock_changes] == ["gain_db"], res.unlock
    reach = res.limits[0]["reachable"]
    for c in res.unlock_changes:
        assert c["to"] <= reach and c["none_within_db"] >= 60 - reach - 1e-9
        for relaxed in _applied(req, c):
            assert _met_by_the_named_chain(relaxed, c["design"], demo)
