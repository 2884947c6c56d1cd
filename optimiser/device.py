"""The BJT device model of docs/model.md.

The forward part of the SPICE Gummel–Poon model: saturation current ``I_S``,
forward current gain ``β`` (BF), Early voltage ``V_AF``, transit time ``TF``
and a constant collector–base capacitance ``CJC``; BR = 1, NF = 1, no
high-injection, leakage or parasitic-resistance terms.  Temperatures are °C at
the interface and kelvin inside; the nominal temperature is 25 °C
(T0 = 298.15 K).  Plain ngspice with :func:`spice_model_line` is the reference
for every figure computed from this model.

All functions are pure and accept numpy arrays where a temperature or a
parameter is an array (they broadcast).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.constants import e as _Q
from scipy.constants import k as _K
from scipy.constants import zero_Celsius

from inventory.parts import Transistor

__all__ = [
    "T0_K",
    "XTI",
    "EG_EV",
    "XTB",
    "EXP_LIMIT",
    "thermal_voltage",
    "DeviceModel",
    "device_from_transistor",
    "scaled",
    "spice_model_line",
    "junction_currents",
]

#: Nominal temperature of the model, kelvin (25 °C).
T0_K = zero_Celsius + 25.0
#: SPICE temperature exponents and band gap (docs/model.md).
XTI = 3.0
EG_EV = 1.11
XTB = 1.5
#: Exponent argument above which exp() continues linearly (keeps absurd
#: forced junction voltages finite; 80·V_T ≈ 2 V is far beyond any real bias).
EXP_LIMIT = 80.0


def thermal_voltage(temp_c):
    """Thermal voltage V_T = k·T/q in volts for a temperature in °C.

    Parameters
    ----------
    temp_c : float or ndarray
        Temperature in degrees Celsius.

    Returns
    -------
    float or ndarray
        V_T in volts (0.025692579 V at 25 °C), same shape as ``temp_c``.
    """
    t = np.asarray(temp_c, dtype=float) + zero_Celsius
    vt = _K * t / _Q
    return float(vt) if vt.ndim == 0 else vt


@dataclass(frozen=True)
class DeviceModel:
    """SPICE parameters of one transistor type at 25 °C, SI units.

    Attributes
    ----------
    is_ : float
        Saturation current I_S, A.
    beta : float
        Forward current gain BF used for the nominal figures.
    vaf : float
        Forward Early voltage, V (``inf`` for none).
    tf : float
        Forward transit time, s (0 without ft).
    cjc : float
        Constant collector–base capacitance, F (0 without cob).
    vce_sat : float
        Edge of the forward-active region used by the validity rules, V.
    vceo, ic_max, pd : float
        Limits (V, A, W); ``inf`` where the data sheet gives none.
    hfe_min, hfe_max : float
        Current-gain spread at 25 °C, for the drift corners.
    has_ft, has_cob : bool
        Whether ft and cob were given (no upper band edge without both).
    """

    is_: float
    beta: float
    vaf: float = math.inf
    tf: float = 0.0
    cjc: float = 0.0
    vce_sat: float = 0.2
    vceo: float = math.inf
    ic_max: float = math.inf
    pd: float = math.inf
    hfe_min: float | None = None
    hfe_max: float | None = None
    has_ft: bool = False
    has_cob: bool = False

    @property
    def corner_betas(self) -> tuple[float, float]:
        """(hfe_min, hfe_max) at 25 °C, the nominal β where not given."""
        lo = self.hfe_min if self.hfe_min is not None else self.beta
        hi = self.hfe_max if self.hfe_max is not None else self.beta
        return float(lo), float(hi)


def _or_inf(x) -> float:
    return math.inf if x is None else float(x)


def device_from_transistor(t: Transistor, beta: float | None = None) -> DeviceModel:
    """The :class:`DeviceModel` of a stock transistor (docs/model.md, "From the stock figures").

    ``I_S = ic_ref / (exp(vbe/V_T) − 1)`` at 25 °C; β = ``beta`` if given, else
    hfe_typ, else sqrt(hfe_min·hfe_max); TF = 1/(2π·ft) (0 without ft);
    CJC = cob (0 without cob).
    """
    vt = thermal_voltage(25.0)
    is_ = float(t.ic_ref) / math.expm1(float(t.vbe) / vt)
    b = float(beta) if beta is not None else float(t.beta_nominal)
    tf = 1.0 / (2.0 * math.pi * float(t.ft)) if t.ft else 0.0
    cjc = float(t.cob) if t.cob else 0.0
    return DeviceModel(
        is_=is_, beta=b, vaf=_or_inf(t.vaf), tf=tf, cjc=cjc,
        vce_sat=float(t.vce_sat), vceo=_or_inf(t.vceo), ic_max=_or_inf(t.ic_max),
        pd=_or_inf(t.pd), hfe_min=float(t.hfe_min), hfe_max=float(t.hfe_max),
        has_ft=bool(t.ft), has_cob=bool(t.cob),
    )


def scaled(model: DeviceModel, temp_c, beta=None):
    """I_S and β at ``temp_c`` (°C) by SPICE's XTI = 3, EG = 1.11 eV, XTB = 1.5.

    ``I_S(T) = I_S·(T/T0)^3·exp((EG/k)·(1/T0 − 1/T))``, ``β(T) = β·(T/T0)^1.5``.
    ``beta`` (a value at 25 °C, array allowed) replaces the model's β.

    Returns
    -------
    (is_T, beta_T) : floats or ndarrays broadcast from ``temp_c`` and ``beta``.
    """
    t = np.asarray(temp_c, dtype=float) + zero_Celsius
    ratio = t / T0_K
    eg_over_k = EG_EV * _Q / _K          # kelvin
    is_t = model.is_ * ratio**XTI * np.exp(eg_over_k * (1.0 / T0_K - 1.0 / t))
    b = model.beta if beta is None else np.asarray(beta, dtype=float)
    beta_t = b * ratio**XTB
    if np.ndim(is_t) == 0 and np.ndim(beta_t) == 0:
        return float(is_t), float(beta_t)
    return is_t, beta_t


def spice_model_line(model: DeviceModel, name: str = "QX", beta: float | None = None) -> str:
    """The ``.model`` line of docs/model.md for ``model`` (used by the ngspice checks)."""
    b = model.beta if beta is None else beta
    vaf = "" if math.isinf(model.vaf) else f" VAF={model.vaf:.12g}"
    return (f".model {name} NPN(IS={model.is_:.12e} BF={b:.12g} NF=1{vaf} BR=1 "
            f"TF={model.tf:.12e} CJE=0 CJC={model.cjc:.12e} MJC=0 XTI=3 EG=1.11 XTB=1.5)")


def _exp_lim(x):
    """exp(x), continued linearly above EXP_LIMIT; returns (value, derivative)."""
    over = x > EXP_LIMIT
    if not np.any(over):
        ex = np.exp(x)
        return ex, ex
    xc = np.minimum(x, EXP_LIMIT)
    ex = np.exp(xc)
    return np.where(over, ex * (1.0 + (x - xc)), ex), ex


def junction_currents(vbe, vbc, is_, beta, vt, inv_vaf):
    """Collector and base currents and their derivatives (docs/model.md, "Currents").

    ``I_C = I_S(e^{V_BE/V_T} − e^{V_BC/V_T})(1 − V_BC/V_AF) − I_S(e^{V_BC/V_T} − 1)``,
    ``I_B = (I_S/β)(e^{V_BE/V_T} − 1) + I_S(e^{V_BC/V_T} − 1)``.
    All arguments broadcast; ``inv_vaf`` = 1/V_AF (0 for none).

    Returns
    -------
    ic, ib, dic_dvbe, dic_dvbc, dib_dvbe, dib_dvbc : ndarray
    """
    ebe, dbe = _exp_lim(vbe / vt)
    ebc, dbc = _exp_lim(vbc / vt)
    q = 1.0 - vbc * inv_vaf
    diff = is_ * (ebe - ebc)
    ic = diff * q - is_ * (ebc - 1.0)
    ib = is_ / beta * (ebe - 1.0) + is_ * (ebc - 1.0)
    gbe = is_ * dbe / vt
    gbc = is_ * dbc / vt
    dic_dvbe = gbe * q
    dic_dvbc = -gbc * q - diff * inv_vaf - gbc
    dib_dvbe = gbe / beta
    dib_dvbc = gbc
    return ic, ib, dic_dvbe, dic_dvbc, dib_dvbe, dib_dvbc
