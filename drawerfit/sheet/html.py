"""sheet.html: one self-contained, printable page to build from.

Inline CSS, images as data: URIs, no scripts and no external references.
Every figure carries ``data-metric`` (the interface key) and ``data-value``
(the number as the engine gave it, SI units), and each DC voltage to probe
``data-node`` and ``data-volts``, so a script can read the page back.
"""

from __future__ import annotations

import base64
from collections.abc import Sequence
from html import escape
from pathlib import Path

from drawerfit.console import severity_css
from drawerfit.sheet import fmt
from drawerfit.sheet.spread import Probe
from optimiser.cautions import Caution
from optimiser.design import Design
from optimiser.request import Request
from optimiser.stages import module as stage_module

__all__ = ["FIGURES", "STAGE_FIGURES", "render_html", "render_pair_html", "data_uri"]

CSS = """
@page { size: A4; margin: 12mm; }
* { box-sizing: border-box; }
body { font: 10pt/1.3 "DejaVu Sans", Arial, sans-serif; color: #111; margin: 0 auto;
       max-width: 190mm; padding: 6mm; }
h1 { font-size: 15pt; margin: 0 0 2mm; }
h2 { font-size: 11.5pt; margin: 3mm 0 1.2mm; border-bottom: 1px solid #999; }
.sub { color: #444; margin: 0 0 3mm; }
table { border-collapse: collapse; width: 100%; }
th, td { border: 1px solid #bbb; padding: 0.7mm 1.6mm; text-align: left; vertical-align: top; }
th { background: #eee; font-weight: 600; }
td.num, th.num { text-align: right; white-space: nowrap; }
table.route td { white-space: nowrap; }
table.route, table.probes { width: auto; }
.cols.bench > :first-child { flex: 1 1 55%; }
.cols.bench > :last-child { flex: 1 1 42%; }
table.route { font-size: 9pt; }
table.route td, table.route th { padding: 0.5mm 1.2mm; }
.cols { display: flex; gap: 5mm; }
.cols > * { flex: 1 1 0; min-width: 0; }
td.range { white-space: nowrap; text-align: right; }
img { max-width: 100%; height: auto; display: block; margin: 1mm auto; }
img.schematic { max-height: 95mm; }
img.plot { max-height: 66mm; }
.probe { font-weight: 700; color: #1f4fbf; font-size: 11.5pt; }
.tick { width: 8mm; }
ul.cautions { margin: 0; padding-left: 5mm; }
ul.cautions li { margin: 0.8mm 0; }
li.caution { color: #8a1c10; }
li.caution::marker { content: "⚠ "; }
li.note { color: #333; }
.meets { color: #1d6b2f; font-weight: 600; }
.misses { color: #8a1c10; font-weight: 600; }
section { break-inside: avoid; page-break-inside: avoid; }
footer { margin-top: 4mm; color: #555; font-size: 8.5pt; }
p.small { font-size: 8.5pt; color: #444; margin: 1mm 0; }
@media print { body { padding: 0; } .page2 { break-before: page; page-break-before: always; } }
"""

#: (metric key, what, unit) in the order the sheet lists them.
FIGURES: tuple[tuple[str, str, str], ...] = (
    ("gain", "gain at mid frequency", "V/V"),
    ("gain_db", "gain at mid frequency", "dB"),
    ("f_low_hz", "lower −3 dB edge", "Hz"),
    ("f_high_hz", "upper −3 dB edge", "Hz"),
    ("zin_ohm", "input impedance Zin", "Ω"),
    ("zout_ohm", "output impedance Zout", "Ω"),
    ("swing_vpk", "output swing before clipping", "V"),
    ("thd_pct", "distortion (THD) at the input level", "%"),
    ("ic_a", "collector current I_C", "A"),
    ("vce_v", "V_CE", "V"),
    ("ic_drift_pct", "I_C drift over hFE spread and temperature", "%"),
    ("pd_q_w", "transistor dissipation", "W"),
    ("yield_pct", "yield (Monte Carlo)", "%"),
)


def data_uri(data: bytes, mime: str) -> str:
    """``data:`` URI with base64 payload."""
    return f"data:{mime};base64," + base64.b64encode(data).decode("ascii")


def _show(key: str, unit: str, v) -> str:
    if v is None:
        if key == "f_high_hz":
            return "— (beyond range or no ft/cob)"
        if key == "f_low_hz":
            return "— (below range)"
        return "—"
    v = float(v)
    if unit in ("%", "dB", "V/V"):
        return f"{v:.3g} {unit}" if unit != "dB" else f"{v:.2f} dB"
    if key == "swing_vpk":
        return fmt.si(v, "V") + " peak"
    return fmt.si(v, unit)


def _req_rows(request: Request, topology: str | None = None) -> list[tuple[str, str]]:
    """The request as understood; ``topology``: how to name a two-transistor form."""
    r = request
    if topology is None:
        mod = stage_module(r.topology)
        topology = f"{mod.LONG_NAME} ({mod.ALSO_CALLED})" if mod.ALSO_CALLED else mod.LONG_NAME
    rows = [("topology", topology),
            ("supply", fmt.si(r.supply_v, "V")),
            ("load", fmt.si(r.load_ohm, "Ω") if r.load_ohm else "none (open)"),
            ("source resistance", fmt.si(r.source_ohm, "Ω")),
            ("mid frequency", fmt.si(r.mid_hz, "Hz"))]
    if r.gain is not None:
        rows.append(("gain target", f"{r.gain_db:.2f} dB ± {r.gain_tol_db:g} dB "
                                    f"({r.gain:.3g} V/V)"))
    if r.f_low_max_hz is not None:
        rows.append(("lower edge at most", fmt.si(r.f_low_max_hz, "Hz")))
    if r.f_high_min_hz is not None:
        rows.append(("upper edge at least", fmt.si(r.f_high_min_hz, "Hz")))
    if r.zin_min_ohm is not None:
        rows.append(("Zin at least", fmt.si(r.zin_min_ohm, "Ω")))
    if getattr(r, "zout_max_ohm", None) is not None:
        rows.append(("Zout at most", fmt.si(r.zout_max_ohm, "Ω")))
    if r.ic_drift_max_pct is not None:
        rows.append(("I_C drift at most", f"{r.ic_drift_max_pct:g} %"))
    if r.thd_max_pct is not None:
        rows.append(("THD at most", f"{r.thd_max_pct:g} %"))
    if r.min_yield_pct is not None:
        rows.append(("yield at least", f"{r.min_yield_pct:g} %"))
    t0, t1 = r.temp_c
    rows.append(("ambient", f"{t0:g} °C" if t0 == t1 else f"{t0:g} to {t1:g} °C"))
    rows.append(("input level", fmt.si(r.input_vpk, "V") + " peak"))
    rows.append(("copies to build", str(r.builds)))
    if r.mains:
        rows.append(("supply derived from the mains", "yes"))
    return rows


def _table(headers: Sequence[str], rows: Sequence[Sequence[str]], num_cols=(),
           css: str = "") -> str:
    num = ' class="num"'
    h = "".join(f'<th{num if i in num_cols else ""}>{escape(x)}</th>'
                for i, x in enumerate(headers))
    body = []
    for row in rows:
        cells = "".join(f'<td{num if i in num_cols else ""}>{escape(str(x))}</td>'
                        for i, x in enumerate(row))
        body.append(f"<tr>{cells}</tr>")
    cls = f' class="{css}"' if css else ""
    return f"<table{cls}><thead><tr>{h}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _mc(p: Probe) -> str:
    if p.p5 is None or p.p95 is None:
        return "—"
    return f"{fmt.si(p.p5, 'V')} to {fmt.si(p.p95, 'V')}"


def render_html(design: Design, request: Request, *, schematic_svg: bytes,
                response_png: bytes, drift_png: bytes, route: list[dict],
                probes: list[Probe], cautions: list[Caution], transistor=None) -> str:
    """The page as one string."""
    who = design.transistor if design.transistor not in ("", "inline") else \
        "the given transistor"
    kind = stage_module(design.topology).LONG_NAME.replace(" ", "-")
    title = f"Build sheet: {kind} stage with {who}"
    sub = []
    if design.rank is not None:
        sub.append(f"design rank {design.rank}")
    if design.form:
        sub.append(design.form)
    status = ('<span class="meets">meets the request</span>' if design.meets_spec else
              '<span class="misses">misses the request: ' +
              escape("; ".join(design.violations)) + "</span>")
    sub.append(status)

    req = _table(("asked", ""), _req_rows(request))

    fig_rows = []
    for key, what, unit in FIGURES:
        if key not in design.metrics:
            continue
        v = design.metrics.get(key)
        data = "" if v is None else repr(float(v))
        fig_rows.append(f'<tr><td>{escape(what)}</td><td class="num" data-metric="{key}" '
                        f'data-value="{escape(data)}">{escape(_show(key, unit, v))}</td></tr>')
    figures = ('<table><thead><tr><th>figure (computed)</th><th class="num">value</th></tr>'
               f'</thead><tbody>{"".join(fig_rows)}</tbody></table>')

    probe_rows = []
    names = {"base": "base (B)", "emitter": "emitter (E)", "collector": "collector (C)"}
    bases = []
    with_mc = any(p.p5 is not None for p in probes)
    for p in probes:
        if p.low is not None and p.high is not None:
            spread = f"{fmt.si(p.low, 'V')} to {fmt.si(p.high, 'V')}"
            if p.basis not in bases:
                bases.append(p.basis)
        else:
            spread = "nominal"
        probe_rows.append(
            f'<tr><td>{escape(names.get(p.node, p.node))}</td>'
            f'<td class="num probe" data-node="{p.node}" data-volts="{p.volts:.6g}">'
            f'{escape(fmt.si(p.volts, "V"))}</td>'
            f'<td class="range">{escape(spread)}</td><td class="tick"></td></tr>')
    covers = ("Range: " + "; ".join(bases) + ".") if bases else \
        "Nominal values only: no spread was computed."
    if with_mc:
        covers += " 90 % of the Monte Carlo samples lie within: " + ", ".join(
            f"{names[p.node][-2]} {_mc(p)}" for p in probes if p.p5 is not None) + "."
    probe_table = ('<table class="probes"><thead><tr><th>node</th><th class="num">expect</th>'
                   '<th class="num">range</th><th>✓</th></tr></thead>'
                   f'<tbody>{"".join(probe_rows)}</tbody></table>'
                   f'<p class="small">Supply on, no signal, meter from the node to ground. '
                   f'{escape(covers)}</p>')

    return _page(
        title, sub, cautions,
        schematic=(data_uri(schematic_svg, "image/svg+xml"),
                   "schematic of the stage with role names, values and bins",
                   "Blue: DC volts to ground to expect at base (B), emitter (E), collector (C)."),
        route=route, probe_table=probe_table, req=req, figures=figures,
        plots=[("Frequency response", data_uri(response_png, "image/png"),
                "Bode magnitude and phase with band edges and targets"),
               (f"Bias drift{' and yield' if 'yield_pct' in design.metrics else ''}",
                data_uri(drift_png, "image/png"),
                "collector current and gain at the drift corners")],
        thing="the stage")


def _page(title: str, sub: list[str], cautions: list[Caution], *, schematic: tuple[str, str, str],
          route: list[dict], probe_table: str, req: str, figures: str,
          plots: list[tuple[str, str, str]], thing: str) -> str:
    """The sheet's page: title, cautions, schematic (data URI, alt text, legend), the
    bench's two tables, the request and figures, the plots (heading, data URI, alt)."""
    sch, alt, legend = schematic
    plot_html = "\n".join(f'<section><h2>{heading}</h2>\n<img class="plot" src="{uri}" '
                          f'alt="{plot_alt}"></section>' for heading, uri, plot_alt in plots)
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<title>{escape(title)}</title>
<style>{CSS}{severity_css("li")}</style>
</head>
<body>
<h1>{escape(title)}</h1>
<p class="sub">{" · ".join(sub)}</p>
<section><h2>Cautions</h2>{_caution_list(cautions)}</section>
<section><h2>Schematic</h2>
<img class="schematic" src="{sch}" alt="{alt}">
<p class="small">{legend}</p>
</section>
<div class="cols bench">
<section><h2>Parts, in picking order</h2>{_route_table(route)}</section>
<section><h2>DC voltages to check</h2>{probe_table}</section>
</div>
<div class="cols page2">
<section><h2>The request</h2>{req}</section>
<section><h2>Figures</h2>{figures}</section>
</div>
{plot_html}
<footer>All figures are computed from models and nominal data (ideal parts, data-sheet
transistor figures, the stated tolerances); verify them on the bench before relying on {thing}.</footer>
</body>
</html>
"""


def _route_table(route: list[dict]) -> str:
    """Parts in picking order: one line per stock row, with a tick column."""
    route_rows = []
    defaults = False
    for r in route:
        kind = r["dielectric"] or r["kind"]
        rating = r["rating"]
        if rating.endswith(" (default)"):
            rating, defaults = rating[:-len(" (default)")] + "*", True
        route_rows.append((r["location"] or "—", r["role"], r["value"], kind, rating,
                           str(r["count"]), ""))
    route_table = _table(("bin", "role", "value", "kind", "rating", "take", "✓"), route_rows,
                         num_cols=(5,), css="route")
    if defaults:
        route_table += ('<p class="small">* no rating known for this part: the stock default '
                        'is assumed; use a part rated at least this much.</p>')
    return route_table


def _caution_list(cautions: list[Caution]) -> str:
    items = []
    for c in cautions:
        who = f"<b>{escape(c.role)}</b> " if c.role and not c.text.startswith(c.role) else ""
        items.append(f'<li class="{c.level} {c.severity}" data-kind="{c.kind}">{who}'
                     f'{escape(c.text)}</li>')
    return f'<ul class="cautions">{"".join(items)}</ul>'


def write_html(path: Path, text: str) -> Path:
    path = Path(path)
    path.write_text(text, encoding="utf-8")
    return path


#: A two-transistor circuit's figures of each transistor: (key, what, unit).
STAGE_FIGURES: tuple[tuple[str, str, str], ...] = (
    ("ic_a", "collector current I_C", "A"),
    ("vce_v", "V_CE", "V"),
    ("ic_drift_pct", "I_C drift over hFE spread and temperature", "%"),
    ("pd_q_w", "transistor dissipation", "W"),
)


def _figure_row(key: str, what: str, unit: str, v, data_key: str | None = None) -> str:
    data = "" if v is None else repr(float(v))
    return (f'<tr><td>{escape(what)}</td><td class="num" data-metric="{data_key or key}" '
            f'data-value="{escape(data)}">{escape(_show(key, unit, v))}</td></tr>')


def render_pair_html(report: dict, request: Request, *, node_words: dict[str, str],
                     schematic_svg: bytes, response_png: bytes, waveform_png: bytes,
                     drift_png: bytes, route: list[dict], probes: list[Probe],
                     cautions: list[Caution], rank: int | None = None) -> str:
    """The page of a two-transistor circuit as one string (``rank``: the chain's rank
    in ``design``'s answer, said under the title).

    ``report`` is :func:`optimiser.pair_report.pair_report`'s object (figures, stages,
    verdict); each figure is ``data-metric`` (``gain``, ``S1.ic_a``, …) with
    ``data-value`` as ``--json`` prints it; each probe ``data-node`` (``S1.base``,
    ``middle``, …) and ``data-volts``.
    """
    given = [t for t in dict.fromkeys(report["transistors"].values()) if t not in ("", "inline")]
    who = " and ".join(given) or "the given transistors"
    title = f"Build sheet: {report['form']}, with {who}"
    sub = [", ".join(f"{s} {st['kind']}" for s, st in report["stages"].items())]
    if rank is not None:
        sub.append(f"chain rank {rank}")
    status = ('<span class="meets">meets the request</span>' if report["meets_spec"] else
              '<span class="misses">misses the request: ' +
              escape("; ".join(report["violations"])) + "</span>")
    sub.append(status)
    req = _table(("asked", ""), _req_rows(request, report["form"]))

    m = report["metrics"]
    rows = [_figure_row(key, what, unit, m.get(key)) for key, what, unit in FIGURES
            if key in m]
    for stage, st in report["stages"].items():
        rows += [_figure_row(key, f"{stage}: {what}", unit, st.get(key), f"{stage}.{key}")
                 for key, what, unit in STAGE_FIGURES if key in st]
    figures = ('<table><thead><tr><th>figure (computed)</th><th class="num">value</th></tr>'
               f'</thead><tbody>{"".join(rows)}</tbody></table>')

    probe_rows, bases = [], []
    for p in probes:
        if p.low is not None and p.high is not None:
            spread = f"{fmt.si(p.low, 'V')} to {fmt.si(p.high, 'V')}"
            if p.basis not in bases:
                bases.append(p.basis)
        else:
            spread = "nominal"
        probe_rows.append(
            f'<tr><td>{escape(node_words.get(p.node, p.node))}</td>'
            f'<td class="num probe" data-node="{escape(p.node)}" data-volts="{p.volts:.6g}">'
            f'{escape(fmt.si(p.volts, "V"))}</td>'
            f'<td class="range">{escape(spread)}</td><td class="num">{escape(_mc(p))}</td>'
            f'<td class="tick"></td></tr>')
    covers = ("Range: " + "; ".join(bases) + ".") if bases else \
        "Nominal values only: no spread was computed."
    if any(p.p5 is not None for p in probes):
        covers += " Monte Carlo: where 90 % of the samples lie (5th to 95th percentile)."
    probe_table = ('<table class="probes"><thead><tr><th>node</th><th class="num">expect</th>'
                   '<th class="num">range</th><th class="num">Monte Carlo</th><th>✓</th></tr>'
                   f'</thead><tbody>{"".join(probe_rows)}</tbody></table>'
                   f'<p class="small">Supply on, no signal, meter from the node to ground. '
                   f'{escape(covers)}</p>')

    return _page(
        title, sub, cautions,
        schematic=(data_uri(schematic_svg, "image/svg+xml"),
                   "schematic of both stages with role names, values and bins",
                   "Blue: DC volts to ground to expect at each transistor's base (B), emitter "
                   "(E),\ncollector (C) and the junction of RE and RE_BYP (J)."),
        route=route, probe_table=probe_table, req=req, figures=figures,
        plots=[("Frequency response", data_uri(response_png, "image/png"),
                "Bode magnitude and phase with band edges and targets"),
               ("Output at the stated input", data_uri(waveform_png, "image/png"),
                "one period of the load voltage at the input level"),
               (f"Bias drift{' and yield' if 'yield_pct' in m else ''}",
                data_uri(drift_png, "image/png"),
                "each transistor's collector current at the drift corners")],
        thing="the circuit")
