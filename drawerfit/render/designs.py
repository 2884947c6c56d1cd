"""Terminal view of a search result: ranked designs, or the nearest misses and unlocks."""

from __future__ import annotations

import math

from rich.console import Console, ConsoleOptions
from rich.markup import escape
from rich.measure import Measurement
from rich.table import Table

from drawerfit.console import SEVERITY_STYLE, caution_line
from inventory.values import format_si
from optimiser.design import Design

__all__ = ["show_result", "why_first", "parts_cell", "figure_text", "capacitor_line",
           "capacitor_rating_text", "assumed_line", "limit_lines", "summary_line"]

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


#: The figure columns: (metric key, header, how it is printed).  The wide layout
#: gives each its own column; the folded one stacks them in pairs (see _PAIRS).
_FIGURES = {
    "gain_db": ("gain dB", lambda v: _num(v, "{:.2f}")),
    "f_low_hz": ("f_low", lambda v: _si(v, "Hz")),
    "f_high_hz": ("f_high", lambda v: _si(v, "Hz")),
    "ic_a": ("I_C", lambda v: _si(v, "A")),
    "vce_v": ("V_CE", lambda v: _si(v, "V")),
    "ic_drift_pct": ("drift", lambda v: _num(v, "{:.2f} %")),
    "thd_pct": ("THD", lambda v: _num(v, "{:.3g} %")),
    "swing_vpk": ("swing", lambda v: _si(v, "V")),
    "yield_pct": ("yield", lambda v: _num(v, "{:.1f} %")),
}
#: The folded layout: two figures per cell, one above the other.
_PAIRS = (("gain_db", "swing_vpk"), ("f_low_hz", "f_high_hz"), ("ic_a", "vce_v"),
          ("ic_drift_pct", "thd_pct"))


def figure_text(d: Design, key: str) -> str:
    """A design's figure ``key`` as the design table prints it."""
    return _FIGURES[key][1](d.metrics.get(key))


def _has_yield(designs: list[Design]) -> bool:
    return any(d.metrics.get("yield_pct") is not None for d in designs)


def _wide_table(designs: list[Design], title: str, misses: bool) -> Table:
    """One line of figures per design, one column per figure."""
    keys = [k for k in _FIGURES if k != "yield_pct" or _has_yield(designs)]
    t = Table(title=title, show_lines=True, title_justify="left")
    t.add_column("#", justify="right", no_wrap=True)
    t.add_column("parts @ bin", no_wrap=True)
    for k in keys:
        t.add_column(_FIGURES[k][0], justify="right", no_wrap=True)
    t.add_column("why not" if misses else "score", justify="left" if misses else "right",
                 no_wrap=not misses)
    for d in designs:
        last = "\n".join(d.violations) if misses else _num(d.score, "{:.3f}")
        t.add_row(str(d.rank or ""), parts_cell(d), *(figure_text(d, k) for k in keys), last)
    return t


def _folded_table(designs: list[Design], title: str, misses: bool) -> Table:
    """Two figures per cell (see _PAIRS); a miss's reasons under its parts."""
    t = Table(title=title, show_lines=True, title_justify="left")
    t.add_column("#", justify="right", no_wrap=True)
    t.add_column("parts @ bin" + (" / why not" if misses else ""), overflow="fold")
    for a, b in _PAIRS:
        t.add_column(f"{_FIGURES[a][0]}\n{_FIGURES[b][0]}", justify="right", no_wrap=True)
    last = ["yield"] if _has_yield(designs) else []
    if not misses:
        last.insert(0, "score")
    if last:
        t.add_column("\n".join(last), justify="right", no_wrap=True)
    for d in designs:
        parts = parts_cell(d)
        if misses and d.violations:
            parts += "\n" + "\n".join(f"[red]✗[/red] {escape(v)}" for v in d.violations)
        cells = [f"{figure_text(d, a)}\n{figure_text(d, b)}" for a, b in _PAIRS]
        if last:
            tail = [] if misses else [_num(d.score, "{:.3f}")]
            if "yield" in last:
                tail.append(figure_text(d, "yield_pct"))
            cells.append("\n".join(tail))
        t.add_row(str(d.rank or ""), parts, *cells)
    return t


class _DesignTable:
    """The ranked designs, laid out for the width they are printed at.

    The wide layout (one column per figure) when it fits without cutting a
    figure; otherwise the folded one (two figures per cell), which fits 80
    columns with the parts column wrapping if need be.
    """

    def __init__(self, designs: list[Design], title: str, misses: bool):
        self.designs, self.title, self.misses = designs, title, misses

    #: Width the wide layout leaves at least for a miss's reasons (they wrap).
    WHY_NOT_MIN = 24

    def __rich_console__(self, console: Console, options: ConsoleOptions):
        # Every figure and part line at full length; a miss's reasons may wrap.
        wide = _wide_table(self.designs, self.title, misses=False)
        need = Measurement.get(console, options.update(width=10_000), wide).maximum
        if self.misses:
            need += self.WHY_NOT_MIN - max(5, *(len(_num(d.score, "{:.3f}"))
                                                for d in self.designs))
        if need <= options.max_width:
            yield _wide_table(self.designs, self.title, self.misses)
        else:
            yield _folded_table(self.designs, self.title, self.misses)


def _table(designs: list[Design], title: str, misses: bool = False) -> _DesignTable:
    return _DesignTable(designs, title, misses)


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


def capacitor_rating_text(r) -> str:
    """One capacitor's DC voltage, the rating it needs and the part's (Rich markup)."""
    part = (f"part {_si(r.rating_v, 'V')}" if r.stated else
            f"no rating given, {_si(r.rating_v, 'V')} assumed")
    if not r.ok:
        part = f"[{SEVERITY_STYLE['danger']}]{part}: too low[/]"
    return f"{r.role} {_si(r.volts, 'V')} DC, needs ≥ {_si(r.needed_v, 'V')} ({part})"


def capacitor_line(d: Design, request) -> str:
    """The line of #1's capacitor voltages and the ratings they need ("" without capacitors)."""
    from optimiser.cautions import capacitor_ratings

    rows = capacitor_ratings(d, request)
    if not rows:
        return ""
    return (f"#1 capacitor voltages (a part must be rated at least DC ÷ {rows[0].derating:g}): "
            + "; ".join(capacitor_rating_text(r) for r in rows))


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
        cap_line = capacitor_line(first, req)
        if cap_line:
            console.print(cap_line)
        for w in first.warnings:
            console.print(f"[{SEVERITY_STYLE['note']}]note:[/] {escape(w)}")
        if cautions_for is not None:
            for c in cautions_for(first):
                console.print(caution_line(c))
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
        elif k == "gain_db":
            said.append(f"gain {request.gain_db:g} dB ± {request.gain_tol_db:g} dB")
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
        # a ceiling (``*_max_*``) is out of reach from below, a floor or a gain from above
        side = "at least" if "_max_" in x["target"] else "at most"
        out.append(f"beyond reach: {x['target']} {req} asked, {side} {reach} possible "
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
