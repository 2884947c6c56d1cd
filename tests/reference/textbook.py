"""Helpers for the textbook checks: the engine set up as the recorded ngspice runs.

Those runs used ngspice's default TEMP = TNOM = 27 °C, ``BF`` = the book's β at 27 °C,
``IS`` chosen for V_BE = 0.70 V at the example's current, no VAF and no capacitances.
:func:`book_model` builds the same device for the engine (whose model is referred to
25 °C) and :func:`op_at_27` solves at 27 °C, so the engine and those ngspice figures
share one model.
"""

from __future__ import annotations

import math

import numpy as np

from optimiser import ac
from optimiser.dc import operating_point
from optimiser.device import DeviceModel, scaled, thermal_voltage
from optimiser.request import Request
from optimiser.stage import StageBatch

T_BOOK = 27.0
OPEN = 1e15        # ohm: a resistor role the book's circuit does not have (base divider R2)
SHORT_C = 1.0      # farad: a capacitor the book treats as a short (as the [NGSPICE] runs did)


def book_model(beta: float, ic_at_0v7: float) -> DeviceModel:
    """DeviceModel whose I_S(27 °C) gives V_BE = 0.70 V at ``ic_at_0v7`` and β(27 °C) = beta."""
    unit = DeviceModel(is_=1.0, beta=1.0)
    f_is, f_beta = scaled(unit, T_BOOK)
    is27 = ic_at_0v7 / math.exp(0.70 / thermal_voltage(T_BOOK))
    return DeviceModel(is_=is27 / f_is, beta=beta / f_beta, vce_sat=0.2)


def op_at_27(topology, supply_v, model, **values):
    b = StageBatch.from_values(topology, **values)
    return b, operating_point(topology, supply_v, b, model, temp_c=T_BOOK)


def midband_at_27(req: Request, model: DeviceModel, **values):
    b, op = op_at_27(req.topology, req.supply_v, model, **values)
    mid = ac.midband(req, b, model, op)
    return b, op, {k: complex(np.asarray(v)[0]) for k, v in mid.items()}


def low_edge_at_27(req: Request, model: DeviceModel, **values) -> float:
    b, op = op_at_27(req.topology, req.supply_v, model, **values)
    g = np.abs(ac.midband(req, b, model, op)["h"])
    f_low, _, _ = ac.band_edges(req, b, model, op, g, want_high=False)
    return float(f_low[0])
