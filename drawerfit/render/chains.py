"""Terminal view of a chain search: the ranked chains (80 columns), or the nearest
misses, and what the search covered."""

from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from drawerfit.render.designs import _num, _si
from optimiser.search.chain_answer import ChainDesign, ChainResult
from optimiser.stages import form_of

__all__ = ["show_chain_result", "stage_cell", "searched_line", "proof_line", "stopped_line"]


def _owner(d: ChainDesign) -> dict[str, int]:
    """role -> the transistor (0, 1) whose cell shows it: by its prefix, the coupling
    capacitor with the first stage; a cascode's unprefixed roles with the upper
    transistor when wired to one of its nodes, else with the lower."""
    form = form_of(d.topology, d.coupling)
    out = {}
    for role, a, b in form.wiring:
        if role.startswith(("S1.", "S2.")):
            out[role] = int(role[1]) - 1
        elif d.coupling is None:
            out[role] = 1 if any(n.startswith("S2.") for n in (a, b)) else 0
        else:
            out[role] = 0
    return out


def stage_cell(d: ChainDesign, k: int) -> str:
    """Stage ``k``'s roles (the coupling capacitor with the first stage; a cascode's
    roles with the transistor they are wired to), a role a line, its bin location,
    then the transistor."""
    prefix = f"S{k + 1}."
    owner = _owner(d)
    lines = []
    for role, p in d.parts.items():
        if owner.get(role, 0) != k:
            continue
        locs = ", ".join(x.location or "?" for x in p.pieces)
        plus = f" +{p.plus.split('.')[-1][:4]}" if p.plus else ""
        lines.append(f"{role.removeprefix(prefix)} {p.label}{plus} [dim]@{escape(locs)}[/dim]")
    lines.append(f"Q {escape(d.transistors[k])}")
    return "\n".join(lines)


def _figures(d: ChainDesign) -> str:
    m = d.metrics
    return "\n".join([f"{_num(m.get('gain_db'), '{:.2f}')} dB",
                      f"f_low {_si(m.get('f_low_hz'), 'Hz')}",
                      f"f_high {_si(m.get('f_high_hz'), 'Hz')}",
                      f"Zin {_si(m.get('zin_ohm'), 'Ω')}",
                      f"Zout {_si(m.get('zout_ohm'), 'Ω')}"])


def _stages(d: ChainDesign) -> str:
    lines = [f"THD {_num(d.metrics.get('thd_pct'), '{:.2f} %')}"]
    for k, s in enumerate(d.stages):
        lines.append(f"S{k + 1} {_si(s.get('ic_a'), 'A')}")
        lines.append(f"drift {_num(s.get('ic_drift_pct'), '{:.1f} %')}")
    return "\n".join(lines)


def searched_line(result: ChainResult) -> str:
    """What the search covered, in words (never a claim of completeness it lacks)."""
    s = result.search
    loads = ", ".join(_si(x, "Ω") for x in s.get("first_stage_loads_ohm", []))
    claim = "Not proven best" if result.designs else "Not proven that none exists"
    if result.request.topology == "cascode":
        return (f"Searched: {s.get('transistor_pairs', 0)} transistor pairs × "
                f"{s.get('dividers', 0)} divider triples of "
                f"{s.get('resistor_values', 0)} resistor values × every emitter pair and the "
                f"RC values near the gain, {s.get('estimated', 0)} estimated, the best "
                f"{s.get('candidates_per_pair')} of each pair evaluated "
                f"({s.get('chains_screened', 0)} cascodes screened, "
                f"{s.get('chains_evaluated', 0)} with THD, "
                f"{_num(s.get('seconds'), '{:.1f}')} s). {claim}: roles of several pieces, "
                "other capacitors and candidates beyond the estimates' best are not "
                "examined." + stopped_line(result))
    if result.request.coupling == "direct":
        claim = "Not proven best" if result.designs else "Not proven that none exists"
        caps = ", ".join(_si(x, "F") for x in s.get("output_capacitors", [])) or "none"
        return (f"Searched: {s.get('first_stages', 0)} ce first stages into "
                f"{loads or 'no load'} × {s.get('followers', 0)} followers on their "
                f"collectors (S2.RE: {s.get('follower_re_values', 0)} resistor values in "
                f"stock; S2.C_OUT: {caps}) ({s.get('chains_screened', 0)} chains screened, "
                f"{s.get('chains_evaluated', 0)} with THD, "
                f"{_num(s.get('seconds'), '{:.1f}')} s). {claim}: a chain whose first stage "
                f"is not among the ce search's {s.get('stage_top')} best, whose S2.RE is "
                "made of several pieces or whose follower has a collector resistor is not "
                "examined.")
    line = (f"Searched: {s.get('first_stages', 0)} first stages into {loads or 'no load'} "
            f"× {s.get('followers', 0)} followers, then the proof ({s.get('chains_screened', 0)} "
            f"chains screened, {s.get('chains_evaluated', 0)} with THD, "
            f"{_num(s.get('seconds'), '{:.1f}')} s). ")
    return line + proof_line(result)


def stopped_line(result: ChainResult) -> str:
    """What the time limit left open (empty when it stopped nothing)."""
    s = result.search
    if not s.get("stopped_at_limit"):
        return ""
    left = s.get("pairs_left", [])
    pairs = (f"{s.get('pairs_searched', 0)} of {s.get('transistor_pairs', 0)} transistor "
             f"pairs searched" + (f" (not begun: {', '.join(left)})" if left else ""))
    return (f" Stopped at the time limit: {pairs}, {s.get('chains_left_by_time', 0)} "
            "candidates not judged; a longer --time-limit (0: none) searches the rest.")


def proof_line(result: ChainResult) -> str:
    """What the proof showed (docs/search.md, "What is proven"), in one sentence."""
    s = result.search
    p = s.get("proof") or {}
    k = p.get("widened_to", 0)
    ranks = p.get("proven_ranks", 0)
    if s.get("proven") and result.designs:
        which = "#1" if ranks <= 1 else f"#1–#{ranks}"
        how = ("every stage the relaxed stage searches allow was paired"
               if p.get("every_stage_listed") else
               f"no chain with a stage outside the best {k} of each relaxed stage search "
               f"scores below {_num(p.get('bound'), '{:.3f}')}")
        return f"Proven best ({which}, under the assumptions of docs/search.md): {how}."
    if s.get("proven"):
        return ("Proven that no chain meets the request (under the assumptions of "
                "docs/search.md): every stage the relaxed stage searches allow was paired.")
    claim = "Not proven best" if result.designs else "Not proven that none exists"
    why = {"time": f"the proof's {_num(p.get('time_budget_s'), '{:g}')} s ran out",
           "bound": "the bound stopped short", "exhausted": "every stage was paired"}
    stop = why.get(p.get("stopped"), "no proof was run")
    bound = p.get("bound")
    rest = (f"; a chain with a stage outside them could score as low as {bound:.3f}"
            if bound is not None else "")
    return (f"{claim}: the relaxed stage searches were widened to their best {k} stages "
            f"each ({stop}){rest}.")


def _unlocks(console: Console, result: ChainResult) -> None:
    """What would unlock a request nothing meets (docs/answers.md), a line each."""
    if result.unlock:
        console.print("What would unlock it:")
        for u in result.unlock:
            console.print(f"  • {escape(u)}")


def show_chain_result(console: Console, result: ChainResult) -> None:
    """The ranked chains, or the nearest misses, then what was searched."""
    if result.request.topology == "cascode":
        a, b = "ce, lower", "cb, upper"
        name = "cascode"
        what = "cascode"
    else:
        a, b = result.request.topology
        name = f"{a}→{b}" + (" direct-coupled" if result.request.coupling == "direct" else "")
        what = f"{name} chain"
    rows = result.designs or result.nearest_misses
    if result.search.get("proven_infeasible"):
        console.print(f"No {what} can meet the request (proven):")
        for line in result.search.get("why", []):
            console.print(f"  {escape(line)}")
        _unlocks(console, result)
        return
    if not result.designs:
        console.print(f"No {what} found meets the request.")
        for line in result.search.get("why", []):
            console.print(f"  {escape(line)}")
    table = Table(show_lines=True, pad_edge=False, expand=False)
    for name in ("#", f"S1 ({a})", f"S2 ({b})", "cascode" if what == "cascode" else "chain",
                 "THD, I_C", "score"):
        table.add_column(name, overflow="fold")
    for i, d in enumerate(rows, 1):
        table.add_row(str(d.rank or f"m{i}"), stage_cell(d, 0), stage_cell(d, 1), _figures(d),
                      _stages(d), _num(d.score, "{:.3f}"))
    if rows:
        console.print(table)
    for i, d in enumerate(result.nearest_misses[:3], 1):
        console.print(f"m{i} misses: " + escape("; ".join(d.violations[:3])))
    _unlocks(console, result)
    console.print(f"[dim]{escape(searched_line(result))}[/dim]")
