# ruff: noqa: T201  (a benchmark script prints its figures)
"""Monte Carlo speed: 10^4 samples of one design (DC and midband AC) in one vectorised run.

    python benchmarks/yield.py [--samples N] [--loop M]

Prints samples per second and the ratio to running the nominal engine once per sample
in a Python loop (M samples timed, measured in the same run).  Target:
10^4 samples in ≤ 0.1 s.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from inventory.parts import Transistor  # noqa: E402
from optimiser.evaluate import evaluate  # noqa: E402
from optimiser.request import Request  # noqa: E402
from optimiser.yield_ import draw, monte_carlo  # noqa: E402

T = Transistor("GP-N1", hfe_min=100, hfe_max=300, vaf=100, ft=250e6, cob=4e-12)
VALUES = dict(R1=47e3, R2=10e3, RC=4.7e3, RE=220, RE_BYP=820, C_BYP=47e-6, C_IN=1e-6,
              C_OUT=1e-6)
REQ = Request("ce", 12.0, load_ohm=10e3, source_ohm=600, gain=12.0, temp_c=(0, 50),
              min_yield_pct=90)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=10_000)
    ap.add_argument("--loop", type=int, default=200)
    a = ap.parse_args(argv)
    monte_carlo(REQ, VALUES, T, None, samples=100, seed=0)       # warm up
    t0 = time.perf_counter()
    res = monte_carlo(REQ, VALUES, T, None, samples=a.samples, seed=0)
    dt = time.perf_counter() - t0
    rate = a.samples / dt
    print(f"Monte Carlo, DC + midband AC: {a.samples} samples in {dt:.3f} s = {rate:,.0f} /s "
          f"(yield {res.yield_pct:.1f} %); target 10^4 in 0.1 s -> {0.1 / (dt * 1e4 / a.samples):.2f}x")
    batch, beta, temps = draw("ce", VALUES, T, None, REQ.temp_c, a.loop, seed=0)
    t0 = time.perf_counter()
    for i in range(a.loop):
        one = batch.take([i])
        evaluate(REQ, one, T, band_edges=False, large_signal=False, corner_gain=False)
    per = (time.perf_counter() - t0) / a.loop
    print(f"nominal engine once per sample in a Python loop: {1 / per:,.0f} samples/s; "
          f"vectorised is {rate * per:.0f}x faster")


if __name__ == "__main__":
    main()
