# ruff: noqa: T201  (a benchmark script prints its figures)
"""Two-transistor engine speed: chains and the cascode against ngspice, in one run.

    python benchmarks/pairs.py [--n N] [--spice N]

For each bench example with two transistors (examples/bench/preamp-buffer.toml, its
direct-coupled form, examples/bench/cascode-check.toml), N circuits with every value
jittered ±10 % are evaluated (1) with DC, midband and drift only, (2) with every
figure (band edges, THD, swing); ngspice (``ngspice -b``) runs the exported deck's
``.op`` plus a 100-point ``.ac`` for ``--spice`` of them, one process each.  Ratios
are against ngspice measured in the same run.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from optimiser.circuit_file import load_circuit  # noqa: E402
from optimiser.pair_evaluate import evaluate_pair  # noqa: E402
from optimiser.spice_netlist import pair_spice_netlist  # noqa: E402
from optimiser.stages import pair_form  # noqa: E402
from optimiser.stages.pair import PairBatch  # noqa: E402


def circuits():
    chain = load_circuit(ROOT / "examples/bench/preamp-buffer.toml")
    direct_vals = {k: v for k, v in chain.values.items()
                   if k not in ("C_COUPLE", "S2.R1", "S2.R2")}
    direct = replace(chain, request=replace(chain.request, coupling="direct"),
                     form=pair_form(("ce", "cc"), "direct"), values=direct_vals)
    cascode = load_circuit(ROOT / "examples/bench/cascode-check.toml")
    return {"ce→cc": chain, "direct ce→cc": direct, "cascode": cascode}


def jittered(c, n, seed=0):
    rng = np.random.default_rng(seed)
    vals = {k: v * rng.uniform(0.9, 1.1, n) for k, v in c.values.items()}
    return PairBatch.from_values(c.form, **vals)


def spice_time(c, batch, count):
    if shutil.which("ngspice") is None:
        return None
    tmp = Path(tempfile.mkdtemp(prefix="drawerfit-bench-"))
    t0 = time.perf_counter()
    for i in range(count):
        deck = pair_spice_netlist(replace(c, values=batch.one(i)), c.transistors)
        path = tmp / f"c{i}.cir"
        path.write_text(deck.replace(".ac dec 20 1m 100G", ".ac dec 10 1 100Meg"))
        subprocess.run(["ngspice", "-b", str(path)], capture_output=True, cwd=tmp, check=False)
    return (time.perf_counter() - t0) / count


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=200)
    ap.add_argument("--spice", type=int, default=20)
    a = ap.parse_args()
    for name, c in circuits().items():
        b = jittered(c, a.n)
        evaluate_pair(c.request, b.take(np.arange(2)), c.transistors)        # warm up
        t0 = time.perf_counter()
        evaluate_pair(c.request, b, c.transistors, band_edges=False, large_signal=False)
        t_dc = (time.perf_counter() - t0) / a.n
        t0 = time.perf_counter()
        evaluate_pair(c.request, b, c.transistors)
        t_all = (time.perf_counter() - t0) / a.n
        sp = spice_time(c, b, a.spice)
        line = (f"{name:14s} DC+midband+drift {t_dc * 1e3:7.3f} ms, every figure "
                f"{t_all * 1e3:7.3f} ms per circuit")
        if sp is not None:
            line += (f"; ngspice .op + .ac {sp * 1e3:6.2f} ms -> DC+midband {sp / t_dc:5.1f}x, "
                     f"every figure {sp / t_all:5.2f}x")
        print(line)


if __name__ == "__main__":
    main()
