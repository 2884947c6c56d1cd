# ruff: noqa: T201  (a benchmark script prints its figures)
"""Monte Carlo speed: 10^4 samples of one design (DC and midband AC) in one vectorised run.

    python benchmarks/yield.py [--samples N] [--loop M] [--pair-samples K]

Prints samples per second and the ratio to running the nominal engine once per sample
in a Python loop (M samples timed, measured in the same run).  Target:
10^4 samples in ≤ 0.1 s.  Then the same for a two-transistor circuit (the bench's
capacitor-coupled ce→cc, examples/bench/preamp-buffer.toml): K samples through
``monte_carlo_pair`` against ``evaluate_pair`` once per sample in a loop.
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
    ap.add_argument("--pair-samples", type=int, default=2000)
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
    pair(a.pair_samples, max(10, a.loop // 10))


def pair(samples: int, loop: int) -> None:
    """Two transistors: monte_carlo_pair against evaluate_pair once per sample."""
    from optimiser.circuit_file import load_circuit
    from optimiser.pair_evaluate import evaluate_pair
    from optimiser.yield_ import draw_pair, monte_carlo_pair

    c = load_circuit(Path(__file__).resolve().parents[1] / "examples" / "bench" /
                     "preamp-buffer.toml")
    monte_carlo_pair(c.request, c.form, c.values, c.transistors, c.tolerances, samples=50)
    t0 = time.perf_counter()
    res = monte_carlo_pair(c.request, c.form, c.values, c.transistors, c.tolerances,
                           samples=samples, seed=0)
    dt = time.perf_counter() - t0
    rate = samples / dt
    print(f"two transistors (ce→cc chain; DC, midband AC, f_low, THD): {samples} samples in "
          f"{dt:.2f} s = {rate:,.0f} /s (yield {res.yield_pct:.1f} %)")
    batch, betas, temps = draw_pair(c.form, c.values, c.transistors, c.tolerances,
                                    c.request.temp_c, loop, 0)
    t0 = time.perf_counter()
    for i in range(loop):
        evaluate_pair(c.request, batch.take([i]), c.transistors, large_signal="thd",
                      temp_c=float(temps[i]), betas=(float(betas[0][i]), float(betas[1][i])))
    per = (time.perf_counter() - t0) / loop
    print(f"evaluate_pair once per sample in a Python loop: {1 / per:,.0f} samples/s; "
          f"vectorised is {rate * per:.0f}x faster")


if __name__ == "__main__":
    main()
