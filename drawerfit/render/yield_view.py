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
        out.print(f"gain 5–95 %: {p['gain_db'][0]:.2f} to {p['gain_db'][1]:.2f} dB; "
                  f"I_C {1e3 * p['ic_a'][0]:.3g} to {1e3 * p['ic_a'][1]:.3g} mA; "
                  f"V_CE {p['vce_v'][0]:.3g} to {p['vce_v'][1]:.3g} V")
    for line in gain_histogram(res.samples["gain_db"]):
        out.print(line)
