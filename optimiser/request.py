"""A design request (interface.md "Design request") as a typed, validated object.

All values are SI: ohm, hertz, volt; temperatures in °C as the user gives them
(the device model converts to kelvin).  ``None`` means "unconstrained".
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

__all__ = ["TOPOLOGIES", "Request"]

TOPOLOGIES = ("ce", "cb", "cc")


@dataclass(frozen=True)
class Request:
    topology: str
    supply_v: float
    load_ohm: float | None = None          # None: open (no load)
    source_ohm: float = 0.0
    mid_hz: float = 1000.0
    gain: float | None = None              # target |v_load / v_emf| in V/V
    gain_tol_db: float = 1.0
    f_low_max_hz: float | None = None
    f_high_min_hz: float | None = None
    zin_min_ohm: float | None = None
    ic_drift_max_pct: float | None = None
    temp_c: tuple[float, float] = (25.0, 25.0)
    input_vpk: float = 0.01
    thd_max_pct: float | None = None
    builds: int = 1
    transistor: str = "any"
    allow_combos: bool = False
    min_yield_pct: float | None = None
    yield_samples: int | None = None       # None: yield not asked for (unless min_yield_pct)
    seed: int = 0
    mains: bool = False                    # the supply is derived from the mains (cautions)

    @property
    def gain_db(self) -> float | None:
        return None if self.gain is None else 20.0 * math.log10(self.gain)

    @property
    def wants_yield(self) -> bool:
        return self.min_yield_pct is not None or self.yield_samples is not None

    @property
    def samples(self) -> int:
        return self.yield_samples if self.yield_samples is not None else 2000

    def to_json(self) -> dict:
        d = asdict(self)
        d["temp_c"] = list(self.temp_c)
        d["gain_db"] = self.gain_db
        return d
