"""The bound behind a proven chain ranking (docs/search.md, "Chains", "What is proven").

A chain's score (:mod:`.chain_score`) holds, for each of its stages, that stage's supply
current, and at least that stage's drift, headroom and stock terms (assumptions 1–2 of
docs/search.md).  Call those four terms of a stage design its *floor* f; then a chain
of stages a and b scores at least max(f(a) + I(b), f(b) + I(a)), I a stage's current
term.  The single-stage search ranks the stages of a relaxed request (:func:`proof_requests`:
only what each stage of a meeting chain must meet alone, assumption 3) by their own
score s, which is f plus a gain term of at most :func:`slack` and a distortion term
made negligible; a stage outside the search's best k has s no lower than the k-th
(or than the search's open bound when it stopped early), so f ≥ s_k − slack.  The
chain's gain term, in no floor, is bounded below by its first stage's open-load gain
(:func:`gain_floor_term`: the chain's gain is at most that); its distortion term is
not bounded (the two stages' distortion partly cancels; docs/search.md).

Pure functions of designs and requests; no I/O.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from optimiser.request import Request
from optimiser.score import THD_UNIT_PCT, gain_term, hd2_pct, score_gain_target
from optimiser.search.chain_confirm import COUPLED
from optimiser.search.chain_followers import stage_request

__all__ = ["WINDOW_DB", "PROOF_INPUT_VPK", "FOLLOWER_CEILING_DB", "proof_requests", "slack",
           "floor", "current", "gain_floor_term", "first_gain_floor", "StageList",
           "stage_list", "pair_floor", "outside_bound", "proven_ranks"]

#: Width (dB) of the one-sided gain windows of the relaxed stage requests: wide enough
#: that their gain term (|G − middle|/half-width, at most 1 inside the window) barely
#: reorders the stages (by at most the stage's distance in gain from the window's edge
#: over half of this: a follower's 30 dB of source loss costs 0.015 here, where 400 dB
#: cost 0.15 and held every floor bound near 0), narrow enough that the middle stays a
#: finite float in V/V and its square in power (10^(middle/10), the junction floor's
#: divider) below 1e308: middle < 3000 dB.
WINDOW_DB = 4000.0
#: The input level (V peak) of the relaxed stage requests: their distortion term
#: (HD2 ∝ input level) is then below 1e-6 and bounded by :func:`slack`.
PROOF_INPUT_VPK = 1e-9
#: A follower's gain (dB) lies below this in any source and load (a follower's gain is
#: below 1; the margin lets the engine's figure at mid_hz round above 0 dB).
FOLLOWER_CEILING_DB = 1.0


def _window(lo_db: float, hi_db: float) -> dict:
    mid = (lo_db + hi_db) / 2.0
    return dict(gain=10.0 ** (mid / 20.0), gain_tol_db=(hi_db - lo_db) / 2.0)


def proof_requests(chain: Request) -> tuple[Request, Request]:
    """The relaxed single-stage requests of the first and the second stage.

    Both keep what a stage of a meeting chain meets alone (supply, temperatures, drift
    ceiling, least I_C, builds, transistor, combinations: DC figures, the same in the
    chain, where capacitors decouple the stages) and drop the rest (band edges and the
    flat passband, Z_in, THD, Z_out), at an input of :data:`PROOF_INPUT_VPK`.  The first stage, into an open
    load (its largest gain), is held to gain ≥ target − tol when the chain has a gain
    target (the follower's gain is below 1); the follower, into the chain's load, to a
    gain in [−WINDOW_DB, FOLLOWER_CEILING_DB] dB, a window that lets every follower
    through and replaces its own unity-gain score term by one of at most 1."""
    kind1, kind2 = chain.topology
    common = dict(thd_max_pct=None, f_low_max_hz=None, f_high_min_hz=None, zin_min_ohm=None,
                  input_vpk=PROOF_INPUT_VPK, flat_passband=False)
    first = dict(common, load_ohm=None, gain=None)
    if chain.gain is not None:
        lo = chain.gain_db - chain.gain_tol_db
        first.update(_window(lo, lo + WINDOW_DB))
    second = dict(common, **_window(-WINDOW_DB, FOLLOWER_CEILING_DB))
    # the first stage's C_OUT and the follower's C_IN become the chain's C_COUPLE, which
    # sees V_C1 − V_B2 there, not what either sees alone: their ratings are not judged
    first["unrated_caps"], second["unrated_caps"] = (COUPLED[0],), (COUPLED[1],)
    return stage_request(chain, kind1, **first), stage_request(chain, kind2, **second)


def slack(req: Request) -> float:
    """The most a relaxed request's gain and distortion terms add to a stage's floor:
    1 with a gain window (|G − middle| ≤ half-width inside it), plus the distortion term
    at the largest drive |v_be/v_emf| = 1 (assumption 4 of docs/search.md)."""
    if req.gain is not None:
        gain = 1.0
    elif score_gain_target(req)[0] is not None:
        return math.inf                  # the topology's own gain term: no bound
    else:
        gain = 0.0
    return gain + float(hd2_pct(req.input_vpk, 1.0)) / THD_UNIT_PCT


def _terms(design) -> dict:
    return design.extra["score_terms"]


def floor(design) -> float:
    """A stage design's current, drift, stock and headroom terms (its floor)."""
    t = _terms(design)
    return float(t["current"] + t["drift"] + t["stock"] + t["headroom"])


def current(design) -> float:
    """A stage design's supply-current term."""
    return float(_terms(design)["current"])


def gain_floor_term(first_gain_db, target_db, tol_db):
    """The least gain term of a chain whose first stage, alone from the chain's source
    into an open load, has a gain of at most ``first_gain_db`` (dB; arrays broadcast):
    max(0, target − first_gain_db) over the tolerance, as :func:`optimiser.score.
    gain_term` weighs it; 0 without a target.

    The claim (assumption 3 of docs/search.md): the chain's gain at mid_hz is at most
    the first stage's open-load gain — the follower's input loads the first stage (a
    load only lowers its gain), the follower's gain is below 0 dB and the coupling
    capacitor only loses — so |G − target| ≥ target − G ≥ target − first_gain_db.
    Checked on the pair engine (tests/optimiser/test_chain_proof.py)."""
    g = np.asarray(first_gain_db, dtype=float)
    if target_db is None:
        return np.zeros_like(g)
    return gain_term(np.minimum(g, float(target_db)), float(target_db), float(tol_db))


def first_gain_floor(design, chain: Request) -> float:
    """:func:`gain_floor_term` of a first-stage design of a relaxed request (open load,
    the chain's source): its gain the larger of its mid_hz and shorted-capacitor
    figures, so that either one the chain's gain is taken at lies below it."""
    m = design.metrics
    gains = [float(x) for x in (m.get("gain_db"), m.get("gain_inf_db")) if x is not None]
    if not gains or not all(math.isfinite(x) for x in gains):
        return 0.0                      # a figure not known: no floor
    return float(gain_floor_term(max(gains), chain.gain_db, chain.gain_tol_db))


@dataclass
class StageList:
    """The best ``k`` stages of a relaxed request and what they prove of the rest.

    ``exhausted``: the search was complete and returned fewer than ``k`` (every stage
    meeting the relaxed request is listed).  ``next_floor``: the least floor of a stage
    not listed (inf when exhausted).  ``least_current``: the least current term of the
    listed stages (inf when none is listed)."""

    designs: list
    k: int
    complete: bool
    exhausted: bool
    next_floor: float
    least_current: float


def stage_list(designs, k: int, complete: bool, open_bound: float, req: Request) -> StageList:
    """What the single-stage search's ``top=k`` answer (``designs``, ranked; ``complete``
    and ``open_bound`` from its stats) proves about the stages it did not list."""
    exhausted = complete and len(designs) < k
    least = min((current(d) for d in designs), default=math.inf)
    if exhausted:
        nxt = math.inf
    else:
        kth = designs[-1].score if len(designs) >= k else math.inf
        if complete:
            ob = math.inf
        else:                           # stopped early: nothing known without its bound
            ob = -math.inf if open_bound is None else float(open_bound)
        nxt = min(kth, ob) - slack(req)
    return StageList(list(designs), k, complete, exhausted, nxt, least)


def pair_floor(a, b, chain: Request | None = None) -> float:
    """The least score a chain of stage designs ``a`` (first) and ``b`` can have: the
    larger of f(a) + I(b) and f(b) + I(a) (assumptions 1–2), plus, given the ``chain``
    request, the first stage's :func:`first_gain_floor` (the gain term, in neither
    floor)."""
    g = 0.0 if chain is None else first_gain_floor(a, chain)
    return max(floor(a) + current(b), floor(b) + current(a)) + g


def outside_bound(first: StageList, second: StageList, chain: Request | None = None) -> float:
    """The least score of a chain with a stage outside either list (≥ 0: every term of a
    chain's score is), by :func:`pair_floor` with a stage outside its list having a
    floor of at least its list's next floor and a current term ≥ 0: its first stage
    outside and its follower b listed, max(f₁ + I(b), f(b)); its follower outside and
    its first stage a listed, max(f(a), f₂ + I(a)) + a's gain floor (given ``chain``);
    or both outside, the larger of the two next floors."""
    cases = [max(first.next_floor, second.next_floor)]
    cases += [max(first.next_floor + current(b), floor(b)) for b in second.designs]
    cases += [max(floor(a), second.next_floor + current(a))
              + (0.0 if chain is None else first_gain_floor(a, chain)) for a in first.designs]
    return max(0.0, min(cases))


def proven_ranks(scores, bound: float) -> int:
    """How many leading ranks (of ``scores``, ascending) no chain outside the lists can
    take or tie: those scoring below ``bound``."""
    n = 0
    for s in scores:
        if s < bound:
            n += 1
        else:
            break
    return n
