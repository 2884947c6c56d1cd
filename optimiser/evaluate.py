"""Every figure, validity rule and target check of docs/model.md for a batch of stages.

:func:`evaluate` is the one entry point the rest of the program uses (search,
yield, analyse, the build sheet): it runs the DC solver (nominal point and the
four drift corners), the small-signal nodal analysis (midband gain, Zin, Zout,
band edges), the quasi-static large-signal sweep (THD, swing), then applies the
"Validity" rules and the request's targets.  Everything is vectorised over the
``n`` candidates; plain-word violations are produced on demand per candidate.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, fields

import numpy as np

from inventory.parts import DEFAULT_CAPACITOR_VOLTAGE_V, DEFAULT_RESISTOR_POWER_W, Transistor

from . import ac, distortion
from .dc import OperatingPoint, operating_point
from .device import DeviceModel, device_from_transistor
from .request import Request
from .stage import CAPACITOR_ROLES, RESISTOR_ROLES, PartRatings, StageBatch
from .stages import module as stage_module
from .stages.common import resistor_voltages

__all__ = [
    "DERATING",
    "FLAT_PASSBAND_DB",
    "DIVIDER_RULE",
    "METRIC_KEYS",
    "Evaluation",
    "evaluate",
    "frequency_response_of",
    "corner_points",
    "thd_rule",
]

#: Part derating (common practice; settings): a resistor piece may dissipate this
#: share of its power rating, a capacitor see this share of its voltage rating.
DERATING = {"resistor_power": 0.5, "capacitor_voltage": 0.8}
#: Flat passband: between the band edges the gain may not exceed its mid_hz value by more.
FLAT_PASSBAND_DB = 1.0
#: The "10:1" divider rule R_TH ≤ 0.1·β·R_E (B&N's condition; M&B call it "firm",
#: their "stiff" is 0.01).  Breaking it is a warning, not a violation.
DIVIDER_RULE = 0.1

METRIC_KEYS = ("gain", "gain_db", "f_low_hz", "f_high_hz", "ic_a", "vce_v", "zin_ohm",
               "zout_ohm", "ic_drift_pct", "swing_vpk", "thd_pct", "pd_q_w", "vb_v", "ve_v",
               "vc_v", "vbe_v")


@dataclass
class _Rule:
    kind: str                       # "validity", "target", "warning"
    key: str
    fail: np.ndarray                # (n,) bool
    text: Callable[[int], str]
    data: dict = field(default_factory=dict)


def _g(x: float, digits: int = 3) -> str:
    """A number as plain text, ``digits`` significant figures, no exponent for usual sizes."""
    if x is None or not math.isfinite(x):
        return "none"
    if x == 0:
        return "0"
    mag = math.floor(math.log10(abs(x)))
    if -4 <= mag < 9:
        dec = max(0, digits - 1 - mag)
        s = f"{x:.{dec}f}"
        return s
    return f"{x:.{digits - 1}e}"


def _si(x: float, unit: str) -> str:
    try:
        from inventory.values import format_si
        return format_si(x, unit)
    except Exception:  # values module not there yet, or odd input
        return f"{_g(x)} {unit}"


class RuleVerdicts:
    """What a batch's rules say of candidate ``i``: the texts of the rules it fails
    by kind, and their keys.  For an evaluation with ``batch`` and ``rules``."""

    batch: object
    rules: list

    @property
    def n(self) -> int:
        return self.batch.n

    def _texts(self, i: int, kinds) -> list[str]:
        return [r.text(i) for r in self.rules if r.kind in kinds and bool(r.fail[i])]

    def violations(self, i: int) -> list[str]:
        """Plain-word reasons (with numbers) why candidate ``i`` is invalid or misses a target."""
        return self._texts(i, ("validity", "target"))

    def validity_violations(self, i: int) -> list[str]:
        return self._texts(i, ("validity",))

    def warnings(self, i: int) -> list[str]:
        return self._texts(i, ("warning",))

    def failed_keys(self, i: int) -> list[str]:
        return [r.key for r in self.rules if r.kind in ("validity", "target") and bool(r.fail[i])]


def thd_rule(request: Request, thd: np.ndarray, active: np.ndarray) -> _Rule:
    """The THD target holds where the THD at input_vpk is at most thd_max_pct and the
    period stays forward-active (:func:`optimiser.distortion.thd_active_of`: past that
    edge the forward model's THD is not the circuit's)."""
    lim = request.thd_max_pct

    def text(i: int) -> str:
        if not bool(active[i]):
            return (f"thd_pct: an input of {_g(request.input_vpk)} V peak drives a transistor "
                    f"out of the forward-active region, where the THD of {lim:g} % cannot "
                    f"be claimed")
        return f"thd_pct {_g(thd[i])} > {lim:g}"

    return _Rule("target", "thd_pct", ~(thd <= lim) | ~active, text)


def verdicts(rules: list[_Rule], n: int) -> tuple[np.ndarray, np.ndarray]:
    """(valid, meets), arrays (n,): no validity rule fails; valid and no target
    rule fails."""
    valid = np.ones(n, bool)
    meets = np.ones(n, bool)
    for r in rules:
        if r.kind == "validity":
            valid &= ~r.fail
        elif r.kind == "target":
            meets &= ~r.fail
    return valid, meets & valid


@dataclass
class Evaluation(RuleVerdicts):
    """Figures and verdicts for ``n`` candidates; every array has shape (n,).

    Attributes
    ----------
    metrics : dict[str, ndarray]
        Every metric key of docs/model.md (NaN = null).
    valid : ndarray[bool]
        Passes every "Validity" rule.
    meets : ndarray[bool]
        Valid and meets every target of the request that was computed (yield
        aside; with ``band_edges=False`` the band-edge targets are not judged,
        with ``large_signal=False`` the THD target is not).
    corners : dict
        Drift corners, arrays (n, 4): ``beta`` (at temperature), ``beta25``,
        ``temp_c``, ``ic_a``, ``vce_v``, ``pq_w``, ``gain``.  Order:
        (hfe_min, T_lo), (hfe_max, T_lo), (hfe_min, T_hi), (hfe_max, T_hi).
    plus : dict[str, ndarray]
        Capacitor role -> node name of its higher-DC side.
    small : dict[str, ndarray]
        Hybrid-π values at the nominal point: gm (S), rpi, ro (ohm), cpi, ctx, cmu (F).
    """

    request: Request
    batch: StageBatch
    transistor: Transistor
    model: DeviceModel
    op: OperatingPoint
    metrics: dict[str, np.ndarray]
    valid: np.ndarray
    meets: np.ndarray
    corners: dict[str, np.ndarray]
    plus: dict[str, np.ndarray]
    small: dict[str, np.ndarray]
    extra: dict[str, np.ndarray]
    rules: list[_Rule]

    def target_fail(self) -> dict[str, np.ndarray]:
        """Target key -> (n,) bool of candidates missing it."""
        return {r.key: r.fail for r in self.rules if r.kind == "target"}

    def metrics_of(self, i: int) -> dict[str, float | None]:
        """Metrics of candidate ``i`` as plain floats (None for null)."""
        out = {}
        for k, v in self.metrics.items():
            x = float(v[i])
            out[k] = x if math.isfinite(x) else None
        return out

    def take(self, idx) -> "Evaluation":
        """The sub-evaluation at ``idx`` (integer array or boolean mask)."""
        idx = np.asarray(idx)
        if idx.dtype == bool:
            idx = np.nonzero(idx)[0]
        sub = lambda d: {k: np.asarray(v)[idx] for k, v in d.items()}  # noqa: E731
        rules = []
        for r in self.rules:
            rules.append(_Rule(r.kind, r.key, r.fail[idx],
                               (lambda j, _r=r: _r.text(int(idx[j]))), r.data))
        return Evaluation(
            request=self.request, batch=self.batch.take(idx), transistor=self.transistor,
            model=self.model, op=self.op.take(idx), metrics=sub(self.metrics),
            valid=self.valid[idx], meets=self.meets[idx], corners=sub(self.corners),
            plus=sub(self.plus), small=sub(self.small), extra=sub(self.extra), rules=rules)


def _ratings(ratings: PartRatings | None, n: int):
    r = ratings or PartRatings()

    def get(d, role, default):
        v = d.get(role)
        return np.broadcast_to(np.asarray(default if v is None else v, dtype=float), (n,))

    power = {role: get(r.power_w, role, DEFAULT_RESISTOR_POWER_W) for role in RESISTOR_ROLES}
    share = {role: get(r.power_share, role, 1.0) for role in RESISTOR_ROLES}
    volt = {role: get(r.voltage_v, role, DEFAULT_CAPACITOR_VOLTAGE_V) for role in CAPACITOR_ROLES}
    pol = {role: np.broadcast_to(np.asarray(r.polarised.get(role, False), dtype=bool), (n,))
           for role in CAPACITOR_ROLES}
    return power, share, volt, pol


def _flat_op(op: OperatingPoint) -> OperatingPoint:
    return OperatingPoint(**{f.name: np.asarray(getattr(op, f.name)).reshape(-1)
                             for f in fields(op)})


def corner_points(request: Request, batch: StageBatch, model: DeviceModel):
    """Operating points at the four drift corners, arrays (n, 4), plus the corner β and T."""
    b_lo, b_hi = model.corner_betas
    t_lo, t_hi = float(request.temp_c[0]), float(request.temp_c[1])
    beta25 = np.array([[b_lo, b_hi, b_lo, b_hi]])
    temps = np.array([[t_lo, t_lo, t_hi, t_hi]])
    op = operating_point(batch.topology, request.supply_v, batch, model, temp_c=temps,
                         beta=beta25)
    return op, np.broadcast_to(beta25, op.ic.shape), np.broadcast_to(temps, op.ic.shape)


def evaluate(request: Request, batch: StageBatch, transistor: Transistor,
             ratings: PartRatings | None = None, *, band_edges: bool = True,
             large_signal: bool = True, derating: dict | None = None,
             corner_gain: bool = True) -> Evaluation:
    """All figures and verdicts of docs/model.md for the candidates of ``batch``.

    Parameters
    ----------
    request : Request
        Supply, source, load, mid_hz, temperatures and targets.
    batch : StageBatch
        ``n`` candidate stages of ``request.topology``.
    transistor : Transistor
        The transistor type (its data-sheet figures define the device model).
    ratings : PartRatings, optional
        Piece ratings for the derating rules (defaults 0.25 W, 50 V, not polarised).
    band_edges : bool
        Compute f_low, f_high and the flat-passband rule (the costly part of AC).
    large_signal : bool or "thd"
        Compute THD and swing (quasi-static sweep); ``"thd"`` computes THD alone
        (the swing, NaN then, is a figure to show, never a target: a search checking
        its candidates against thd_max_pct needs only THD).
    derating : dict, optional
        Overrides of :data:`DERATING`.
    corner_gain : bool
        Also the midband gain at each drift corner.
    """
    der = dict(DERATING)
    if derating:
        der.update(derating)
    model = device_from_transistor(transistor)
    n = batch.n
    topo = batch.topology
    mod = stage_module(topo)

    op = operating_point(topo, request.supply_v, batch, model)
    ss = ac.small_signal(op, model)
    mid = ac.midband(request, batch, model, op, ss)
    gain = np.abs(mid["h"])
    with np.errstate(divide="ignore"):
        gain_db = 20.0 * np.log10(gain)
    has_fhigh = model.has_ft and model.has_cob

    nan = np.full(n, np.nan)
    f_low, f_high, peak_db = nan.copy(), nan.copy(), nan.copy()
    if band_edges:
        f_low, f_high, peak_db = ac.band_edges(request, batch, model, op, gain, ss,
                                               want_high=has_fhigh)
        if not has_fhigh:
            f_high = nan.copy()

    # drift corners
    cop, cbeta25, ctemp = corner_points(request, batch, model)
    corners = {"beta25": np.array(cbeta25), "beta": np.array(cop.beta),
               "temp_c": np.array(ctemp), "ic_a": cop.ic, "vce_v": cop.vce, "pq_w": cop.pq,
               "vbe_v": cop.vbe}
    if corner_gain:
        rep = np.repeat(np.arange(n), 4)
        fop = _flat_op(cop)
        cmid = ac.midband(request, batch.take(rep), model, fop)
        corners["gain"] = np.abs(cmid["h"]).reshape(n, 4)
    with np.errstate(divide="ignore", invalid="ignore"):
        drift = 100.0 * np.max(np.abs(cop.ic - op.ic[:, None]), axis=1) / op.ic

    thd, swing, swing_emf = nan.copy(), nan.copy(), nan.copy()
    thd_active = np.ones(n, dtype=bool)
    if large_signal:
        thd, thd_active = distortion.thd_at_input(request, batch, model, op)
        if large_signal != "thd":
            swing, swing_emf = distortion.swing_vpk(request, batch, model, op)

    metrics = {
        "gain": gain, "gain_db": gain_db, "f_low_hz": f_low, "f_high_hz": f_high,
        "ic_a": op.ic, "vce_v": op.vce, "zin_ohm": np.abs(mid["zin"]),
        "zout_ohm": np.abs(mid["zout"]), "ic_drift_pct": drift, "swing_vpk": swing,
        "thd_pct": thd, "pd_q_w": op.pq, "vb_v": op.vb, "ve_v": op.ve, "vc_v": op.vc,
        "vbe_v": op.vbe,
    }
    small = {k: np.asarray(ss[k]) for k in ("gm", "rpi", "ro", "cpi", "ctx", "cmu")}

    rules: list[_Rule] = []
    power, share, volt, pol = _ratings(ratings, n)
    roles = mod.ROLE_NAMES

    # --- validity -----------------------------------------------------------
    rules.append(_Rule("validity", "converged", ~op.converged,
                       lambda i: "the operating point could not be solved (no convergence)"))
    vs = model.vce_sat
    rules.append(_Rule("validity", "saturated", op.vce < vs,
                       lambda i: f"V_CE {_g(op.vce[i])} V is below vce_sat {_g(vs)} V: "
                                 f"the transistor is saturated"))
    rules.append(_Rule("validity", "cutoff", op.cutoff,
                       lambda i: f"the transistor is cut off (I_C {_si(op.ic[i], 'A')})"))
    csat = cop.vce < vs

    def corner_text(i, arr, what):
        k = int(np.argmin(arr[i])) if what == "min" else int(np.argmax(arr[i]))
        return k, f"at hFE {_g(cbeta25[i, k])} and {_g(ctemp[i, k])} °C"

    def _csat_text(i):
        k, where = corner_text(i, cop.vce, "min")
        return f"{where} V_CE falls to {_g(cop.vce[i, k])} V, below vce_sat {_g(vs)} V"

    rules.append(_Rule("validity", "corner_saturated", csat.any(axis=1) & ~(op.vce < vs),
                       _csat_text))
    if math.isfinite(model.ic_max):
        icm = model.ic_max
        over = np.maximum(op.ic, cop.ic.max(axis=1)) > icm
        rules.append(_Rule("validity", "ic_max", over,
                           lambda i: f"I_C reaches {_si(max(op.ic[i], cop.ic[i].max()), 'A')}, "
                                     f"over the transistor's ic_max {_si(icm, 'A')}"))
    if math.isfinite(model.pd):
        pdm = model.pd
        over = np.maximum(op.pq, cop.pq.max(axis=1)) > pdm
        rules.append(_Rule("validity", "pd", over,
                           lambda i: f"the transistor dissipates {_g(max(op.pq[i], cop.pq[i].max()))} W, "
                                     f"over its pd {_g(pdm)} W"))
    if math.isfinite(model.vceo):
        vceo = model.vceo
        over = np.full(n, request.supply_v > vceo)
        rules.append(_Rule("validity", "vceo", over,
                           lambda i: f"supply {_g(request.supply_v)} V exceeds the transistor's "
                                     f"vceo {_g(vceo)} V"))
    # derating
    rv = resistor_voltages(batch, request.supply_v, op)
    rf = der["resistor_power"]
    for role in RESISTOR_ROLES:
        if role not in roles:
            continue
        r = batch.role(role)
        with np.errstate(divide="ignore", invalid="ignore"):
            p = np.where(r > 0, rv[role] ** 2 / np.where(r > 0, r, 1.0), 0.0)
        piece = p * share[role]
        fail = piece > rf * power[role]

        def _rtext(i, role=role, p=p, piece=piece):
            who = role.replace("RC", "R_C").replace("RE_BYP", "R_E,byp").replace("RE", "R_E") \
                if role in ("RC", "RE", "RE_BYP") else role
            lead = f"{who} dissipates {_g(p[i], 2)} W" if share[role][i] >= 1 else \
                f"each {who} piece dissipates {_g(piece[i], 2)} W"
            return f"{lead}, over {rf * 100:g} % of its {power[role][i]:g} W rating"

        rules.append(_Rule("validity", f"power_{role}", fail, _rtext, {"power_w": p}))
    cf = der["capacitor_voltage"]
    caps = mod.capacitors(batch, op)
    plus = {}
    for role, (v, hi_name, lo_name) in caps.items():
        if role not in roles:
            continue
        cval = batch.role(role)
        present = cval > 0
        plus[role] = np.where(v >= 0, hi_name, lo_name).astype(object)
        fail = present & (np.abs(v) > cf * volt[role]) & (role not in request.unrated_caps)

        def _ctext(i, role=role, v=v):
            return (f"{role} sees {_g(abs(v[i]))} V, over {cf * 100:g} % of its "
                    f"{volt[role][i]:g} V rating")

        rules.append(_Rule("validity", f"voltage_{role}", fail, _ctext, {"volts": v}))
        if pol[role].any():
            low = present & pol[role] & (np.abs(v) < 0.1)

            def _ptext(i, role=role, v=v):
                return (f"polarised {role} has only {_g(abs(v[i]))} V across it: no clear "
                        f"polarity; use a non-polarised capacitor")

            rules.append(_Rule("warning", f"polarity_{role}", low, _ptext))
    if band_edges and request.flat_passband:
        peak = np.where(np.isfinite(peak_db), peak_db, -np.inf)
        rules.append(_Rule("validity", "flat_passband", peak > FLAT_PASSBAND_DB,
                           lambda i: f"the gain rises {_g(peak_db[i], 2)} dB above its mid_hz "
                                     f"value inside the passband (limit {_g(FLAT_PASSBAND_DB)} dB)"))

    # --- targets -------------------------------------------------------------
    if request.gain is not None:
        tdb = 20.0 * math.log10(request.gain)
        tol = request.gain_tol_db
        fail = ~(np.abs(gain_db - tdb) <= tol)
        rules.append(_Rule("target", "gain", fail,
                           lambda i, tdb=tdb, tol=tol: f"gain_db {_g(gain_db[i])} outside {tdb:g} ± {tol:g}"))
    if band_edges and request.f_low_max_hz is not None:
        lim = request.f_low_max_hz
        fail = np.isfinite(f_low) & (f_low > lim)
        rules.append(_Rule("target", "f_low_hz", fail,
                           lambda i, lim=lim: f"f_low_hz {_g(f_low[i])} > {lim:g}"))
    if request.f_high_min_hz is not None:
        lim = request.f_high_min_hz
        if not has_fhigh:
            rules.append(_Rule("target", "f_high_hz", np.ones(n, bool),
                               lambda i, lim=lim: "transistor lacks ft/cob: f_high_hz cannot be "
                                                  f"computed for the target {lim:g}"))
        elif band_edges:
            fail = np.isfinite(f_high) & (f_high < lim)
            rules.append(_Rule("target", "f_high_hz", fail,
                               lambda i, lim=lim: f"f_high_hz {_g(f_high[i])} < {lim:g}"))
    if request.zin_min_ohm is not None:
        lim = request.zin_min_ohm
        z = metrics["zin_ohm"]
        rules.append(_Rule("target", "zin_ohm", ~(z >= lim),
                           lambda i, lim=lim: f"zin_ohm {_g(z[i])} < {lim:g}"))
    if getattr(request, "zout_max_ohm", None) is not None:
        lim = request.zout_max_ohm
        zo = metrics["zout_ohm"]
        rules.append(_Rule("target", "zout_ohm", ~(zo <= lim),
                           lambda i, lim=lim: f"zout_ohm {_g(zo[i])} > {lim:g}"))
    if request.ic_drift_max_pct is not None:
        lim = request.ic_drift_max_pct
        rules.append(_Rule("target", "ic_drift_pct", ~(drift <= lim),
                           lambda i, lim=lim: f"ic_drift_pct {_g(drift[i])} > {lim:g}"))
    if getattr(request, "ic_min_a", None) is not None:
        lim = request.ic_min_a
        ic_nom = metrics["ic_a"]
        rules.append(_Rule("target", "ic_a", ~(ic_nom >= lim),
                           lambda i, lim=lim: f"ic_a {_g(ic_nom[i])} < {lim:g}"))
    if large_signal and request.thd_max_pct is not None:
        rules.append(thd_rule(request, thd, thd_active))

    # --- warnings ------------------------------------------------------------
    r_th = batch.R1 * batch.R2 / (batch.R1 + batch.R2)
    b_lo = model.corner_betas[0]
    limit = DIVIDER_RULE * b_lo * batch.re_total
    rules.append(_Rule("warning", "divider_rule", r_th > limit,
                       lambda i: f"bias divider outside the 10:1 rule: R_TH {_si(r_th[i], 'Ω')} > "
                                 f"0.1·hFE_min·R_E = {_si(limit[i], 'Ω')}; I_C depends on hFE"))
    if large_signal:
        clip = np.isfinite(swing_emf) & (swing_emf < request.input_vpk)
        rules.append(_Rule("warning", "clipping", clip,
                           lambda i: f"an input of {_g(request.input_vpk)} V peak drives the "
                                     f"transistor out of the forward-active region (it stays "
                                     f"linear up to {_g(swing_emf[i])} V peak)"))

    valid, meets = verdicts(rules, n)
    extra = {"peak_db": peak_db, "swing_emf_vpk": swing_emf}
    return Evaluation(request=request, batch=batch, transistor=transistor, model=model, op=op,
                      metrics=metrics, valid=valid, meets=meets, corners=corners, plus=plus,
                      small=small, extra=extra, rules=rules)


def frequency_response_of(request: Request, batch: StageBatch, transistor: Transistor,
                          freqs) -> np.ndarray:
    """v_load / v_emf at ``freqs`` (Hz) at the nominal point: complex (nf, n), for plots."""
    model = device_from_transistor(transistor)
    op = operating_point(batch.topology, request.supply_v, batch, model)
    return ac.frequency_response(request, batch, model, op, freqs)


def design_of(ev: Evaluation, i: int, picks: dict | None = None, label: str | None = None):
    """Candidate ``i`` of ``ev`` as an :class:`optimiser.design.Design` (docs/json.md).

    ``picks`` maps role -> :class:`~optimiser.design.RolePick`; roles without a pick get
    one with the value alone (no stock pieces).  Capacitor picks get their ``plus`` side.
    """
    from dataclasses import replace as _replace

    from .design import Design, RolePick

    values = ev.batch.one(i)
    picks = dict(picks or {})
    parts = {}
    for role, v in values.items():
        p = picks.get(role)
        if p is None:
            try:
                from inventory.values import format_value
                lab = format_value(v, "resistor" if role in RESISTOR_ROLES else "capacitor")
            except Exception:
                lab = _g(v)
            p = RolePick(role, v, lab)
        if role in ev.plus:
            p = _replace(p, plus=str(ev.plus[role][i]))
        parts[role] = p
    corners = {k: np.asarray(v)[i].tolist() for k, v in ev.corners.items()}
    small = {k: float(np.asarray(v)[i]) for k, v in ev.small.items()}
    extra = {"drift": corners, "small_signal": small}
    return Design(
        topology=ev.batch.topology, transistor=label or ev.transistor.label, parts=parts,
        metrics=ev.metrics_of(i), meets_spec=bool(ev.meets[i]), violations=ev.violations(i),
        warnings=ev.warnings(i), form=stage_module(ev.batch.topology).form_of(values),
        extra=extra)
