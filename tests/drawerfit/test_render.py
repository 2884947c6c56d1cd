"""Terminal views at a fixed width: nothing cut, nothing repeated, one style per severity.

Each view is printed on a Rich console of fixed width (80 and 120 columns,
record=True) and read back with export_text.  The figures the views must show
are taken from the JSON of the same result and written out here with the
project's value formatter (inventory.values.format_si, itself checked against
IEC 60062/60063 in tests/inventory) and plain Python formats.
"""

from __future__ import annotations

import dataclasses
import io
import math
from importlib import resources

import pytest
from rich.cells import cell_len
from rich.console import Console
from rich.style import Style

from drawerfit.commands.demo import demo_store
from drawerfit.console import SEVERITY_LABEL, SEVERITY_STYLE, caution_line, severity_css
from drawerfit.render.analysis import capacitor_table, drift_rows, show_analysis
from drawerfit.render.designs import _table, show_result
from inventory.values import format_si
from optimiser.cautions import SEVERITIES, Caution
from optimiser.request import load_request
from tests.drawerfit.circuits import CE_PARTS, CE_TRANSISTOR

WIDTHS = (80, 120)


def record(width: int) -> Console:
    return Console(width=width, record=True, file=io.StringIO(), color_system=None,
                   highlight=False)


def text_of(console: Console) -> str:
    return console.export_text()


def assert_fits(text: str, width: int) -> None:
    assert "…" not in text, text                      # Rich's mark of a cut cell
    wide = [ln for ln in text.splitlines() if cell_len(ln) > width]
    assert not wide, wide


@pytest.fixture(scope="module")
def demo_result():
    """The demo request on the demo drawer, with and without a yield (small sample)."""
    from optimiser.search import search

    with resources.as_file(resources.files("drawerfit") / "data" / "demo_request.toml") as p:
        request = load_request(p)
    with demo_store() as store:
        snapshot = store.snapshot()
    plain = search(request, snapshot, top=3)
    with_yield = search(dataclasses.replace(request, yield_samples=200, seed=1), snapshot, top=2)
    return {"plain": plain, "yield": with_yield}


def expected_figures(d: dict) -> dict[str, str]:
    """The figures of one JSON design as a technician reads them."""
    m = d["metrics"]
    out = {
        "gain_db": f"{m['gain_db']:.2f}",
        "f_low_hz": format_si(m["f_low_hz"], "Hz"),
        "f_high_hz": format_si(m["f_high_hz"], "Hz"),
        "ic_a": format_si(m["ic_a"], "A"),
        "vce_v": format_si(m["vce_v"], "V"),
        "ic_drift_pct": f"{m['ic_drift_pct']:.2f} %",
        "thd_pct": f"{m['thd_pct']:.3g} %",
        "swing_vpk": format_si(m["swing_vpk"], "V"),
    }
    if d.get("score") is not None:
        out["score"] = f"{d['score']:.3f}"
    if m.get("yield_pct") is not None:
        out["yield_pct"] = f"{m['yield_pct']:.1f} %"
    return out


def design_blocks(text: str) -> list[list[str]]:
    """The table's rows, one list of lines per design (rows are ruled off)."""
    lines = text.splitlines()
    start = next(i for i, ln in enumerate(lines) if ln.startswith(("┡", "├")))
    blocks, cur = [], []
    for ln in lines[start + 1:]:
        if ln.startswith(("├", "└")):
            blocks.append(cur)
            cur = []
            if ln.startswith("└"):
                break
        else:
            cur.append(ln)
    return blocks


@pytest.mark.parametrize("which", ["plain", "yield"])
@pytest.mark.parametrize("width", WIDTHS)
def test_design_table_shows_every_figure_in_full(demo_result, width, which):
    result = demo_result[which]
    doc = result.to_json()
    assert doc["designs"], "the demo request has designs"
    con = record(width)
    con.print(_table(result.designs, "designs"))
    text = text_of(con)
    assert_fits(text, width)
    blocks = design_blocks(text)
    assert len(blocks) == len(doc["designs"])
    for d, block in zip(doc["designs"], blocks, strict=True):
        assert block[0].split("│")[1].strip() == str(d["rank"])
        for key, want in expected_figures(d).items():
            assert any(want in ln for ln in block), (width, key, want, block)
        for role, p in d["parts"].items():
            assert any(f"{role} {p['label']}" in ln for ln in block), (role, block)
            for pc in p["pieces"]:
                assert any(f"@{pc['location']}" in ln for ln in block)
    if which == "yield":
        assert "yield" in text
        assert all(d["metrics"].get("yield_pct") is not None for d in doc["designs"])


def test_wide_layout_at_120_columns_puts_each_design_on_one_line_of_figures(demo_result):
    doc = demo_result["plain"].to_json()
    con = record(120)
    con.print(_table(demo_result["plain"].designs, "designs"))
    for d, block in zip(doc["designs"], design_blocks(text_of(con)), strict=True):
        first = block[0]
        assert all(want in first for want in expected_figures(d).values()), first


@pytest.mark.parametrize("width", WIDTHS)
def test_nearest_misses_table_keeps_figures_whole(demo_result, width):
    misses = [dataclasses.replace(d, violations=["gain_db 17.3 outside 20 ± 1",
                                                 "f_low_hz 61.5 above 50 (the request's limit)"],
                                  score=math.nan)
              for d in demo_result["plain"].designs]
    con = record(width)
    con.print(_table(misses, "Nearest misses", misses=True))
    text = text_of(con)
    assert_fits(text, width)
    flat = " ".join(text.split())
    for d in misses:
        for key, want in expected_figures(d.to_json()).items():
            assert want in text, (key, want)
    for word in ("17.3", "outside", "61.5", "limit)"):
        assert word in flat


@pytest.mark.parametrize("width", WIDTHS)
def test_show_result_lines_fit_and_name_capacitor_ratings(demo_result, width):
    from optimiser.cautions import capacitor_ratings, cautions
    from optimiser.evaluate import DERATING

    result = demo_result["plain"]
    con = record(width)
    show_result(con, result, cautions_for=lambda d: cautions(d, result.request))
    text = text_of(con)
    assert_fits(text, width)
    flat = " ".join(text.split())
    first = result.designs[0]
    rows = capacitor_ratings(first, result.request)
    assert rows
    assert f"DC ÷ {DERATING['capacitor_voltage']:g}" in flat
    for r in rows:
        # the DC voltage across the part and what it must be rated for (V / derating)
        want = (f"{r.role} {format_si(r.volts, 'V')} DC, needs ≥ "
                f"{format_si(r.volts / DERATING['capacitor_voltage'], 'V')}")
        assert want in flat, want


# --- analyse -------------------------------------------------------------------------

CIRCUIT = """\
topology = "ce"
supply_v = 12.0
load_ohm = "10k"
source_ohm = "600"
gain_db = 21.7
f_low_max_hz = 50
temp_c = {temp}
yield_samples = 200
seed = 3
""" + CE_PARTS + CE_TRANSISTOR


def analysed(tmp_path, temp):
    """What `drawerfit analyse` computes for CIRCUIT (the command's own steps)."""
    import drawerfit.cli  # noqa: F401  (loads the commands in their order)
    from drawerfit.commands.analyse import _stock_picks
    from optimiser.circuit_file import load_circuit
    from optimiser.evaluate import design_of, evaluate
    from optimiser.yield_ import apply_yield, monte_carlo

    p = tmp_path / "c.toml"
    p.write_text(CIRCUIT.format(temp=temp))
    c = load_circuit(str(p))
    ev = evaluate(c.request, c.batch(), c.transistor, c.ratings)
    design = design_of(ev, 0, picks=_stock_picks(c), label=c.transistor.label)
    yres = monte_carlo(c.request, c.values, c.transistor, c.tolerances,
                       samples=c.request.samples, seed=c.request.seed)
    apply_yield(design, yres, c.request)
    return design, ev, c, yres


@pytest.mark.parametrize("temp,n_temps", [("[25, 25]", 1), ("[0, 50]", 2)])
def test_drift_corners_print_once_each(tmp_path, temp, n_temps):
    design, ev, c, yres = analysed(tmp_path, temp)
    corners = design.extra["drift"]
    rows = drift_rows(corners)
    # two hFE corners (hfe_min, hfe_max) at each distinct temperature
    assert len(rows) == 2 * n_temps
    assert len(set(rows)) == len(rows)
    con = record(80)
    show_analysis(design, ev, 0, c, yres, console=con)
    text = text_of(con)
    drift = text[text.index("Drift corners"):]
    drift = drift[:drift.index("└")]
    assert sum("°C │" in ln for ln in drift.splitlines()) == 2 * n_temps


@pytest.mark.parametrize("width", WIDTHS)
def test_analyse_view_fits_and_shows_yield_and_capacitor_voltages(tmp_path, width):
    from optimiser.evaluate import DERATING

    design, ev, c, yres = analysed(tmp_path, "[0, 50]")
    con = record(width)
    show_analysis(design, ev, 0, c, yres, console=con)
    text = text_of(con)
    assert_fits(text, width)
    assert f"{design.metrics['yield_pct']:.1f} %" in text
    assert f"yield {yres.yield_pct:.1f} %" in text
    m = design.metrics
    # C_OUT sits from the collector to the load at 0 V: V_C across it (Kirchhoff)
    caps = text[text.index("Capacitor voltages"):]
    row = next(ln for ln in caps.splitlines() if ln.startswith("│ C_OUT"))
    assert format_si(m["vc_v"], "V") in row
    assert format_si(m["vc_v"] / DERATING["capacitor_voltage"], "V") in row
    assert "collector" in row
    assert capacitor_table(design, c.request) is not None


# --- cautions: one style per severity ------------------------------------------------

def test_one_style_per_severity():
    assert set(SEVERITY_STYLE) == set(SEVERITIES) == set(SEVERITY_LABEL)
    styles = {sev: Style.parse(SEVERITY_STYLE[sev]) for sev in SEVERITIES}
    assert len({str(s) for s in styles.values()}) == len(SEVERITIES)       # distinct
    css = severity_css("li")
    for sev, st in styles.items():
        rule = next(ln for ln in css.splitlines() if ln.startswith(f"li.{sev} "))
        assert st.color.triplet.hex in rule
        assert ("font-weight: 700" in rule) is bool(st.bold)


@pytest.mark.parametrize("sev", SEVERITIES)
def test_caution_lines_use_the_severity_style(sev):
    con = Console(width=80, record=True, file=io.StringIO(), color_system="truecolor",
                  force_terminal=True)
    con.print(caution_line(Caution("verify", "look [here] first", None, sev)))
    segs = [s for s in con._record_buffer if s.text.strip()]
    word = next(s for s in segs if s.text.startswith(SEVERITY_LABEL[sev]))
    assert word.style == Style.parse(SEVERITY_STYLE[sev])
    assert "look [here] first" in con.export_text()        # markup in the text is escaped


def test_analyse_prints_the_mains_caution_first(tmp_path):
    from drawerfit.render.analysis import show_cautions
    from optimiser.cautions import cautions
    from optimiser.request import Request

    design, *_ = analysed(tmp_path, "[0, 50]")
    items = cautions(design, Request("ce", 48.0))
    con = record(80)
    show_cautions(items, console=con)
    lines = [ln for ln in text_of(con).splitlines() if ln.strip()]
    assert lines[0].startswith(f"{SEVERITY_LABEL['danger']}: The supply is 48 V")
