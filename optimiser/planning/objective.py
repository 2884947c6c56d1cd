"""The objective's scale: scores normalised per build, the smallest step of a
purchase cost, and the weight that keeps the score term below half that step."""

from __future__ import annotations

import math
from collections.abc import Sequence
from fractions import Fraction

from optimiser.design import Design
from optimiser.purchase import Catalogue

__all__ = ["cost_quantum", "normalised_scores"]


def cost_quantum(catalogue: Catalogue | None) -> float:
    """Greatest common divisor of the pack prices and the line cost (> 0)."""
    if catalogue is None or not catalogue.items:
        return 1.0
    steps = [Fraction(str(p.pack_price)).limit_denominator(10**6)
             for p in catalogue.items.values()]
    if catalogue.options is not None:
        steps.append(Fraction(str(catalogue.options.line_cost)).limit_denominator(10**6))
    steps = [s for s in steps if s > 0]
    if not steps:
        return 1.0
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
            out.append(0.999)
        elif span <= 0:
            out.append(0.0)
        else:
            out.append(0.999 * (float(s) - lo) / span)
    return out
