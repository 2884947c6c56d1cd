# ruff: noqa: T201  (a benchmark script prints its figures)
"""Engine speed: DC operating points, AC response, and ngspice per design, in one run.

    python benchmarks/engine.py [--dc N] [--ac N] [--spice N]

Prints designs per second for (1) operating points of N plausible bias networks
(E12 values), (2) the AC response of N designs at 200 frequencies (operating point
and small-signal parameters included), (3) ngspice (``ngspice -b``) running one
``.op`` plus a 100-point ``.ac`` per design, one process per design as a user would,
and also N designs as copies in one netlist.  Ratios are against ngspice measured in
the same run.  Targets: DC ≥ 5·10^5 networks/s; AC ≥ 20× faster per design
than ngspice.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from inventory.parts import Transistor  # noqa: E402
from optimiser import ac  # noqa: E402
from optimiser.dc import forward_active_ic, operating_point, solve_bias, thevenin  # noqa: E402
from optimiser.device import device_from_transistor, spice_model_line  # noqa: E402
from optimiser.request import Request  # noqa: E402
from optimiser.stage import StageBatch  # noqa: E402

E12 = np.array([10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82]) / 10.0
T = Transistor("GP-N1", hfe_min=100, hfe_max=300, vaf=100, ft=250e6, cob=4e-12)


def e12(rng, lo_dec, hi_dec, n):
    return E12[rng.integers(0, 12, n)] * 10.0 ** rng.integers(lo_dec, hi_dec, n)


def networks(n, seed=0):
    rng = np.random.default_rng(seed)
    r2 = e12(rng, 3, 5, n)
    r1 = e12(rng, 3, 6, n)
    re = e12(rng, 2, 4, n)
    rc = e12(rng, 2, 5, n)
    return r1, r2, re, rc


def bench_dc(n):
    m = device_from_transistor(T)
    r1, r2, re, rc = networks(n)
    v, r = thevenin(12.0, r1, r2)
    solve_bias(v[:1000], r[:1000], re[:1000], rc[:1000], 12.0, m)    # warm up
    t0 = time.perf_counter()
    op = solve_bias(v, r, re, rc, 12.0, m)
    dt = time.perf_counter() - t0
    fa = (~op.saturated & ~op.cutoff).mean()
    t0 = time.perf_counter()
    forward_active_ic(v, r, re, m)
    dt_fast = time.perf_counter() - t0
    return n / dt, dt, fa, n / dt_fast


def ac_batch(n, seed=1):
    rng = np.random.default_rng(seed)
    b = StageBatch.from_values(
        "ce", R1=e12(rng, 4, 5, n), R2=e12(rng, 3, 4, n) * 2, RC=e12(rng, 3, 4, n),
        RE=e12(rng, 1, 2, n), RE_BYP=e12(rng, 2, 3, n), C_BYP=47e-6, C_IN=1e-6, C_OUT=1e-6)
    return Request("ce", 12.0, load_ohm=10e3, source_ohm=600.0), b


def bench_ac(n, nf=200):
    m = device_from_transistor(T)
    req, b = ac_batch(n)
    f = np.logspace(0, 9, nf)
    t0 = time.perf_counter()
    op = operating_point("ce", req.supply_v, b, m)
    H = ac.frequency_response(req, b, m, op, f)
    dt = time.perf_counter() - t0
    assert H.shape == (nf, n)
    return n / dt, dt


def spice_netlist(vals, model_line, copies=1):
    lines = ["* one design"]
    for k in range(copies):
        v = vals[k]
        lines += [f"VCC{k} vcc{k} 0 12", f"VS{k} s{k} 0 dc 0 ac 1", f"RS{k} s{k} sb{k} 600",
                  f"CIN{k} sb{k} b{k} 1u", f"R1{k} vcc{k} b{k} {v['R1']}", f"R2{k} b{k} 0 {v['R2']}",
                  f"RC{k} vcc{k} c{k} {v['RC']}", f"RE{k} e{k} x{k} {v['RE']}",
                  f"REB{k} x{k} 0 {v['RE_BYP']}", f"CB{k} x{k} 0 47u", f"CO{k} c{k} l{k} 1u",
                  f"RL{k} l{k} 0 10k", f"Q{k} c{k} b{k} e{k} QX"]
    lines += [model_line, ".options TEMP=25 TNOM=25", ".control", "op", "ac dec 11 1 1e9",
              ".endc", ".end"]
    return "\n".join(lines) + "\n"


def bench_spice(n):
    if shutil.which("ngspice") is None:
        return None
    m = device_from_transistor(T)
    _, b = ac_batch(n, seed=2)
    vals = [b.one(i) | {"RE": b.RE[i]} for i in range(n)]
    line = spice_model_line(m, "QX")
    tmp = Path(tempfile.mkdtemp(prefix="drawerfit-bench-"))
    paths = []
    for i in range(n):
        p = tmp / f"d{i}.cir"
        p.write_text(spice_netlist(vals[i:i + 1], line))    # ac dec 11 over 9 decades ≈ 100 pts
        paths.append(p)
    t0 = time.perf_counter()
    for p in paths:
        subprocess.run(["ngspice", "-b", str(p)], capture_output=True)
    per_process = (time.perf_counter() - t0) / n
    big = tmp / "all.cir"
    big.write_text(spice_netlist(vals, line, copies=n))
    t0 = time.perf_counter()
    subprocess.run(["ngspice", "-b", str(big)], capture_output=True)
    per_copy = (time.perf_counter() - t0) / n
    shutil.rmtree(tmp, ignore_errors=True)
    return per_process, per_copy


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--dc", type=int, default=1_000_000)
    ap.add_argument("--ac", type=int, default=1000)
    ap.add_argument("--spice", type=int, default=40)
    a = ap.parse_args(argv)

    rate_dc, t_dc, fa, rate_fast = bench_dc(a.dc)
    print(f"DC operating points : {a.dc:>9d} networks in {t_dc:6.2f} s = {rate_dc:12,.0f} /s "
          f"({100 * fa:.0f} % forward-active)   target 500,000 /s -> {rate_dc / 5e5:5.2f}x target")
    print(f"  pruning path (forward_active_ic, base loop in closed form): {rate_fast:12,.0f} /s "
          f"-> {rate_fast / 5e5:5.2f}x target")
    rate_ac, t_ac = bench_ac(a.ac)
    print(f"AC, 200 frequencies : {a.ac:>9d} designs  in {t_ac:6.2f} s = {rate_ac:12,.0f} /s "
          f"({1e3 / rate_ac:.3f} ms per design)")
    sp = bench_spice(a.spice)
    if sp is None:
        print("ngspice             : not installed, no ratio")
        return
    per_process, per_copy = sp
    print(f"ngspice .op + 100-pt .ac: {1e3 * per_process:7.2f} ms per design (one process each), "
          f"{1e3 * per_copy:6.2f} ms per design ({a.spice} copies in one netlist)")
    print(f"ratio AC engine vs ngspice per design: {per_process * rate_ac:7.1f}x "
          f"(one process each), {per_copy * rate_ac:6.1f}x (copies in one netlist); target 20x")


if __name__ == "__main__":
    main()
