"""Cautions for the bench: what in a design can hurt the builder or the parts.

Pure functions over a :class:`~optimiser.design.Design` (its parts, their
ratings and its DC node voltages), the :class:`~optimiser.request.Request` and
the transistor's data.  No I/O.  Each condition compares a figure with a
threshold that is a named setting of :class:`CautionSettings`; the defaults are
rules of thumb (common practice) and are documented in docs/sheet.md.  The
capacitor and resistor deratings are the engine's (:data:`optimiser.evaluate.DERATING`).

Each caution carries a severity (:data:`SEVERITIES`): ``danger`` when the
design as chosen can hurt the builder (mains or high voltage, a capacitor above
its derated voltage, a transistor hot enough to burn), ``warning`` for what must
be done right or a part suffers (the + side of a polarised capacitor, a
resistor or transistor over its rating), ``note`` for advice.  How a
severity looks is the business of the renderers, not of this module.

DC voltages across the capacitors follow from the node voltages and where each
capacitor sits, which is the topology's (``WIRING`` of its module in
:mod:`optimiser.stages`; docs/requests.md, "Roles"); the source and the load are
at 0 V (the load taken at 0 V with no load, too).  The words for each side are
the topology's ``NODE_WORDS``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from inventory.parts import (
    DEFAULT_CAPACITOR_VOLTAGE_V,
    DEFAULT_RESISTOR_POWER_W,
    POLARISED_DIELECTRICS,
)
from optimiser.design import Design, RolePick
from optimiser.evaluate import DERATING
from optimiser.request import Request
from optimiser.stages import module as stage_module
from optimiser.stages.base import capacitor_sides

__all__ = [
    "Caution",
    "CautionSettings",
    "CapacitorBias",
    "CapacitorRating",
    "SEVERITIES",
    "capacitor_bias",
    "capacitor_ratings",
    "resistor_piece_power",
    "transistor_power",
    "cautions",
]

#: The severities, most serious first.
SEVERITIES = ("danger", "warning", "note")


@dataclass(frozen=True)
class Caution:
    """One line of advice for the builder.

    ``kind`` names the condition (``capacitor_voltage``, ``polarity``,
    ``resistor_power``, ``transistor_power``, ``transistor_voltage``, ``hot``,
    ``mains``, ``verify``); ``role`` the part it concerns, if any;
    ``severity`` one of :data:`SEVERITIES`.  ``level`` is ``"caution"``
    (something to act on: danger or warning) or ``"note"``.
    """

    kind: str
    text: str
    role: str | None = None
    severity: str = "warning"

    def __post_init__(self):
        if self.severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {SEVERITIES}, not {self.severity!r}")

    @property
    def level(self) -> str:
        return "note" if self.severity == "note" else "caution"

    def to_json(self) -> dict:
        return {"kind": self.kind, "text": self.text, "role": self.role, "level": self.level,
                "severity": self.severity}


@dataclass(frozen=True)
class CautionSettings:
    """Thresholds of the cautions (all rules of thumb: common practice).

    Attributes
    ----------
    capacitor_derating : float
        Largest |DC voltage| as a fraction of a capacitor's voltage rating (the
        engine's validity rule, ``DERATING["capacitor_voltage"]``).
    resistor_derating : float
        Largest dissipation of one resistor piece as a fraction of its power
        rating (the engine's ``DERATING["resistor_power"]``).
    transistor_derating : float
        Largest transistor dissipation as a fraction of its ``pd`` (1.0: the
        rating itself).
    hot_fraction_of_pd : float
        A transistor dissipating more than this fraction of ``pd`` runs hot to
        the touch (0.5).
    hot_w : float
        ... or more than this many watts whatever its ``pd`` (0.25 W: a small
        TO-92-class plastic can at roughly 200 K/W rises about 50 K above the
        ambient air at this power, too hot to hold a finger on).
    mains_supply_v : float
        A supply above this voltage gets the mains / high-voltage note (30 V).
    polarity_hint_f : float
        A capacitor of unknown dielectric from this value up (1 µF; such values
        are commonly electrolytic) gets a note naming the side for + .
    """

    capacitor_derating: float = DERATING["capacitor_voltage"]
    resistor_derating: float = DERATING["resistor_power"]
    transistor_derating: float = 1.00
    hot_fraction_of_pd: float = 0.50
    hot_w: float = 0.25
    mains_supply_v: float = 30.0
    polarity_hint_f: float = 1e-6


DEFAULT_SETTINGS = CautionSettings()


@dataclass(frozen=True)
class CapacitorBias:
    """The DC voltage across one capacitor role.

    ``high`` and ``low`` name the nodes at each terminal (the topology's ``NODE_WORDS``),
    ``volts`` = V(high) − V(low) ≥ 0 is the magnitude; ``plus`` is the node the
    + terminal of a polarised part must face (the higher one).
    """

    role: str
    high: str
    low: str
    volts: float

    @property
    def plus(self) -> str:
        return self.high


def _metric(design: Design, key: str, default: float | None = None) -> float | None:
    v = design.metrics.get(key, default)
    if v is None:
        return default
    v = float(v)
    return v if np.isfinite(v) else default


def _nodes(design: Design, request: Request) -> dict[str, float]:
    """DC node voltages to ground in volts: base, emitter, collector, junction."""
    vb = _metric(design, "vb_v")
    ve = _metric(design, "ve_v")
    vc = _metric(design, "vc_v")
    if vc is None and "RC" not in design.parts:
        vc = request.supply_v
    nodes = {"ground": 0.0, "source": 0.0, "load": 0.0, "supply": float(request.supply_v)}
    if vb is not None:
        nodes["base"] = vb
    if ve is not None:
        nodes["emitter"] = ve
        re = design.parts["RE"].value if "RE" in design.parts else 0.0
        rb = design.parts["RE_BYP"].value if "RE_BYP" in design.parts else 0.0
        if re + rb > 0:
            nodes["junction"] = ve * rb / (re + rb)
    if vc is not None:
        nodes["collector"] = vc
    return nodes


def capacitor_bias(design: Design, request: Request) -> dict[str, CapacitorBias]:
    """DC voltage across each capacitor role of ``design`` (volts).

    Roles whose node voltage is unknown (metrics missing) are left out.
    """
    nodes = _nodes(design, request)
    out: dict[str, CapacitorBias] = {}
    for role, (a, b) in capacitor_sides(stage_module(design.topology)).items():
        if a == "junction" and "RE" not in design.parts:
            a = "emitter"                      # fully bypassed: C_BYP sits on the emitter
        if role not in design.parts or a not in nodes:
            continue
        va, vb = nodes[a], nodes[b]
        if va >= vb:
            out[role] = CapacitorBias(role, a, b, va - vb)
        else:
            out[role] = CapacitorBias(role, b, a, vb - va)
    return out


@dataclass(frozen=True)
class CapacitorRating:
    """The DC voltage across one capacitor role and the rating it needs.

    ``volts`` the |DC voltage| (V), ``plus`` the node facing + (the
    topology's ``NODE_WORDS``), ``needed_v`` = ``volts`` / derating, ``rating_v`` the
    lowest rating of its pieces (the stock default when no piece states one,
    then ``stated`` is False), ``ok`` whether ``rating_v`` ≥ ``needed_v``.
    """

    role: str
    volts: float
    plus: str
    needed_v: float
    rating_v: float
    stated: bool
    derating: float

    @property
    def ok(self) -> bool:
        return self.rating_v >= self.needed_v * (1 - 1e-9)

    def to_json(self) -> dict:
        return {"role": self.role, "dc_v": self.volts, "plus": self.plus,
                "needed_v": self.needed_v, "rating_v": self.rating_v,
                "rating_stated": self.stated, "ok": self.ok}


def capacitor_ratings(design: Design, request: Request, *,
                      settings: CautionSettings | None = None) -> list[CapacitorRating]:
    """Each capacitor role's DC voltage and the voltage rating it needs (role order).

    The whole role's voltage is set against ``settings.capacitor_derating`` of
    its lowest-rated piece (pieces in series share the voltage, so this errs
    on the safe side).
    """
    s = settings or DEFAULT_SETTINGS
    out = []
    for role, bias in capacitor_bias(design, request).items():
        stated = [pc.rating for pc in design.parts[role].pieces if pc.rating]
        rating = min(stated) if stated else DEFAULT_CAPACITOR_VOLTAGE_V
        out.append(CapacitorRating(role, bias.volts, bias.plus,
                                   bias.volts / s.capacitor_derating, rating, bool(stated),
                                   s.capacitor_derating))
    return out


def _role_power(design: Design, request: Request) -> dict[str, float]:
    """DC dissipation of each resistor role as a whole, in watts."""
    nodes = _nodes(design, request)
    p = design.parts
    out: dict[str, float] = {}
    vs = request.supply_v
    if "base" in nodes:
        vb = nodes["base"]
        if "R1" in p:
            out["R1"] = (vs - vb) ** 2 / p["R1"].value
        if "R2" in p:
            out["R2"] = vb ** 2 / p["R2"].value
    if "collector" in nodes and "RC" in p:
        out["RC"] = (vs - nodes["collector"]) ** 2 / p["RC"].value
    if "emitter" in nodes:
        re = p["RE"].value if "RE" in p else 0.0
        rb = p["RE_BYP"].value if "RE_BYP" in p else 0.0
        if re + rb > 0:
            ie = nodes["emitter"] / (re + rb)
            if re > 0:
                out["RE"] = ie ** 2 * re
            if rb > 0:
                out["RE_BYP"] = ie ** 2 * rb
    return out


def resistor_piece_power(pick: RolePick, role_power_w: float) -> list[tuple[float, float]]:
    """Split a role's dissipation over its pieces: ``[(watts, rating_w), ...]``.

    One piece takes it all; pieces joined in series share by resistance
    (P_i = I²·R_i), in parallel by conductance (P_i = V²/R_i).
    """
    rows = [(pc.value, pc.count, pc.rating or DEFAULT_RESISTOR_POWER_W) for pc in pick.pieces]
    if not rows:
        return [(role_power_w, DEFAULT_RESISTOR_POWER_W)]
    total = sum(c for _, c, _ in rows)
    if pick.joined is None or total <= 1 or pick.value <= 0:
        return [(role_power_w, rating) for _, _, rating in rows]
    out = []
    if pick.joined == "series":
        current_sq = role_power_w / pick.value
        for value, count, rating in rows:
            out += [(current_sq * value, rating)] * count
    else:
        volt_sq = role_power_w * pick.value
        for value, count, rating in rows:
            out += [(volt_sq / value if value > 0 else 0.0, rating)] * count
    return out


def transistor_power(design: Design, corners: dict | None = None) -> float | None:
    """Largest DC dissipation of the transistor (W): nominal, or at the drift corners.

    ``corners`` is the engine's dict of arrays: ``pq_w`` when present, else
    ``ic_a``·``vce_v`` (the base term I_B·V_BE left out; below 1 % for β ≥ 100).
    """
    p = _metric(design, "pd_q_w")
    if p is None:
        ic, vce = _metric(design, "ic_a"), _metric(design, "vce_v")
        if ic is not None and vce is not None:
            p = ic * vce
    pc = None
    if corners is not None and "pq_w" in corners:
        pc = np.asarray(corners["pq_w"], float)
    elif corners is not None and "ic_a" in corners and "vce_v" in corners:
        pc = np.asarray(corners["ic_a"], float) * np.asarray(corners["vce_v"], float)
    if pc is not None:
        pc = pc[np.isfinite(pc)]
        if pc.size:
            p = max(p or 0.0, float(pc.max()))
    return p


def _fmt_v(v: float) -> str:
    return f"{v:.3g} V" if abs(v) < 100 else f"{v:.0f} V"


def _fmt_w(w: float) -> str:
    if abs(w) >= 1:
        return f"{w:.3g} W"
    return f"{w * 1e3:.3g} mW"


def _polarised(pick: RolePick) -> bool | None:
    """True/False from the pieces' dielectric; None when no piece says what it is."""
    known = [pc.dielectric for pc in pick.pieces if pc.dielectric]
    if not known:
        return None
    return any(d.lower() in POLARISED_DIELECTRICS for d in known)


def cautions(design: Design, request: Request, transistor=None, *,
             corners: dict | None = None,
             settings: CautionSettings = DEFAULT_SETTINGS) -> list[Caution]:
    """The cautions and notes for building ``design``.

    Parameters
    ----------
    design : Design
        The stage; its ``metrics`` give the DC node voltages (``vb_v``,
        ``ve_v``, ``vc_v``, volts) and ``pd_q_w`` (W); its pieces give the
        ratings (W for resistors, V for capacitors; stock defaults when absent)
        and dielectrics.
    request : Request
        ``supply_v`` (V) and ``mains``.
    transistor : inventory.parts.Transistor, optional
        For ``pd`` (W) and ``vceo`` (V); limits that are ``None`` are not checked.
    corners : dict of arrays, optional
        The engine's drift corners (``ic_a`` in A, ``vce_v`` in V); the
        transistor's dissipation is then the largest over nominal and corners.
    settings : CautionSettings
        The thresholds.

    Returns
    -------
    list of Caution
        The mains / high-voltage caution first when it applies, then the
        dangers, the warnings and the notes, each in role order; the bench
        note is always there.
    """
    out: list[Caution] = []
    s = settings

    # Capacitors: DC voltage against rating, and polarity.
    words = stage_module(design.topology).NODE_WORDS
    for role, bias in capacitor_bias(design, request).items():
        pick = design.parts[role]
        ratings = [pc.rating for pc in pick.pieces if pc.rating] or [DEFAULT_CAPACITOR_VOLTAGE_V]
        rating = min(ratings)
        limit = s.capacitor_derating * rating
        if bias.volts > limit:
            out.append(Caution(
                "capacitor_voltage",
                f"{role}: {_fmt_v(bias.volts)} DC across a {_fmt_v(rating)} part, above "
                f"{s.capacitor_derating:.0%} of its rating ({_fmt_v(limit)}); use a part rated "
                f"at least {_fmt_v(bias.volts / s.capacitor_derating)}; an over-stressed "
                f"capacitor can fail, and an electrolytic can burst.", role, "danger"))
        # The side follows from the DC voltages (the higher node gets +).
        polar = _polarised(pick)
        if polar:
            out.append(Caution(
                "polarity",
                f"{role}: polarised; + toward {words[bias.high]}, − toward "
                f"{words[bias.low]} ({_fmt_v(bias.volts)} DC across it). "
                f"Reversed, it heats and can burst.", role, "warning"))
        elif polar is None and pick.value >= s.polarity_hint_f:
            out.append(Caution(
                "polarity",
                f"{role}: if you use a polarised (electrolytic or tantalum) part, put + toward "
                f"{words[bias.high]}, − toward {words[bias.low]} "
                f"({_fmt_v(bias.volts)} DC across it).", role, "note"))

    # Resistors: dissipation of each piece against its rating.
    for role, watts in _role_power(design, request).items():
        pick = design.parts[role]
        worst = max(resistor_piece_power(pick, watts), key=lambda pr: pr[0] / pr[1])
        piece_w, rating = worst
        limit = s.resistor_derating * rating
        if piece_w > limit:
            out.append(Caution(
                "resistor_power",
                f"{role}: a piece dissipates {_fmt_w(piece_w)}, above {s.resistor_derating:.0%} "
                f"of its {_fmt_w(rating)} rating ({_fmt_w(limit)}); use a higher-rated part.",
                role, "warning"))

    # Transistor: dissipation, heat, voltage.
    p_q = transistor_power(design, corners)
    pd = getattr(transistor, "pd", None)
    if p_q is not None:
        if pd is not None and p_q > s.transistor_derating * pd:
            out.append(Caution(
                "transistor_power",
                f"Q: dissipates {_fmt_w(p_q)}, above its {_fmt_w(pd)} rating; it will overheat.",
                "Q", "warning"))
        hot_limit = s.hot_w if pd is None else min(s.hot_w, s.hot_fraction_of_pd * pd)
        if p_q > hot_limit:
            out.append(Caution(
                "hot",
                f"Q: dissipates {_fmt_w(p_q)} and runs hot to the touch; do not touch it while "
                f"powered, keep it clear of other parts and wires, give it air (or a heat sink).",
                "Q", "danger"))
    vceo = getattr(transistor, "vceo", None)
    if vceo is not None and request.supply_v > vceo:
        out.append(Caution(
            "transistor_voltage",
            f"Q: supply {_fmt_v(request.supply_v)} is above the transistor's V_CEO "
            f"({_fmt_v(vceo)}); it can break down.", "Q", "warning"))

    # Supply: first of all, when it applies.
    if request.mains or request.supply_v > s.mains_supply_v:
        why = "is derived from the mains" if request.mains else \
            f"is {_fmt_v(request.supply_v)} (above {_fmt_v(s.mains_supply_v)})"
        out.insert(0, Caution(
            "mains",
            f"The supply {why}. Mains wiring and high-voltage supplies are work for qualified "
            f"people under local codes and licensed practice; power the stage from a finished, "
            f"isolated, fused supply and switch it off before touching the board. Capacitors "
            f"can hold a charge after the power is off: discharge each one through a resistor "
            f"(and check with a meter) before you touch it.", None, "danger"))

    out.append(Caution(
        "verify",
        "The figures are computed from models and nominal data (ideal parts, data-sheet "
        "transistor figures); verify them on the bench with a meter before relying on the stage.",
        None, "note"))
    # Most serious first; the sort is stable, so the mains caution stays first and
    # the rest keep their role order within a severity.
    out.sort(key=lambda c: SEVERITIES.index(c.severity))
    return out


def cautions_of_kind(items: Sequence[Caution], kind: str) -> list[Caution]:
    """The cautions of one kind (a convenience for renderers and tests)."""
    return [c for c in items if c.kind == kind]
