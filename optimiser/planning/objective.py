"""The objective's scale: scores normalised per build, the smallest step of a
purchase cost, and the weight that keeps the score term below half that step."""

from __future__ import annotations

import math
from collections.abc import Sequence
from fractions import Fraction

from optimiser.design import Design
from optimiser.purchase import Catalogue

__all__ = ["WORST_SCORE", "SCORE_SHARE", "cost_quantum", "normalised_scores", "score_weight"]

#: Normalised score of a build's worst candidate (its best is 0).  Below 1, so
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


def normalised_scores(designs: Sequence[Design]) -> list[float]:
    """Scores mapped onto [0, 1): 0 the best (lowest) of the build; None counts as worst."""
    raw = [d.score for d in designs]
    finite = [float(s) for s in raw if s is not None and math.isfinite(float(s))]
    if not finite:
        return [0.0] * len(raw)
    lo, hi = min(finite), max(finite)
    span = hi - lo
    out = []
    for s in raw:
        if s is None or not math.isfinite(float(s)):
            out.append(WORST_SCORE)
        elif span <= 0:
            out.append(0.0)
        else:
            out.append(WORST_SCORE * (float(s) - lo) / span)
    return out


def score_weight(quantum: float, total_copies: int) -> float:
    """Weight of the summed normalised scores in the objective: ``quantum`` (the
    cost step) over ``SCORE_SHARE`` times the total copies, so that the whole
    score term stays below ``quantum / SCORE_SHARE``."""
    return quantum / (SCORE_SHARE * total_copies)
