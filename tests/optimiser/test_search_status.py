"""The status a running search reports to its ``progress`` callback.

Checked against the finished search itself: a rank the status calls proven must
be the final ranking's (its best score is the final best), and the counts must
agree with each other.
"""

import io
import math

import pytest
from rich.console import Console

import drawerfit.cli  # noqa: F401  (the command modules load through the root group)
from drawerfit.commands.design import StatusLine
from optimiser.request import Request
from optimiser.search import SearchStatus, search
from tests.optimiser.test_search import drawer

REQUESTS = [
    Request(topology="ce", supply_v=12.0, load_ohm=1e4, source_ohm=600.0, gain=10.0,
            f_low_max_hz=50.0, ic_drift_max_pct=10.0),
    Request(topology="cb", supply_v=12.0, load_ohm=1e4, source_ohm=50.0, gain=20.0),
]


@pytest.mark.parametrize("split", [False, True], ids=["one process", "two processes"])
@pytest.mark.parametrize("req", REQUESTS, ids=["ce", "cb"])
def test_the_status_records_agree_with_the_finished_search(monkeypatch, req, split):
    import optimiser.search.workers as W

    if split:
        monkeypatch.setattr(W, "PARALLEL_ABOVE", 20)
        monkeypatch.setenv("DRAWERFIT_WORKERS", "2")
    seen: list[SearchStatus] = []
    res = search(req, drawer(), top=5, misses=0, progress=seen.append)
    # (in a split search the reporting process may take fewer than the five steps
    # between reports: the other one can do the work)
    assert res.designs and (seen or split)
    final_best = res.designs[0].score
    for s in seen:
        assert isinstance(s, SearchStatus)
        assert s.top == 5 and s.nodes_left >= 0
        assert 0 <= s.proven_ranks <= min(s.found, s.top)
        if s.best_score is not None:
            # the best only improves, and a proven best is the final one
            assert s.best_score >= final_best - 1e-12
            if s.proven_ranks:
                assert s.best_score <= s.open_bound
                assert math.isclose(s.best_score, final_best, rel_tol=0, abs_tol=1e-12)
        else:
            assert s.proven_ranks == 0
    # the best score reported never rises as the search goes on
    bests = [s.best_score for s in seen if s.best_score is not None]
    assert all(b >= a - 1e-15 for a, b in zip(bests[1:], bests, strict=False))


def test_the_status_line_text():
    s = SearchStatus(found=3, top=5, best_score=0.4321, proven_ranks=2, nodes_left=17,
                     open_bound=0.5)
    assert s.text() == ("best score 0.4321 · 2 of 5 ranks proven · 17 nodes left "
                        "(least bound 0.5)")
    none = SearchStatus(found=0, top=5, best_score=None, proven_ranks=0, nodes_left=4,
                        open_bound=math.inf)
    assert none.text().startswith("best score none yet · 0 of 5 ranks proven")


def test_the_status_line_appears_only_after_its_delay_and_goes_away():
    buf = io.StringIO()
    console = Console(file=buf, force_terminal=True, width=120)
    s = SearchStatus(found=1, top=3, best_score=1.25, proven_ranks=0, nodes_left=9,
                     open_bound=0.75)
    late = StatusLine(console, after_s=3600.0)
    late.update(s)
    late.stop()
    assert late.live is None and buf.getvalue() == ""
    now = StatusLine(console, after_s=0.0)
    now.update(s)
    assert now.live is not None
    now.live.refresh()
    now.stop()
    assert "best score 1.25" in buf.getvalue() and now.live is None
