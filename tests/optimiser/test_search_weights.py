"""The search's bounds read the score's weights from optimiser/score.py.

With a weight changed (each change lowers its term, so a bound that kept the old
weight would overestimate the score and could discard the best design), the
search must still agree with the plain enumeration of tests/optimiser/
test_search_complete.py, which scores every buildable stage with the changed
score.
"""

import math
import os

import pytest
from hypothesis import HealthCheck, given, settings

import optimiser.score as score
from optimiser.search import search_designs
from optimiser.search.bounds import (
    current_term,
    distortion_term,
    drift_term,
    headroom_volts,
    stock_term,
)
from tests.optimiser.test_search_complete import cases, exhaustive

#: Each weight moved by a factor that lowers its term tenfold (the headroom: its
#: knee from a quarter of the supply to a fortieth).
CHANGES = {
    "DRIFT_UNIT_PCT": 10.0,
    "CURRENT_UNIT_A": 10.0,
    "THD_UNIT_PCT": 10.0,
    "STOCK_PENALTY": 0.1,
    "HEADROOM_FRACTION": 0.1,
    "FOLLOWER_TOL_DB": 10.0,
}
EXAMPLES = int(os.environ.get("DRAWERFIT_WEIGHT_EXAMPLES", "6"))


@pytest.mark.parametrize("name", sorted(CHANGES))
def test_the_bound_terms_follow_a_changed_weight(monkeypatch, name):
    before = (drift_term(5.0), current_term(2e-3), distortion_term(0.5), stock_term(2.0),
              headroom_volts(12.0))
    monkeypatch.setattr(score, name, getattr(score, name) * CHANGES[name])
    after = (drift_term(5.0), current_term(2e-3), distortion_term(0.5), stock_term(2.0),
             headroom_volts(12.0))
    changed = [a != b for a, b in zip(before, after, strict=True)]
    # exactly the term of that weight moves (the follower's tolerance is in none)
    assert sum(changed) == (0 if name == "FOLLOWER_TOL_DB" else 1)


@pytest.mark.parametrize("name", sorted(CHANGES))
def test_search_with_a_changed_weight_agrees_with_enumeration(name):
    factor = CHANGES[name]

    @settings(max_examples=EXAMPLES, deadline=None, suppress_health_check=list(HealthCheck),
              derandomize=True)
    @given(cases())
    def check(case):
        req, snap = case
        old = getattr(score, name)
        setattr(score, name, old * factor)
        try:
            designs, _ = search_designs(req, snap, 1, {"pruned": {}})
            best = exhaustive(req, snap)
        finally:
            setattr(score, name, old)
        assert (best is not None) == bool(designs), (req, snap, best, designs)
        if best is not None:
            assert math.isclose(designs[0].score, best, rel_tol=1e-9, abs_tol=1e-12)

    check()
