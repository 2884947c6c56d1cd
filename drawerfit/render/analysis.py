"""Terminal view of one analysed stage (``drawerfit analyse``), with Rich."""

from __future__ import annotations

import math

from rich.markup import escape
from rich.table import Table

from drawerfit.console import SEVERITY_STYLE, caution_line
from drawerfit.console import out as _out
from inventory.values import format_si
from optimiser.stages import module as stage_module

__all__ = ["show_analysis", "show_pair_analysis", "show_cautions", "drift_rows",
           "capacitor_table"]

_ROLE_KIND = {"R1": "resistor", "R2": "resistor", "RC": "resistor", "RE": "resistor",
              "RE_BYP": "resistor"}


def _si(x, unit):
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "—"
    return format_si(float(x), unit)


def _num(x, fmt="{:.3g}"):
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "—"
    return fmt.format(x)


_PLUS_WORDS = {"junction": "RE/RE_BYP joint"}


def drift_rows(corners: dict) -> list[tuple[str, ...]]:
    """The drift corners as printed rows, each distinct corner once.

    A temperature range of one point (``temp_c = [25, 25]``) makes the engine
    evaluate each hFE corner twice; the repeats are the same corner and print once.
    """
    rows, seen = [], set()
    for k in range(len(corners["ic_a"])):
        row = (_num(corners["beta25"][k], "{:.0f}"), f"{corners['temp_c'][k]:g} °C",
               _si(corners["ic_a"][k], "A"), _si(corners["vce_v"][k], "V"),
               _num(corners["gain"][k]) if "gain" in corners else "—")
        key = (float(corners["beta25"][k]), float(corners["temp_c"][k]))
        if key not in seen:
            seen.add(key)
            rows.append(row)
    return rows


def capacitor_table(design, request) -> Table | None:
    """Each capacitor's DC voltage, its + side, the rating it needs and the part's."""
    from optimiser.cautions import capacitor_ratings

    rows = capacitor_ratings(design, request)
    if not rows:
        return None
    t = Table(title=f"Capacitor voltages (rating needed: DC ÷ {rows[0].derating:g})",
              header_style="bold")
    t.add_column("role")
    t.add_column("DC across", justify="right")
    t.add_column("+ side")
    t.add_column("needs ≥", justify="right")
    t.add_column("part", justify="right")
    for r in rows:
        part = _si(r.rating_v, "V") if r.stated else f"{_si(r.rating_v, 'V')} assumed"
        if not r.ok:
            part = f"[{SEVERITY_STYLE['danger']}]{part}: too low[/]"
        t.add_row(r.role, _si(r.volts, "V"), _PLUS_WORDS.get(r.plus, r.plus),
                  _si(r.needed_v, "V"), part)
    return t


def show_analysis(design, ev, i: int, circuit, yield_result=None, console=None) -> None:
    """Print the figures, the drift corners, violations and warnings of candidate ``i``."""
    out = console or _out
    m = design.metrics
    req = circuit.request
    title = stage_module(req.topology).LONG_NAME
    form = f", {design.form}" if design.form else ""
    out.print(f"[bold]{title}{form}[/bold] on {format_si(req.supply_v, 'V')}, "
              f"transistor {design.transistor}")

    parts = Table(title="Parts", show_header=True, header_style="bold")
    parts.add_column("role")
    parts.add_column("value", justify="right")
    parts.add_column("tolerance", justify="right")
    parts.add_column("note")
    for role, p in design.parts.items():
        note = []
        if p.plus:
            note.append(f"DC + side: {p.plus}")
        if role in circuit.stock_ids:
            note.append(f"stock #{circuit.stock_ids[role]}")
        tol = circuit.tolerances.get(role)
        parts.add_row(role, p.label, f"{tol * 100:g} %" if tol is not None else "",
                      ", ".join(note))
    out.print(parts)

    op = Table(title="Operating point (25 °C, nominal hFE)", header_style="bold")
    for h in ("V_B", "V_E", "V_C", "I_C", "V_CE", "P_Q"):
        op.add_column(h, justify="right")
    op.add_row(_si(m["vb_v"], "V"), _si(m["ve_v"], "V"), _si(m["vc_v"], "V"),
               _si(m["ic_a"], "A"), _si(m["vce_v"], "V"), _si(m["pd_q_w"], "W"))
    out.print(op)

    s = design.extra.get("small_signal", {})
    fig = Table(title="Small-signal and large-signal figures", header_style="bold")
    fig.add_column("figure")
    fig.add_column("value", justify="right")
    rows = [
        ("g_m", _si(s.get("gm"), "S")),
        ("r_π", _si(s.get("rpi"), "Ω")),
        ("r_o", _si(s.get("ro"), "Ω")),
        ("gain at mid_hz", f"{_num(m['gain'])} V/V  ({_num(m['gain_db'], '{:.2f}')} dB)"),
        ("f_low (−3 dB)", _si(m["f_low_hz"], "Hz") if m["f_low_hz"] is not None else "none in range"),
        ("f_high (−3 dB)", _si(m["f_high_hz"], "Hz") if m["f_high_hz"] is not None else
         ("none in range" if ev.model.has_ft and ev.model.has_cob else "not computed (no ft/cob)")),
        ("Zin", _si(m["zin_ohm"], "Ω")),
        ("Zout", _si(m["zout_ohm"], "Ω")),
        ("swing at the load", _si(m["swing_vpk"], "V") + " peak" if m["swing_vpk"] is not None
         else "not reached"),
        (f"THD at {format_si(req.input_vpk, 'V')} peak", f"{_num(m['thd_pct'])} %"),
        ("I_C drift over corners", f"{_num(m['ic_drift_pct'])} %"),
    ]
    if m.get("yield_pct") is not None:
        rows.append(("yield", f"{m['yield_pct']:.1f} %"))
    for a, b in rows:
        fig.add_row(a, b)
    out.print(fig)

    caps = capacitor_table(design, req)
    if caps is not None:
        out.print(caps)

    c = design.extra.get("drift", {})
    if c:
        ct = Table(title="Drift corners", header_style="bold")
        for h in ("hFE (25 °C)", "T", "I_C", "V_CE", "gain"):
            ct.add_column(h, justify="right")
        for row in drift_rows(c):
            ct.add_row(*row)
        out.print(ct)

    if yield_result is not None:
        from drawerfit.render.yield_view import show_yield
        show_yield(yield_result, console=out)
        wc = design.extra.get("worst_case")
        if wc:
            r = wc["ranges"]
            out.print(f"worst case over the tolerance corners: gain {r['gain_db'][0]:.2f} to "
                      f"{r['gain_db'][1]:.2f} dB, I_C {_si(r['ic_a'][0], 'A')} to "
                      f"{_si(r['ic_a'][1], 'A')}; "
                      + ("every target holds at every corner" if wc["meets"] else
                         "misses at some corner: " + ", ".join(wc["failing"])))

    if design.meets_spec:
        out.print("[green]Valid, and meets every target given.[/green]")
    for v in design.violations:
        out.print(f"[red]✗[/red] {escape(v)}")
    for w in design.warnings:
        out.print(f"[{SEVERITY_STYLE['note']}]note:[/] {escape(w)}")


def show_cautions(notes, console=None) -> None:
    """Print the cautions, most serious first, each in its severity's style."""
    for n in notes:
        (console or _out).print(caution_line(n))


def show_pair_analysis(report: dict, ev, circuit, console=None) -> None:
    """Print a two-transistor circuit: parts, both operating points, the DC voltages to
    probe, the whole circuit's figures, each stage's drift, violations and warnings."""
    out = console or _out
    req = circuit.request
    m = report["metrics"]
    names = ", ".join(f"{s} {t}" for s, t in report["transistors"].items())
    out.print(f"[bold]{escape(report['form'])}[/bold] on {format_si(req.supply_v, 'V')}, "
              f"transistors {escape(names)}")

    parts = Table(title="Parts", header_style="bold")
    for h, j in (("role", "left"), ("value", "right"), ("tolerance", "right"), ("note", "left")):
        parts.add_column(h, justify=j)
    for role, p in report["parts"].items():
        note = []
        if p.get("plus"):
            note.append(f"DC + side: {circuit.form.node_words.get(p['plus'], p['plus'])}")
        if role in circuit.stock_ids:
            note.append(f"stock #{circuit.stock_ids[role]}")
        tol = circuit.tolerances.get(role)
        parts.add_row(role, p["label"], f"{tol * 100:g} %" if tol is not None else "",
                      ", ".join(note))
    out.print(parts)

    op = Table(title="Operating points (25 °C, nominal hFE)", header_style="bold")
    op.add_column("stage", no_wrap=True)
    for h in ("V_B", "V_E", "V_C", "I_C", "V_CE", "P_Q", "I_C drift"):
        # a figure is never broken over two lines; a long header wraps instead
        op.add_column(h, justify="right", no_wrap=h != "I_C drift")
    for stage, st in report["stages"].items():
        op.add_row(f"{stage} {st['kind']}", _si(st["vb_v"], "V"), _si(st["ve_v"], "V"),
                   _si(st["vc_v"], "V"), _si(st["ic_a"], "A"), _si(st["vce_v"], "V"),
                   _si(st["pd_q_w"], "W"), f"{_num(st['ic_drift_pct'])} %")
    out.print(op)

    probe = Table(title="DC voltages to check with a meter (to ground)", header_style="bold")
    probe.add_column("node")
    probe.add_column("V", justify="right")
    for node, v in report["nodes"].items():
        probe.add_row(circuit.form.node_words.get(node, node), _si(v, "V"))
    out.print(probe)

    fig = Table(title="The whole circuit", header_style="bold")
    fig.add_column("figure")
    fig.add_column("value", justify="right")
    has_fh = all(mo.has_ft and mo.has_cob for mo in ev.models)
    for a, b in (
        ("gain at mid_hz", f"{_num(m['gain'])} V/V  ({_num(m['gain_db'], '{:.2f}')} dB)"),
        ("f_low (−3 dB)", _si(m["f_low_hz"], "Hz") if m["f_low_hz"] is not None
         else "none in range"),
        ("f_high (−3 dB)", _si(m["f_high_hz"], "Hz") if m["f_high_hz"] is not None else
         ("none in range" if has_fh else "not computed (no ft/cob)")),
        ("Zin", _si(m["zin_ohm"], "Ω")),
        ("Zout", _si(m["zout_ohm"], "Ω")),
        ("swing at the load", _si(m["swing_vpk"], "V") + " peak" if m["swing_vpk"] is not None
         else "not reached"),
        (f"THD at {format_si(req.input_vpk, 'V')} peak", f"{_num(m['thd_pct'])} %"),
    ):
        fig.add_row(a, b)
    out.print(fig)

    # a capacitor-coupled stage's corners depend on its own hFE only
    joint = report["coupling"] != "capacitor"
    stages = list(report["stages"])
    for stage, st in report["stages"].items():
        ct = Table(title=f"Drift corners of {stage}", header_style="bold")
        shown = stages if joint else [stage]
        for h in [f"hFE of {s} (25 °C)" for s in shown] + ["T", "I_C", "V_CE"]:
            ct.add_column(h, justify="right")
        seen = set()
        for j, row in enumerate(st["drift"]):
            betas = [float(ev.corners[stages.index(s)]["beta25"][0, j]) for s in shown]
            key = (*betas, float(row["temp_c"]))
            if key in seen:
                continue
            seen.add(key)
            ct.add_row(*[_num(b, "{:.0f}") for b in betas], f"{row['temp_c']:g} °C",
                       _si(row["ic_a"], "A"), _si(row["vce_v"], "V"))
        out.print(ct)

    if report["meets_spec"]:
        out.print("[green]Valid, and meets every target given.[/green]")
    for v in report["violations"]:
        out.print(f"[red]✗[/red] {escape(v)}")
    for w in report["warnings"]:
        out.print(f"[{SEVERITY_STYLE['note']}]note:[/] {escape(w)}")
