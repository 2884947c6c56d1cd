"""Stock-constrained search for amplifier stages, with ranked alternatives.

The public entry is :func:`search`.  It is complete: every design it does not
examine is discarded by a bound that cannot remove a design the engine would
accept (each bound is documented in docs/search.md).  Steps:

1. **Validate** the request (:func:`check_request`; a request with no
   passband is an :class:`InputError`) and compare it with what the topology
   can do at all (:func:`physical_limits`): a target beyond that is answered
   as infeasible without searching.
2. **Bias networks** (per transistor type and form): every (R1, R2) pair
   against the sorted array of DC emitter resistances; the collector current
   follows in closed form (:mod:`optimiser.prune`) for the two extreme Early
   factors, which bracket the true current.  Bounds on the drift and the
   transistor limits discard whole blocks.
3. **Collector side**: for each bias network the RC values that keep V_CE
   above saturation (``searchsorted`` on the sorted RC values), then the exact
   DC point and a resistive midband gain estimate against the gain window.
4. **Skeleton pass** (engine, capacitors shorted): exact midband gain,
   drift, operating point; the score without distortion is a lower bound.
5. **Best-first confirmation**: skeletons in order of that bound; the engine
   evaluates each with capacitors (largest stock values first, then the
   smallest adequate), band edges, Z_in, Z_out and distortion; stock rows are
   allocated with the ratings of the very pieces.  Stop when ``top`` designs
   are known whose scores are below every remaining bound.

The modules of the package (docs/architecture.md): :mod:`.limits` (step 1),
:mod:`.job` with its levels :mod:`.pairs`, :mod:`.f_low_floors`,
:mod:`.emitter`, :mod:`.collector` (steps 2–3), :mod:`.skeletons` (step 4),
:mod:`.confirm` and :mod:`.stock` (step 5), :mod:`.tree` (the branch and bound),
:mod:`.seeding`, :mod:`.workers`, :mod:`.bounds`, :mod:`.suggestions` (nearest
misses and unlocks) and :mod:`.answer` (:func:`search`).

SI units throughout (ohm, farad, volt, ampere, hertz).
"""

from optimiser.search.answer import SearchResult, search
from optimiser.search.limits import check_request, gain_window, physical_limits
from optimiser.search.skeletons import FORMS, SHORT_F, Skeletons, cap_roles, skeleton_figures
from optimiser.search.tree import SearchStatus, search_designs

__all__ = ["SearchResult", "search", "search_designs", "check_request", "physical_limits",
           "SearchStatus", "FORMS", "SHORT_F", "gain_window", "Skeletons", "cap_roles", "skeleton_figures"]
