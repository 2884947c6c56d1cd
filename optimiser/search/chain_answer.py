"""What a chain search returns: :class:`ChainDesign` and :class:`ChainResult` (the JSON
of ``drawerfit design`` for a chain request, docs/json.md)."""

from __future__ import annotations

from dataclasses import dataclass, field

from optimiser.design import RolePick, _clean
from optimiser.request import Request
from optimiser.search.suggestions import change_json

__all__ = ["ChainDesign", "ChainResult"]


@dataclass
class ChainDesign:
    """One evaluated chain or cascode (``topology`` ``"cascode"``, ``coupling`` None, its
    own roles): both stages' parts (roles ``S1.*``, ``S2.*``, ``C_COUPLE``),
    the whole chain's figures and each stage's operating point."""

    topology: tuple[str, str] | str
    coupling: str | None
    transistors: tuple[str, str]
    parts: dict[str, RolePick]
    metrics: dict[str, float | None]
    stages: list[dict[str, float | None]]
    meets_spec: bool
    score: float
    score_terms: dict[str, float]
    violations: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    rank: int | None = None

    def values(self) -> dict[str, float]:
        return {r: p.value for r, p in self.parts.items()}

    def to_json(self) -> dict:
        d = {
            "rank": self.rank,
            "topology": (self.topology if isinstance(self.topology, str)
                         else list(self.topology)),
            "coupling": self.coupling,
            "transistors": list(self.transistors),
            "parts": {r: p.to_json() for r, p in self.parts.items()},
            "metrics": {k: _clean(v) for k, v in self.metrics.items()},
            "stages": [{k: _clean(v) for k, v in s.items()} for s in self.stages],
            "meets_spec": bool(self.meets_spec),
            "score": _clean(self.score),
            "score_terms": {k: _clean(v) for k, v in self.score_terms.items()},
        }
        if self.violations:
            d["violations"] = list(self.violations)
        if self.warnings:
            d["warnings"] = list(self.warnings)
        return d


@dataclass
class ChainResult:
    """The ranked chains of a request, and what the search covered (``search``)."""

    request: Request
    designs: list[ChainDesign]
    nearest_misses: list[ChainDesign]
    search: dict
    #: what would unlock a request nothing meets, as lines and as data (docs/answers.md)
    unlock: list[str] = field(default_factory=list)
    unlock_changes: list[dict] = field(default_factory=list)
    #: targets beyond reach (:func:`optimiser.search.limits.physical_limits`)
    limits: list[dict] = field(default_factory=list)

    @property
    def feasible(self) -> bool:
        return bool(self.designs)

    def to_json(self) -> dict:
        return {
            "request": self.request.to_json(),
            "feasible": self.feasible,
            "proven": bool(self.search.get("proven", False)),
            "designs": [d.to_json() for d in self.designs],
            "nearest_misses": [d.to_json() for d in self.nearest_misses],
            "unlock": list(self.unlock),
            "unlock_changes": [change_json(x) for x in self.unlock_changes],
            "limits": [dict(x) for x in self.limits],
            "search": {k: _clean(v) if isinstance(v, float) else v
                       for k, v in self.search.items()},
        }
