"""The objective's scale: a design's score mapped onto [0, 1) by one fixed
monotone map (so a column's cost is a function of its own search score, whatever
other columns there are), the smallest step of a purchase cost, and the weight
that keeps the score term below half that step."""

from __future__ import annotations

import math
from fractions import Fraction

from optimiser.purchase import Catalogue

__all__ = ["WORST_SCORE", "SCORE_SHARE", "cost_quantum", "score_map",
           "score_map_inverse", "score_weight"]

#: The largest mapped score (a design without a finite score maps to it).  Below 1, so
#: that one copy's score term stays below the score weight.
WORST_SCORE = 0.999
#: The whole score term is kept below ``cost step / SCORE_SHARE``.  From 1 up,
#: no gain in score can pay for a dearer order (cost first, score second); 2
#: keeps a margin of half a step against the solver's tolerances.  A larger value
#: shrinks the score term towards those tolerances, where plans of equal cost
#: would no longer be told apart by score.
SCORE_SHARE = 2.0
#: Prices are taken as exact decimals with denominators up to this (a millionth
#: of the currency unit): finer than any price, coarse enough for a usable step.
PRICE_DENOMINATOR_LIMIT = 10**6
#: The cost step when nothing may be bought: then only the score is minimised
#: and its scale does not matter.
UNIT_COST_STEP = 1.0


def cost_quantum(catalogue: Catalogue | None) -> float:
    """Greatest common divisor of the pack prices and the line cost (> 0)."""
    if catalogue is None or not catalogue.items:
        return UNIT_COST_STEP
    steps = [Fraction(str(p.pack_price)).limit_denominator(PRICE_DENOMINATOR_LIMIT)
             for p in catalogue.items.values()]
    if catalogue.options is not None:
        steps.append(Fraction(str(catalogue.options.line_cost)).limit_denominator(PRICE_DENOMINATOR_LIMIT))
    steps = [s for s in steps if s > 0]
    if not steps:
        return UNIT_COST_STEP
    den = math.lcm(*(s.denominator for s in steps))
    g = math.gcd(*(int(s * den) for s in steps))
    return float(Fraction(g, den))


def score_map(score: float | None) -> float:
    """A design's score (≥ 0, lower is better) mapped onto [0, WORST_SCORE]:
    ``s / (1 + s)``, monotone increasing, so that every column's cost is a
    function of its own score alone (column generation can then price a design
    the search has not yet offered).  None or a non-finite score counts as worst."""
    if score is None or not math.isfinite(float(score)):
        return WORST_SCORE
    s = max(float(score), 0.0)
    return min(s / (1.0 + s), WORST_SCORE)


def score_map_inverse(mapped: float) -> float:
    """The least score whose :func:`score_map` reaches ``mapped`` (inf from
    WORST_SCORE up, 0 at or below 0): a design scoring below it maps below ``mapped``."""
    if mapped >= WORST_SCORE:
        return math.inf
    if mapped <= 0.0:
        return 0.0
    return mapped / (1.0 - mapped)


def score_weight(quantum: float, total_copies: int) -> float:
    """Weight of the summed normalised scores in the objective: ``quantum`` (the
    cost step) over ``SCORE_SHARE`` times the total copies, so that the whole
    score term stays below ``quantum / SCORE_SHARE``."""
    return quantum / (SCORE_SHARE * total_copies)
