"""Terminal view of a search result: ranked designs, or the nearest misses and unlocks."""

from __future__ import annotations

import math

from rich.console import Console
from rich.table import Table

from inventory.values import format_si
from optimiser.design import Design

__all__ = ["show_result", "why_first", "parts_cell", "assumed_line", "limit_lines", "summary_line"]

_TERM_WORDS = {"gain": "distance to the gain target", "drift": "bias drift",
               "distortion": "junction distortion (HD2)", "current": "supply current",
               "stock": "stock left in the bins", "headroom": "headroom of the quiescent point"}


def _si(x, unit: str) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "—"
    return format_si(x, unit)


def _num(x, fmt: str) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "—"
    return fmt.format(x)


def parts_cell(d: Design) -> str:
    """One line per role: value, bin location(s), joined pairs and polarity."""
    lines = []
    for role, p in d.parts.items():
        locs = ", ".join(f"{x.location or '?'}×{x.count}" if x.count > 1 else (x.location or "?")
                         for x in p.pieces)
        extra = f" {p.joined}" if p.joined else ""
        if p.plus:
            extra += f" +{p.plus[:4]}"
        lines.append(f"{role} {p.label}{extra} [dim]@{locs}[/dim]")
    if d.extra.get("transistor_pick"):
        loc = d.extra["transistor_pick"].get("location") or "?"
        lines.append(f"Q {d.transistor} [dim]@{loc}[/dim]")
    return "\n".join(lines)


def _table(designs: list[Design], title: str, misses: bool = False) -> Table:
    t = Table(title=title, show_lines=True, title_justify="left")
    t.add_column("#", justify="right")
    t.add_column("parts @ bin", no_wrap=True)
    t.add_column("gain dB", justify="right")
    t.add_column("f_low", justify="right")
    t.add_column("f_high", justify="right")
    t.add_column("I_C", justify="right")
    t.add_column("V_CE", justify="right")
    t.add_column("drift", justify="right")
    t.add_column("THD", justify="right")
    t.add_column("swing", justify="right")
    t.add_column("why not" if misses else "score", justify="left" if misses else "right")
    for d in designs:
        m = d.metrics
        last = "\n".join(d.violations) if misses else _num(d.score, "{:.3f}")
        t.add_row(str(d.rank or ""), parts_cell(d), _num(m.get("gain_db"), "{:.2f}"),
                  _si(m.get("f_low_hz"), "Hz"), _si(m.get("f_high_hz"), "Hz"),
                  _si(m.get("ic_a"), "A"), _si(m.get("vce_v"), "V"),
                  _num(m.get("ic_drift_pct"), "{:.2f} %"), _num(m.get("thd_pct"), "{:.3g} %"),
                  _si(m.get("swing_vpk"), "V"), last)
    return t


def why_first(a: Design, b: Design) -> str:
    """One line: why ``a`` ranks above ``b`` (the score term that separates them most)."""
    ta, tb = a.extra.get("score_terms", {}), b.extra.get("score_terms", {})
    if not ta or not tb:
        return f"#1 scores {a.score:.3f} against {b.score:.3f}."
    key = max(ta, key=lambda k: tb.get(k, 0.0) - ta.get(k, 0.0))
    ma, mb = a.metrics, b.metrics
    detail = {
        "gain": lambda: f"gain with capacitors shorted {ma.get('gain_inf_db', 0):.2f} dB vs "
                        f"{mb.get('gain_inf_db', 0):.2f} dB",
        "drift": lambda: f"drift {ma.get('ic_drift_pct', 0):.2f} % vs {mb.get('ic_drift_pct', 0):.2f} %",
        "distortion": lambda: f"HD2 {ma.get('hd2_pct', 0):.3g} % vs {mb.get('hd2_pct', 0):.3g} %",
        "current": lambda: f"supply current {_si(ma.get('supply_a'), 'A')} vs "
                           f"{_si(mb.get('supply_a'), 'A')}",
        "stock": lambda: "it leaves more pieces in the bins",
        "headroom": lambda: f"V_CE {_si(ma.get('vce_v'), 'V')} vs {_si(mb.get('vce_v'), 'V')}",
    }.get(key, lambda: f"its {key} term")()
    if tb.get(key, 0.0) - ta.get(key, 0.0) <= 0:
        return f"#1 and #2 are all but equal (score {a.score:.3f} vs {b.score:.3f})."
    return (f"#1 beats #2 on {_TERM_WORDS.get(key, key)}: {detail} "
            f"(score {a.score:.3f} vs {b.score:.3f}).")


def _op_line(d: Design) -> str:
    m = d.metrics
    form = f", {d.form}" if d.form else ""
    return (f"#1 ({d.topology}{form}, {d.transistor}) operating point: "
            f"V_B {_si(m.get('vb_v'), 'V')}, V_E {_si(m.get('ve_v'), 'V')}, "
            f"V_C {_si(m.get('vc_v'), 'V')}, V_BE {_si(m.get('vbe_v'), 'V')}, "
            f"I_C {_si(m.get('ic_a'), 'A')}, V_CE {_si(m.get('vce_v'), 'V')}, "
            f"P_Q {_si(m.get('pd_q_w'), 'W')}; Z_in {_si(m.get('zin_ohm'), 'Ω')}, "
            f"Z_out {_si(m.get('zout_ohm'), 'Ω')}")


def show_result(console: Console, result, cautions_for=None) -> None:
    """Print a :class:`~optimiser.search.SearchResult` as tables and lines."""
    req = result.request
    if result.feasible:
        console.print(_table(result.designs, f"{len(result.designs)} design(s) from your drawer, "
                                             f"best first ({req.topology}, {req.supply_v:g} V)"))
        first = result.designs[0]
        console.print(_op_line(first))
        if len(result.designs) > 1:
            console.print(why_first(first, result.designs[1]))
        for w in first.warnings:
            console.print(f"[yellow]note:[/yellow] {w}")
        if cautions_for is not None:
            for c in cautions_for(first):
                console.print(f"[yellow]{c.level}:[/yellow] {c.text}")
    elif not st_complete(result):
        console.print("[bold]No design found before the time limit.[/bold] "
                      "The search was stopped, so this is not a proof that none exists; "
                      "run again with a longer --time-limit (0: no limit).")
    else:
        console.print("[bold]No design from your drawer meets the request.[/bold]")
        for line in limit_lines(result):
            console.print(line)
        if result.nearest_misses:
            console.print(_table(result.nearest_misses, "Nearest misses", misses=True))
        if result.unlock:
            console.print("What would unlock it:")
            for u in result.unlock:
                console.print(f"  • {u}")
    st = result.stats
    if not st_complete(result) and result.designs:
        n, bound = st.get("proven_ranks", 0), st.get("open_bound")
        console.print(f"[yellow]search stopped at the time limit:[/yellow] "
                      f"{'rank 1' if n == 1 else f'ranks 1–{n}' if n else 'no rank'} proven best; "
                      f"no unexamined design scores below {bound:.3f}. "
                      "Use --time-limit 0 to search to the end.")
    line = assumed_line(req)
    if line:
        console.print(line)
    console.print(f"[dim]{summary_line(st)}[/dim]")


def assumed_line(request) -> str:
    """One line naming the defaults filled in for targets the request left out."""
    from optimiser.request import DEFAULTS

    keys = list(getattr(request, "assumed", ()) or ())
    if not keys:
        return ""
    said = []
    for k in keys:
        v = getattr(request, k, DEFAULTS.get(k))
        if k == "thd_max_pct":
            said.append(f"THD <= {v:g} % at {format_si(request.input_vpk, 'V')} peak")
        elif k == "ic_min_a":
            said.append(f"I_C >= {format_si(v, 'A')}")
        else:
            said.append(f"{k} = {v:g}")
    return (f"assumed: {', '.join(said)}; set {' / '.join(keys)} to change "
            f"(\"none\": no limit)")


def limit_lines(result) -> list[str]:
    """The physical limits a request runs into, in words with the figures."""
    out = []
    for x in getattr(result, "limits", []) or []:
        unit = x.get("unit", "")
        if unit == "dB":
            req, reach = f"{x['requested']:.1f} dB", f"{x['reachable']:.1f} dB"
        else:
            req, reach = _si(x["requested"], unit), _si(x["reachable"], unit)
        out.append(f"beyond reach: {x['target']} {req} asked, at most {reach} possible "
                   f"— {x['reason']}")
    return out


def summary_line(st: dict) -> str:
    """What the search counted (counts left out when nothing was searched)."""
    secs = f"{st.get('seconds', 0):.2f} s"
    if st.get("searched") is False:
        return f"answered in {secs}: the request is beyond the stage's reach, so it was not " \
               "searched; the misses and unlocks come from searches of relaxed requests"
    parts = []
    if st.get("collector_candidates"):
        parts.append(f"{st['collector_candidates']} stages bounded")
    if st.get("confirmed_skeletons"):
        parts.append(f"{st['confirmed_skeletons']} confirmed by the full engine")
    if not parts:
        return f"searched in {secs}: every candidate was discarded by the bounds before " \
               "the collector side"
    return f"searched in {secs}: {', '.join(parts)}"


def st_complete(result) -> bool:
    """Whether the search ran to the end (its ranking is then proven)."""
    return bool(result.stats.get("complete", True))
