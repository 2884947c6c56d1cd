"""Planning several builds against one drawer.

* :mod:`~optimiser.planning.candidates` — the designs offered per request;
* :mod:`~optimiser.planning.chain_columns` — a chain request's designs as columns;
* :mod:`~optimiser.planning.copies` — the copies one design carries, and what fits them;
* :mod:`~optimiser.planning.rows` — stock rows, stand-ins, pieces per copy;
* :mod:`~optimiser.planning.objective` — normalised scores and the cost step;
* :mod:`~optimiser.planning.model` — the mixed-integer programme: built, solved, read;
* :mod:`~optimiser.planning.assemble` — a solution turned into a plan;
* :mod:`~optimiser.planning.diagnosis` — why a plan cannot be met;
* :mod:`~optimiser.planning.colgen`, :mod:`~optimiser.planning.master` — column
  generation and its relaxation; :mod:`~optimiser.planning.closing` — the gap
  between plan and bound closed by enumeration;
* :mod:`~optimiser.planning.results` — the plan's records and their JSON;
* :mod:`~optimiser.planning.planner` — the entry points, :func:`make_plan` and
  :func:`plan_builds`.
"""

from optimiser.planning.assemble import assemble, prefer_stock
from optimiser.planning.candidates import (
    DEFAULT_CANDIDATES,
    CandidateSearches,
    PlanItem,
    gather_candidates,
)
from optimiser.planning.diagnosis import diagnose
from optimiser.planning.model import (
    SOLVERS,
    PlanModel,
    Solution,
    available_solvers,
    build_model,
    read_solution,
    solve_model,
)
from optimiser.planning.planner import make_plan, plan_builds
from optimiser.planning.results import (
    Allocation,
    BuildPlan,
    Plan,
    Purchase,
    Shortfall,
    SolverReport,
    commit_entries,
)
from optimiser.planning.rows import Row, can_stand_in, design_demand, stock_rows

__all__ = [
    "SOLVERS",
    "DEFAULT_CANDIDATES",
    "PlanItem",
    "CandidateSearches",
    "Row",
    "PlanModel",
    "SolverReport",
    "Solution",
    "Allocation",
    "BuildPlan",
    "Purchase",
    "Shortfall",
    "Plan",
    "available_solvers",
    "stock_rows",
    "can_stand_in",
    "design_demand",
    "build_model",
    "solve_model",
    "read_solution",
    "assemble",
    "diagnose",
    "plan_builds",
    "prefer_stock",
    "gather_candidates",
    "make_plan",
    "commit_entries",
]
