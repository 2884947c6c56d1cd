"""The shared ngspice harness: netlists for stages, batch runs, result parsing.

ngspice (Debian's package, ``ngspice -b``) is the outside reference for the
engine's figures.  The device is the ``.model`` line of docs/model.md
(:func:`optimiser.device.spice_model_line`), simulated at
``.options TEMP=25 TNOM=25``.  Several designs go into ONE netlist as
independent copies (node names carry a ``_k`` suffix, all share ground), so a
batch of designs costs one ngspice process per analysis kind:

* :func:`run_op_ac`  — ``.op`` node voltages and I_C; the small-signal gain at
  mid_hz, Zin (current into C_IN through a 0 V ammeter), a log sweep of
  v_load/v_emf for the band edges; and Zout (second netlist: EMF zeroed, load
  removed, 1 A AC into the load side of C_OUT);
* :func:`run_quasi_static` — every capacitor replaced by a DC source at its
  ``.op`` voltage, a ``.dc`` sweep of the EMF; THD and swing are taken from
  the sampled transfer curve by :func:`thd_from_curve` and
  :func:`swing_from_curve`.

:func:`run_netlist_file` runs a netlist kept in the repository as it is and returns
the figures it prints.

:func:`require_ngspice` skips a test when ngspice is missing, and fails it
when ``CI=true``.
"""

from __future__ import annotations

import math
import os
import re
import shutil
import subprocess
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pytest

from optimiser.device import DeviceModel, spice_model_line

__all__ = [
    "require_ngspice",
    "SpiceDesign",
    "stage_netlist",
    "run_ngspice",
    "run_op_ac",
    "run_quasi_static",
    "thd_from_curve",
    "swing_from_curve",
    "edge_from_sweep",
    "run_netlist_file",
]

_OPTIONS = ".options TEMP=25 TNOM=25 RELTOL=1e-7 VNTOL=1e-10 ABSTOL=1e-16"
_NUM = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"


def require_ngspice() -> str:
    """Path of ngspice; skip the test without it (a failure when CI=true)."""
    path = shutil.which("ngspice")
    if path is None:
        if os.environ.get("CI") == "true":
            pytest.fail("ngspice is required under CI (CI=true) but is not installed")
        pytest.skip("ngspice not installed (apt-get install ngspice); reference check skipped")
    return path


@dataclass
class SpiceDesign:
    """One stage to simulate: topology, role values (ohm, farad; 0 = absent)."""

    topology: str
    values: dict[str, float]
    model: DeviceModel
    beta: float | None = None
    extra: dict = field(default_factory=dict)

    def v(self, role: str) -> float:
        return float(self.values.get(role, 0.0) or 0.0)


def _r(name, a, b, value, k):
    """A resistor, or a 0 V source where the value is 0 (a short)."""
    if value == 0:
        return f"V{name}_{k} {a} {b} dc 0"
    return f"R{name}_{k} {a} {b} {value:.12g}"


def _coupling(name, plus, minus, farad, mode, volts, k):
    """A coupling or bypass capacitor; in the quasi-static mode (``"qs"``) a DC source
    holding its quiescent voltage ``volts`` (plus minus minus) instead."""
    if mode == "qs":
        return f"V{name}_{k} {plus} {minus} dc {volts:.12g}"
    return f"{name}_{k} {plus} {minus} {farad:.12g}"


def stage_netlist(d: SpiceDesign, k: int, *, supply_v: float, source_ohm: float,
                  load_ohm: float | None, mode: str = "ac", op: dict | None = None,
                  emf_node: str = "emf") -> list[str]:
    """Netlist lines of design ``d`` as copy ``k``.

    mode ``"ac"``: EMF source shared (node ``emf``), load in place;
    ``"zout"``: source side grounded through R_S + C_IN, load removed, 1 A AC into
    the load node; ``"qs"``: capacitors replaced by DC sources at the voltages of
    ``op`` (from :func:`run_op_ac`), EMF shared for a ``.dc`` sweep.
    """
    t = d.topology
    s, sm, b, e, x, c, lo, vcc = (f"{n}_{k}" for n in ("s", "sm", "b", "e", "x", "c", "l", "vcc"))
    lines = [f"VCC_{k} {vcc} 0 dc {supply_v:.12g}"]
    src = emf_node if mode != "zout" else "0"
    lines.append(_r("S", src, s, source_ohm, k))
    lines.append(f"VM_{k} {s} {sm} dc 0")
    inp = e if t == "cb" else b
    out = e if t == "cc" else c
    lines.append(_coupling("CIN", inp, sm, d.v("C_IN"), mode, op and op["v_in_node"], k))
    lines.append(_r("1", vcc, b, d.v("R1"), k))
    lines.append(_r("2", b, "0", d.v("R2"), k))
    if t == "ce":
        lines.append(_r("C", vcc, c, d.v("RC"), k))
        lines.append(_r("E", e, x, d.v("RE"), k))
        lines.append(_r("EB", x, "0", d.v("RE_BYP"), k))
        if d.v("C_BYP") > 0 and d.v("RE_BYP") > 0:
            lines.append(_coupling("CBYP", x, "0", d.v("C_BYP"), mode, op and op["vx"], k))
    elif t == "cb":
        lines.append(_r("C", vcc, c, d.v("RC"), k))
        lines.append(_r("E", e, "0", d.v("RE"), k))
        lines.append(_coupling("CB", b, "0", d.v("C_B"), mode, op and op["vb"], k))
    else:
        lines.append(_r("C", vcc, c, d.v("RC"), k))
        lines.append(_r("E", e, "0", d.v("RE"), k))
    lines.append(_coupling("COUT", out, lo, d.v("C_OUT"), mode, op and op["v_out_node"], k))
    if load_ohm is not None and mode != "zout":
        lines.append(f"RL_{k} {lo} 0 {load_ohm:.12g}")
    else:
        lines.append(f"RL_{k} {lo} 0 1e15")
    if mode == "zout":
        lines.append(f"IZ_{k} 0 {lo} dc 0 ac 1")
    lines.append(f"VIC_{k} {c} cq_{k} dc 0")          # ammeter: collector current
    lines.append(f"Q1_{k} cq_{k} {b} {e} QM_{k}")
    lines.append(spice_model_line(d.model, f"QM_{k}", beta=d.beta))
    return lines


def run_ngspice(netlist: str, workdir: Path, name: str = "run") -> str:
    """Run ``ngspice -b`` on ``netlist``; return stdout (raises on failure)."""
    require_ngspice()
    path = workdir / f"{name}.cir"
    path.write_text(netlist)
    proc = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True,
                          timeout=600, cwd=workdir)
    if proc.returncode != 0 and "error" in (proc.stdout + proc.stderr).lower():
        raise RuntimeError(f"ngspice failed on {path}:\n{proc.stdout[-2000:]}\n{proc.stderr[-2000:]}")
    return proc.stdout


def run_netlist_file(path: Path, workdir: Path) -> dict[str, float]:
    """Run a netlist kept in the repository, unchanged, with ``ngspice -b``; return the
    ``name = value`` lines it prints (``print`` and ``meas`` results), names lower case."""
    path = Path(path)
    return _prints(run_ngspice(path.read_text(), Path(workdir), path.stem))


def _prints(out: str) -> dict[str, float]:
    vals = {}
    for m in re.finditer(rf"^\s*(\S+)\s*=\s*({_NUM})\s*$", out, re.M):
        vals[m[1].lower()] = float(m[2])
    return vals


def _read_wrdata(path: Path, ncols_complex: int):
    data = np.loadtxt(path, ndmin=2)
    f = data[:, 0]
    cols = []
    for j in range(ncols_complex):
        cols.append(data[:, 3 * j + 1] + 1j * data[:, 3 * j + 2])
    return f, np.array(cols)


def run_op_ac(designs: list[SpiceDesign], *, supply_v: float, source_ohm: float,
              load_ohm: float | None, mid_hz: float, sweep: tuple[float, float, int] | None =
              (1e-3, 100e9, 100), workdir: Path | None = None) -> list[dict]:
    """Operating point, midband gain, Zin, Zout and the swept response of each design.

    Returns one dict per design with keys ic, vb, ve, vc, vx, vce, v_in_node,
    v_out_node, gain (|v_load/v_emf| at mid_hz), zin, zout (ohm) and, with
    ``sweep`` = (f_start, f_stop, points per decade), ``freqs`` and ``h``.
    """
    tmp = Path(workdir or tempfile.mkdtemp(prefix="drawerfit-spice-"))
    body = ["* drawerfit reference batch", "VEMF emf 0 dc 0 ac 1"]
    for k, d in enumerate(designs):
        body += stage_netlist(d, k, supply_v=supply_v, source_ohm=source_ohm,
                              load_ohm=load_ohm, mode="ac")
    ctl = [_OPTIONS, ".control", "op"]
    for k, d in enumerate(designs):
        ctl.append(f"print @q1_{k}[ic] v(b_{k}) v(e_{k}) v(c_{k}) v(x_{k})"
                   if d.topology == "ce" else f"print @q1_{k}[ic] v(b_{k}) v(e_{k}) v(c_{k})")
    ctl.append(f"ac lin 1 {mid_hz:.12g} {mid_hz:.12g}")
    for k in range(len(designs)):
        ctl.append(f"let g_{k} = mag(v(l_{k}))")
        ctl.append(f"let zi_{k} = mag(v(s_{k})/i(vm_{k}))")
        ctl.append(f"print g_{k} zi_{k}")
    if sweep is not None:
        f0, f1, ppd = sweep
        ctl.append(f"ac dec {ppd} {f0:.6g} {f1:.6g}")
        for k in range(len(designs)):
            ctl.append(f"wrdata {tmp}/sweep_{k}.txt v(l_{k})")
    ctl += [".endc", ".end"]
    out = run_ngspice("\n".join(body + ctl) + "\n", tmp, "opac")
    vals = _prints(out)

    zbody = ["* drawerfit reference batch, output impedance", "VEMF emf 0 dc 0 ac 0"]
    for k, d in enumerate(designs):
        zbody += stage_netlist(d, k, supply_v=supply_v, source_ohm=source_ohm,
                               load_ohm=load_ohm, mode="zout")
    zctl = [_OPTIONS, ".control", f"ac lin 1 {mid_hz:.12g} {mid_hz:.12g}"]
    for k in range(len(designs)):
        zctl.append(f"let zo_{k} = mag(v(l_{k}))")
        zctl.append(f"print zo_{k}")
    zctl += [".endc", ".end"]
    zvals = _prints(run_ngspice("\n".join(zbody + zctl) + "\n", tmp, "zout"))

    res = []
    for k, d in enumerate(designs):
        r = {
            "ic": vals[f"@q1_{k}[ic]"], "vb": vals[f"v(b_{k})"], "ve": vals[f"v(e_{k})"],
            "vc": vals[f"v(c_{k})"], "vx": vals.get(f"v(x_{k})", 0.0),
            "gain": vals[f"g_{k}"], "zin": vals[f"zi_{k}"], "zout": zvals[f"zo_{k}"],
        }
        r["vce"] = r["vc"] - r["ve"]
        r["v_in_node"] = r["ve"] if d.topology == "cb" else r["vb"]
        r["v_out_node"] = r["ve"] if d.topology == "cc" else r["vc"]
        if sweep is not None:
            f, h = _read_wrdata(tmp / f"sweep_{k}.txt", 1)
            r["freqs"], r["h"] = f, h[0]
        res.append(r)
    return res


def edge_from_sweep(freqs, h, mid_hz: float, gain_mid: float, below: bool,
                    drop_db: float = 3.01) -> float:
    """First −drop_db crossing below (above) mid_hz by log interpolation; NaN if none."""
    mag = np.abs(h)
    thr = gain_mid * 10 ** (-drop_db / 20)
    lf = np.log(freqs)
    idx = np.nonzero(freqs < mid_hz)[0][::-1] if below else np.nonzero(freqs > mid_hz)[0]
    prev_f, prev_m = math.log(mid_hz), gain_mid
    for i in idx:
        if mag[i] < thr:
            t = (math.log(prev_m) - math.log(thr)) / (math.log(prev_m) - math.log(mag[i]))
            return float(math.exp(prev_f + t * (lf[i] - prev_f)))
        prev_f, prev_m = lf[i], mag[i]
    return float("nan")


def run_quasi_static(designs: list[SpiceDesign], ops: list[dict], *, supply_v: float,
                     source_ohm: float, load_ohm: float | None, amplitude: float,
                     points: int = 2001, workdir: Path | None = None) -> list[dict]:
    """``.dc`` sweep of the EMF from −amplitude to +amplitude with capacitors as DC sources.

    Returns per design: emf (V), v_load (V; AC part, the load side of C_OUT),
    vce (V) and ic (A), arrays over the sweep.
    """
    tmp = Path(workdir or tempfile.mkdtemp(prefix="drawerfit-spice-"))
    body = ["* drawerfit quasi-static batch", "VEMF emf 0 dc 0"]
    for k, d in enumerate(designs):
        body += stage_netlist(d, k, supply_v=supply_v, source_ohm=source_ohm,
                              load_ohm=load_ohm, mode="qs", op=ops[k])
    step = 2 * amplitude / (points - 1)
    ctl = [_OPTIONS, ".control",
           f"dc vemf {-amplitude:.12g} {amplitude + step / 2:.12g} {step:.12g}"]
    for k in range(len(designs)):
        ctl.append(f"wrdata {tmp}/qs_{k}.txt v(l_{k}) v(c_{k})-v(e_{k}) i(vic_{k})")
    ctl += [".endc", ".end"]
    run_ngspice("\n".join(body + ctl) + "\n", tmp, "qs")
    res = []
    for k in range(len(designs)):
        data = np.loadtxt(tmp / f"qs_{k}.txt", ndmin=2)
        res.append({"emf": data[:, 0], "v_load": data[:, 1], "vce": data[:, 3],
                    "ic": data[:, 5]})
    return res


def thd_from_curve(emf, v_load, amplitude: float, n: int = 256, harmonics=range(2, 10)) -> float:
    """THD (%) of the load voltage for a sine EMF of ``amplitude`` sampled from a swept curve."""
    from scipy.interpolate import CubicSpline

    spline = CubicSpline(emf, v_load)
    e = amplitude * np.sin(2 * np.pi * np.arange(n) / n)
    X = np.fft.rfft(spline(e))
    return float(100 * np.sqrt(np.sum(np.abs(X[list(harmonics)]) ** 2)) / np.abs(X[1]))


def swing_from_curve(emf, v_load, vce, ic, ic0: float, vce_sat: float,
                     ic_floor: float = 0.01) -> float:
    """Swing (V peak) as docs/model.md defines it, from a ``.dc`` sweep over ±supply;
    NaN if no limit."""
    ok = (vce >= vce_sat) & (ic >= ic_floor * ic0)
    pos = emf >= 0
    neg = emf <= 0

    margin = np.minimum(vce - vce_sat, (ic - ic_floor * ic0) / ic0)

    def first_fail(mask, order):
        e = emf[mask][order]
        m = margin[mask][order]
        bad = np.nonzero(~ok[mask][order])[0]
        if bad.size == 0:
            return math.inf
        j = bad[0]
        if j == 0:
            return 0.0
        t = m[j - 1] / (m[j - 1] - m[j])          # linear interpolation of the margin
        return float(abs(e[j - 1]) + t * abs(e[j] - e[j - 1]))

    a = min(first_fail(pos, np.argsort(emf[pos])), first_fail(neg, np.argsort(-emf[neg])))
    if not math.isfinite(a):
        return float("nan")
    vp = np.interp(a, emf, v_load)
    vn = np.interp(-a, emf, v_load)
    return float(min(max(vp, vn, 0.0), max(-vp, -vn, 0.0)))


@pytest.fixture
def ngspice() -> str:
    """Fixture form of :func:`require_ngspice` (import it into a test module to use it)."""
    return require_ngspice()
