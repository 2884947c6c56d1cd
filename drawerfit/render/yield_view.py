"""Terminal view of a Monte Carlo yield: the figure, the most frequent miss, a gain histogram."""

from __future__ import annotations

import numpy as np
from rich.table import Table

from drawerfit.console import out as _out

__all__ = ["show_yield", "gain_histogram"]

_BAR = "█"


def gain_histogram(gain_db: np.ndarray, bins: int = 12, width: int = 40) -> list[str]:
    """Text histogram lines of gain in dB."""
    x = gain_db[np.isfinite(gain_db)]
    if x.size == 0:
        return []
    counts, edges = np.histogram(x, bins=bins)
    top = max(int(counts.max()), 1)
    return [f"{edges[i]:7.2f}–{edges[i + 1]:<7.2f} dB {_BAR * int(round(width * c / top)):<{width}} {c}"
            for i, c in enumerate(counts)]


def show_yield(res, console=None) -> None:
    """Print a Monte Carlo yield: failing checks, the figure, spreads and a gain histogram."""
    out = console or _out
    t = Table(title=f"Yield over {res.n} samples (seed {res.seed})", header_style="bold")
    t.add_column("check")
    t.add_column("samples failing", justify="right")
    for k, v in sorted(res.fail_share.items(), key=lambda kv: -kv[1]):
        t.add_row(k, f"{100 * v:.1f} %")
    out.print(t)
    worst = res.most_frequent_failure
    out.print(f"[bold]yield {res.yield_pct:.1f} %[/bold]"
              + (f"; most frequent miss: {worst}" if worst else ""))
    p = res.percentiles
    if "gain_db" in p:
        # one transistor: ic_a, vce_v; two: S1.ic_a, S1.vce_v, S2.ic_a, S2.vce_v
        parts = [f"gain 5–95 %: {p['gain_db'][0]:.2f} to {p['gain_db'][1]:.2f} dB"]
        for pre in ("", "S1.", "S2."):
            if pre + "ic_a" in p and pre + "vce_v" in p:
                ic, vce = p[pre + "ic_a"], p[pre + "vce_v"]
                who = f"{pre[:-1]} " if pre else ""
                parts.append(f"{who}I_C {1e3 * ic[0]:.3g} to {1e3 * ic[1]:.3g} mA; "
                             f"{who}V_CE {vce[0]:.3g} to {vce[1]:.3g} V")
        out.print("; ".join(parts))
    for line in gain_histogram(res.samples["gain_db"]):
        out.print(line)
