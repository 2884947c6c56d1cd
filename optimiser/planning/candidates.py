"""The designs offered to the programme per request: the search runs for the
copies one design must carry (:mod:`~optimiser.planning.copies`) and its best
designs from the drawer, from the drawer plus what may be bought, and per
transistor type are merged without duplicates."""

from __future__ import annotations

import math
import time
from collections import defaultdict
from collections.abc import Callable
from dataclasses import dataclass, replace

import optimiser.search as search_module
from inventory.errors import InputError
from inventory.parts import StockSnapshot
from optimiser.design import Design

__all__ = ["DEFAULT_CANDIDATES", "PlanItem", "CandidateSearches", "design_key", "gather_candidates"]

#: Designs each search offers per request and per source.  More gives the
#: programme more to choose from (a plan can only be as good as its candidates)
#: at the price of longer searches and a larger programme.
DEFAULT_CANDIDATES = 20
#: Per transistor type under-represented by the first two sources, the search
#: offers ``max(PER_TYPE_MIN, top // PER_TYPE_DIVISOR)`` designs with it: enough
#: that a scarce type never leaves the programme without alternatives, few
#: enough that these extra searches stay short.
PER_TYPE_MIN = 3
PER_TYPE_DIVISOR = 5
#: Nearest misses asked of the first search, and violations of the best one
#: quoted when a request has no design: enough to say what is wrong, short
#: enough for one line.
NEAREST_MISSES = 3
NOTE_VIOLATIONS = 3
#: Decimal digits of a value when telling two designs apart: far finer than any
#: series step, coarse enough to treat float noise as the same value.
DESIGN_KEY_DIGITS = 12
#: Time limit of each candidate search in seconds unless the caller gives one.
#: None: every search runs to its end, so the candidates are the best the drawer
#: allows by the search's ranking; a limit trades that for time (the plan is then
#: optimal over the candidates found).  The command line passes its own.
SEARCH_TIME_LIMIT_S: float | None = None


@dataclass(frozen=True)
class PlanItem:
    """One build of the list: ``count`` copies of a request, and its candidates."""

    name: str
    count: int
    identical: bool = True
    candidates: tuple[Design, ...] = ()
    note: str = ""            # why there are no candidates, when there are none
    #: Pieces must keep their tolerance (a wider one never stands in).  Needed when
    #: the request's yield depends on the tolerances; otherwise the nominal figures
    #: the design was chosen by do not change with the tolerance.
    strict_tolerance: bool = True


@dataclass(frozen=True)
class CandidateSearches:
    """How the candidates of one request were found: searches run, seconds, and how
    many of those searches stopped at their time limit (offering what they had)."""

    searches: int
    seconds: float
    stopped_at_time_limit: int

    def to_json(self) -> dict:
        return {"searches": self.searches, "seconds": self.seconds,
                "searches_stopped_at_time_limit": self.stopped_at_time_limit}


def design_key(d: Design) -> tuple:
    """What tells two designs apart: topology, transistor, values and the rows of their pieces."""
    return (d.topology, d.transistor,
            tuple(sorted((role, round(p.value, DESIGN_KEY_DIGITS), p.joined or "",
                          tuple((q.id, q.count, round(q.value, DESIGN_KEY_DIGITS)) for q in p.pieces))
                         for role, p in d.parts.items())))


def gather_candidates(request, snapshot: StockSnapshot, augmented: StockSnapshot, *,
                      top: int = DEFAULT_CANDIDATES, search_fn: Callable | None = None,
                      search_time_s: float | None = SEARCH_TIME_LIMIT_S, copies: int = 1
                      ) -> tuple[list[Design], str, CandidateSearches]:
    """Candidate designs for one request: enough, and varied enough, to give the programme choices.

    Three sources, merged and freed of duplicates:

    1. the best ``top`` designs over the drawer as it is;
    2. the best ``top`` over the drawer plus the purchasable values (when
       ``augmented`` differs from ``snapshot``);
    3. for a request open to any transistor, the best ``max(PER_TYPE_MIN, top // PER_TYPE_DIVISOR)`` with
       each transistor type the drawer holds that (1) and (2) left short of
       that many, so that a scarce type never leaves the programme without
       alternatives.

    The search runs for ``copies`` copies (``builds = copies``): the copies one
    design carries together (:func:`~optimiser.planning.copies.carried`: all of an
    identical build, else one), so every value holds enough for them and the
    capacitors are chosen for that many; quantities across builds are the
    programme's business.

    Returns
    -------
    (designs, note, searches)
        ``note`` says why there are none (the nearest misses' violations);
        ``searches`` how they were found (:class:`CandidateSearches`).
    """
    if search_fn is None:
        search_fn = search_module.search      # looked up per call, so it can be replaced

    one = replace(request, builds=max(int(copies), 1))
    found: list[Design] = []
    misses: list[Design] = []
    runs = 0
    incomplete: list[str] = []
    t0 = time.perf_counter()

    def run(req, snap, n, nmiss=0):
        nonlocal runs
        runs += 1
        kw = {"time_limit_s": search_time_s} if search_time_s else {}
        res = search_fn(req, snap, top=n, misses=nmiss, **kw)
        if not res.stats.get("complete", True) if hasattr(res, "stats") else False:
            incomplete.append(req.transistor)
        found.extend(d for d in res.designs if d.meets_spec)
        misses.extend(getattr(res, "nearest_misses", []) or [])
        return res

    run(one, snapshot, top, NEAREST_MISSES)
    if augmented is not snapshot:
        run(one, augmented, top)
    if request.transistor == "any":
        per = max(PER_TYPE_MIN, top // PER_TYPE_DIVISOR)
        have: dict[str, int] = defaultdict(int)
        for d in found:
            have[d.transistor] += 1
        for t in sorted({t.label for t in snapshot.transistors if t.qty > 0}):
            if have[t] >= per:
                continue
            try:
                run(replace(one, transistor=t), augmented, per)
            except InputError:
                continue               # e.g. a type that cannot serve this topology
    seen: set[tuple] = set()
    unique: list[Design] = []
    for d in sorted(found, key=lambda d: (d.score if d.score is not None else math.inf)):
        k = design_key(d)
        if k not in seen:
            seen.add(k)
            unique.append(d)
    note = ""
    if not unique:
        note = "no design meets the request from this drawer"
        if misses:
            best = misses[0]
            if best.violations:
                note += "; nearest miss: " + ", ".join(best.violations[:NOTE_VIOLATIONS])
    return unique, note, CandidateSearches(runs, time.perf_counter() - t0, len(incomplete))
