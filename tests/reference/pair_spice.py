"""ngspice decks for two-transistor circuits, written out by hand for each form (not from
the engine's own description of the forms, so that a wiring mistake there shows).

Like :mod:`.spice`: several circuits go into one deck as copies (node names carry a
``_k`` suffix); :func:`op_ac_deck` and :func:`zout_deck` write the operating-point/AC and
output-impedance decks of a batch; :func:`qs_deck` the quasi-static ``.dc`` sweeps,
once ngspice's operating point is known (:func:`parse_op_ac`).
"""

from __future__ import annotations

import numpy as np

from optimiser.device import spice_model_line

from .spice import _OPTIONS, _prints, run_ngspice

__all__ = ["circuit_lines", "op_ac_deck", "zout_deck", "qs_deck", "parse_op_ac"]


def _r(name, a, b, value, k):
    if value == 0:
        return f"V{name}_{k} {a} {b} dc 0"
    return f"R{name}_{k} {a} {b} {value:.12g}"


def circuit_lines(form: str, v: dict, k: int, model, *, supply_v, source_ohm, load_ohm,
                  mode="ac", op=None, emf_scale=1.0):
    """Netlist lines of circuit ``k`` (role values ``v``) of ``form`` ("ce-cc", "ce-ce",
    "cb-cc", "direct", "cascode").  Returns (lines, caps, devices): caps as
    (name, plus node, minus node), devices as (collector, base, emitter, ammeter).  In the
    quasi-static mode (``"qs"``) the copy's EMF is the shared sweep times ``emf_scale``."""
    g = lambda role: float(v.get(role, 0.0) or 0.0)  # noqa: E731
    n = lambda name: f"{name}_{k}"  # noqa: E731
    lines = [f"VCC_{k} {n('vcc')} 0 dc {supply_v:.12g}"]
    caps, devs = [], []

    def cap(name, a, b, farad):
        if farad <= 0:
            return
        caps.append((name, a, b))
        if mode == "qs":
            va = op[f"v({a.lower()})"]
            vb = 0.0 if b == "0" else op[f"v({b.lower()})"]
            lines.append(f"V{name}_{k} {a} {b} dc {va - vb:.12g}")
        else:
            lines.append(f"{name}_{k} {a} {b} {farad:.12g}")

    def transistor(tag, c, b, e):
        lines.append(f"VI{tag}_{k} {c} {n('cq' + tag)} dc 0")
        lines.append(f"Q{tag}_{k} {n('cq' + tag)} {b} {e} QM_{k}")
        devs.append((c, b, e, f"vi{tag}_{k}"))

    def stage(kind, p):
        """One divider-biased stage with prefix p; returns (input node, output node)."""
        b, e, x, c = (n(f"{p}{s}") for s in ("b", "e", "x", "c"))
        lines.append(_r(f"{p}1", n("vcc"), b, g(f"{p}.R1"), k))
        lines.append(_r(f"{p}2", b, "0", g(f"{p}.R2"), k))
        lines.append(_r(f"{p}C", n("vcc"), c, g(f"{p}.RC"), k))
        if kind == "ce":
            lines.append(_r(f"{p}E", e, x, g(f"{p}.RE"), k))
            lines.append(_r(f"{p}EB", x, "0", g(f"{p}.RE_BYP"), k))
            if g(f"{p}.RE_BYP") > 0:
                cap(f"C{p}BYP", x, "0", g(f"{p}.C_BYP"))
        else:
            lines.append(_r(f"{p}E", e, "0", g(f"{p}.RE") + g(f"{p}.RE_BYP"), k))
        if kind == "cb":
            cap(f"C{p}B", b, "0", g(f"{p}.C_B"))
        transistor(p, c, b, e)
        return (e if kind == "cb" else b), (e if kind == "cc" else c)

    src = "emf" if mode == "ac" else "0"
    if mode == "qs":
        src = n("emf")
        lines.append(f"EEMF_{k} {src} 0 emf 0 {emf_scale:.12g}")
    lines.append(_r("S", src, n("s"), source_ohm, k))
    lines.append(f"VM_{k} {n('s')} {n('sm')} dc 0")
    if form in ("ce-cc", "ce-ce", "cb-cc"):
        first, second = form.split("-")
        in1, out1 = stage(first, "S1")
        in2, out2 = stage(second, "S2")
        cap("CIN", in1, n("sm"), g("S1.C_IN"))
        cap("CCOUPLE", out1, in2, g("C_COUPLE"))
        out = out2
        cout = g("S2.C_OUT")
    elif form == "direct":
        in1, out1 = stage("ce", "S1")
        e2, c2 = n("S2e"), n("S2c")
        lines.append(_r("S2C", n("vcc"), c2, g("S2.RC"), k))
        lines.append(_r("S2E", e2, "0", g("S2.RE"), k))
        transistor("S2", c2, out1, e2)
        cap("CIN", in1, n("sm"), g("S1.C_IN"))
        out, cout = e2, g("S2.C_OUT")
    else:   # cascode
        b1, e1, x1, mid, b2, c2 = (n(s) for s in ("b1", "e1", "x1", "m", "b2", "c2"))
        lines.append(_r("1", n("vcc"), b2, g("R1"), k))
        lines.append(_r("2", b2, b1, g("R2"), k))
        lines.append(_r("3", b1, "0", g("R3"), k))
        cap("CB", b2, "0", g("C_B"))
        lines.append(_r("C", n("vcc"), c2, g("RC"), k))
        lines.append(_r("E", e1, x1, g("RE"), k))
        lines.append(_r("EB", x1, "0", g("RE_BYP"), k))
        if g("RE_BYP") > 0:
            cap("CBYP", x1, "0", g("C_BYP"))
        transistor("L", mid, b1, e1)
        transistor("U", c2, b2, mid)
        cap("CIN", b1, n("sm"), g("C_IN"))
        out, cout = c2, g("C_OUT")
    cap("COUT", out, n("l"), cout)
    if load_ohm is not None and mode != "zout":
        lines.append(f"RL_{k} {n('l')} 0 {load_ohm:.12g}")
    else:
        lines.append(f"RL_{k} {n('l')} 0 1e15")
    if mode == "zout":
        lines.append(f"IZ_{k} 0 {n('l')} dc 0 ac 1")
    lines.append(spice_model_line(model, f"QM_{k}"))
    return lines, caps, devs


def _all_nodes(lines):
    nodes = set()
    for ln in lines:
        parts = ln.split()
        if parts and parts[0][0].upper() in "RVCQI" and not ln.startswith("."):
            for p in parts[1:3]:
                if p != "0" and not p.startswith("cq"):
                    nodes.add(p)
    return sorted(nodes)


def op_ac_deck(form, circuits, model, *, supply_v, source_ohm, load_ohm, mid_hz, sweep_dir):
    """The operating-point and AC deck of every circuit (a ``wrdata`` sweep per copy into
    ``sweep_dir``, relative to the directory ngspice runs in)."""
    body = [f"* drawerfit two-transistor reference: {form}, operating point and AC",
            "VEMF emf 0 dc 0 ac 1"]
    ctl = [_OPTIONS, ".control", "op"]
    for k, v in enumerate(circuits):
        lines, _, devs = circuit_lines(form, v, k, model, supply_v=supply_v,
                                       source_ohm=source_ohm, load_ohm=load_ohm)
        body += lines
        ctl.append("print " + " ".join(f"v({x})" for x in _all_nodes(lines)))
        ctl.append("print " + " ".join(f"i({d[3]})" for d in devs))
    ctl.append(f"ac lin 1 {mid_hz:.12g} {mid_hz:.12g}")
    for k in range(len(circuits)):
        ctl += [f"let g_{k} = mag(v(l_{k}))", f"let zi_{k} = mag(v(s_{k})/i(vm_{k}))",
                f"print g_{k} zi_{k}"]
    ctl.append("ac dec 100 1e-3 1e11")
    for k in range(len(circuits)):
        ctl.append(f"wrdata {sweep_dir}/sweep_{k}.txt v(l_{k})")
    return "\n".join(body + ctl + [".endc", ".end"]) + "\n"


def zout_deck(form, circuits, model, *, supply_v, source_ohm, load_ohm, mid_hz):
    body = [f"* drawerfit two-transistor reference: {form}, output impedance",
            "VEMF emf 0 dc 0 ac 0"]
    for k, v in enumerate(circuits):
        body += circuit_lines(form, v, k, model, supply_v=supply_v, source_ohm=source_ohm,
                              load_ohm=load_ohm, mode="zout")[0]
    ctl = [_OPTIONS, ".control", f"ac lin 1 {mid_hz:.12g} {mid_hz:.12g}"]
    for k in range(len(circuits)):
        ctl += [f"let zo_{k} = mag(v(l_{k}))", f"print zo_{k}"]
    return "\n".join(body + ctl + [".endc", ".end"]) + "\n"


def qs_deck(form, circuits, model, ops, *, supply_v, source_ohm, load_ohm, amplitudes,
            points, out_dir, tag, numbers=None):
    """Every capacitor a DC source at its ngspice operating-point voltage; a ``.dc``
    sweep of each copy's EMF over ±its amplitude (the shared sweep runs over ±1 and
    each copy scales it); load voltage, V_CE and I_C of each transistor."""
    body = [f"* drawerfit two-transistor reference: {form}, quasi-static", "VEMF emf 0 dc 0"]
    ctl = [_OPTIONS, ".control"]
    step = 2.0 / (points - 1)
    numbers = range(len(circuits)) if numbers is None else numbers
    cols = []
    for j, (k, v) in enumerate(zip(numbers, circuits, strict=True)):
        lines, _, devs = circuit_lines(form, v, k, model, supply_v=supply_v,
                                       source_ohm=source_ohm, load_ohm=load_ohm, mode="qs",
                                       op=ops[j], emf_scale=amplitudes[j])
        body += lines
        cols.append((k, [f"v(l_{k})"] + [f"v({c})-v({e}) i({am})" for c, b, e, am in devs]))
    # outward from the operating point on each side: the continuation starts where the
    # circuit is easy and follows it into the hard-driven ends
    for side, stop, st in (("p", 1.0, step), ("n", -1.0, -step)):
        ctl.append(f"dc vemf 0 {stop + st / 2:.12g} {st:.12g}")
        for k, c in cols:
            ctl.append(f"wrdata {out_dir}/{tag}_{k}{side}.txt " + " ".join(c))
    return "\n".join(body + ctl + [".endc", ".end"]) + "\n"


def parse_op_ac(out: str, n: int, form: str, circuits, model, **kw):
    """Per circuit: node voltages (``v(name)``), I_C of each transistor, gain and Zin."""
    vals = _prints(out)
    res = []
    for k, v in enumerate(circuits):
        _, caps, devs = circuit_lines(form, v, k, model, **kw)
        r = {key: val for key, val in vals.items() if key.startswith("v(") and
             key.endswith(f"_{k})")}
        r["ic"] = [vals.get(f"i({d[3].lower()})", vals.get(f"{d[3].lower()}#branch")) for d in devs]
        r["vce"] = [vals[f"v({d[0].lower()})"] - vals[f"v({d[2].lower()})"] for d in devs]
        r["gain"] = vals[f"g_{k}"]
        r["zin"] = vals[f"zi_{k}"]
        r["v(0)"] = 0.0
        res.append(r)
    del n
    return res


def run_deck(text: str, workdir, name: str) -> str:
    return run_ngspice(text, workdir, name)


def read_sweep(path):
    data = np.loadtxt(path, ndmin=2)
    return data[:, 0], data[:, 1] + 1j * data[:, 2]
