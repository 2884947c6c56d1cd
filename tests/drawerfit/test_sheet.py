"""The build sheet: well-formed, self-contained files that carry the engine's figures.

Checks against things outside the sheet code: the XML and HTML parsers of the
standard library (well-formedness), the PNG file signature (ISO/IEC 15948,
8 bytes 89 50 4E 47 0D 0A 1A 0A), ngspice's operating point for the DC voltages
to probe (the shared harness tests/reference/spice.py), and the engine's own
evaluation for the figures.
"""

from __future__ import annotations

import csv
import io
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import numpy as np
import pytest

from drawerfit.sheet import SHEET_FILES, echo_sheet, ratings_of, write_sheet
from drawerfit.sheet import spread as spread_mod
from drawerfit.sheet.parts_csv import COLUMNS, location_key
from drawerfit.sheet.schematic import write_schematic
from inventory.parts import Transistor
from optimiser.cautions import cautions
from optimiser.design import Design, Piece, RolePick
from optimiser.evaluate import evaluate
from optimiser.request import Request
from optimiser.stage import StageBatch

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
SVG_NS = "{http://www.w3.org/2000/svg}"

Q = Transistor("GP-N1", 100, 300, ft=250e6, cob=4e-12, pd=0.5, vceo=40.0, ic_max=0.1,
               location="T1")


def _pick(role, value, label, loc, *, rating=None, diel=None, tol=None):
    kind = "capacitor" if role.startswith("C_") else "resistor"
    return RolePick(role, value, label, (Piece(value, 1, 7, loc, kind, tol, rating, diel),))


def _parts(topology: str, form: str = "partly bypassed") -> dict[str, RolePick]:
    p = {"R1": _pick("R1", 47e3, "47k", "A3"), "R2": _pick("R2", 10e3, "10k", "A10"),
         "RC": _pick("RC", 4.7e3, "4k7", "B2"),
         "C_IN": _pick("C_IN", 1e-6, "1u0", "D1", rating=50.0, diel="film"),
         "C_OUT": _pick("C_OUT", 10e-6, "10u", "D4", rating=25.0, diel="electrolytic")}
    if topology == "ce":
        if form != "fully bypassed":
            p["RE"] = _pick("RE", 220.0 if form == "partly bypassed" else 1e3, "220", "C1")
        if form != "unbypassed":
            p["RE_BYP"] = _pick("RE_BYP", 820.0, "820", "C3")
            p["C_BYP"] = _pick("C_BYP", 47e-6, "47u", "D2", rating=16.0, diel="electrolytic")
    elif topology == "cb":
        p["R1"] = _pick("R1", 22e3, "22k", "A2")
        p["RE"] = _pick("RE", 2.2e3, "2k2", "C2")
        p["C_B"] = _pick("C_B", 10e-6, "10u", "D3", rating=25.0, diel="electrolytic")
    else:
        del p["RC"]
        p["R1"] = _pick("R1", 22e3, "22k", "A2")
        p["R2"] = _pick("R2", 22e3, "22k", "A2")
        p["RE"] = _pick("RE", 2.2e3, "2k2", "C2")
    return p


def _request(topology: str, **kw) -> Request:
    base = dict(load_ohm=10e3, source_ohm=600.0, gain=10.0, f_low_max_hz=50.0,
                f_high_min_hz=100e3, temp_c=(0.0, 50.0), ic_drift_max_pct=10.0)
    base.update(kw)
    return Request(topology, 12.0, **base)


def evaluated(topology: str, form: str = "partly bypassed", **kw) -> tuple[Design, Request]:
    """A design whose metrics are the engine's (as analyse would report them)."""
    parts = _parts(topology, form)
    req = _request(topology, **kw)
    d = Design(topology, Q.label, parts, {}, True, rank=1,
               form=form if topology == "ce" else None)
    ev = evaluate(req, StageBatch.from_values(topology, **d.values()), Q, ratings_of(d))
    d.metrics = ev.metrics_of(0)
    d.meets_spec = bool(ev.meets[0])
    d.violations = ev.violations(0)
    return d, req


def _page_only(directory, design, request, transistor):
    """sheet.html as write_sheet makes it, without drawing the plots (saves seconds)."""
    from drawerfit.sheet import html
    from drawerfit.sheet.parts_csv import pick_route

    directory.mkdir(parents=True, exist_ok=True)
    vb = spread_mod.tolerance_vertices(design)
    ev = evaluate(request, vb, transistor, ratings_of(design), band_edges=False,
                  large_signal=False, corner_gain=False)
    probes = spread_mod.probes(design, request, transistor, vertices_eval=ev, batch=vb)
    page = html.render_html(design, request, schematic_svg=b"<svg/>", response_png=b"",
                            drift_png=b"", route=pick_route(design, request, transistor),
                            probes=probes, cautions=cautions(design, request, transistor),
                            transistor=transistor)
    (directory / "sheet.html").write_text(page, encoding="utf-8")
    return page


@pytest.fixture(scope="module")
def ce_sheet(tmp_path_factory):
    d, req = evaluated("ce")
    out = tmp_path_factory.mktemp("sheet")
    written = write_sheet(out, d, req, Q)
    return d, req, out, written


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)


def _parse_html(path) -> _Collect:
    p = _Collect()
    p.feed(path.read_text(encoding="utf-8"))
    p.close()
    return p


def _svg_lines(path) -> list[str]:
    root = ET.parse(path).getroot()
    lines = []
    for el in root.iter():
        if el.tag in (SVG_NS + "text", SVG_NS + "tspan") and el.text:
            lines.append(el.text.strip())
    return lines


def test_every_file_is_written_and_well_formed(ce_sheet):
    _, _, out, written = ce_sheet
    assert sorted(p.name for p in written) == sorted(SHEET_FILES)
    for name in ("response.png", "drift.png"):
        data = (out / name).read_bytes()
        assert data[:8] == PNG_SIGNATURE and len(data) > 5000
    ET.parse(out / "response.svg")                 # raises on malformed XML
    ET.parse(out / "schematic.svg")
    assert _parse_html(out / "sheet.html").tags[0][0] == "html"


@pytest.mark.parametrize("topology,form", [
    ("ce", "unbypassed"), ("ce", "partly bypassed"), ("ce", "fully bypassed"),
    ("cb", None), ("cc", None)])
def test_schematic_names_every_role_value_and_bin_as_svg_text(tmp_path, topology, form):
    parts = _parts(topology, form or "")
    d = Design(topology, Q.label, parts, {"vb_v": 2.0, "ve_v": 1.35, "vc_v": 7.0}, True)
    path = write_schematic(tmp_path / "s.svg", d, _request(topology),
                           {"base": 2.0, "emitter": 1.35, "collector": 7.0})
    lines = _svg_lines(path)
    for role, pick in parts.items():
        assert role in lines, role
        assert pick.label in lines, (role, pick.label)
        assert f"bin {pick.pieces[0].location}" in lines
    assert "Q" in lines and Q.label in lines
    assert "load" in lines and "signal" in lines and "supply" in lines
    assert {"B 2 V", "E 1.35 V", "C 7 V"} <= set(lines)
    # Polarised capacitors are drawn with their + mark (one per polarised role).
    n_pol = sum(1 for p in parts.values() if p.pieces[0].dielectric == "electrolytic")
    assert lines.count("+") == n_pol


def test_sheet_html_is_self_contained(ce_sheet):
    _, _, out, _ = ce_sheet
    text = (out / "sheet.html").read_text(encoding="utf-8")
    parsed = _parse_html(out / "sheet.html")
    tags = [t for t, _ in parsed.tags]
    for banned in ("script", "link", "iframe", "object", "embed", "base"):
        assert banned not in tags
    imgs = [a for t, a in parsed.tags if t == "img"]
    assert len(imgs) == 3
    for t, attrs in parsed.tags:
        for name in ("src", "href", "srcset", "data", "action", "poster"):
            if name in attrs:
                assert attrs[name].startswith("data:"), (t, name)
    stripped = re.sub(r"data:[\w/+.-]+;base64,[A-Za-z0-9+/=]+", "DATA", text)
    for needle in ("http:", "https:", "//", "url(", "@import"):
        assert needle not in stripped, needle


def test_figures_on_the_sheet_are_the_engines(ce_sheet):
    d, _, out, _ = ce_sheet
    parsed = _parse_html(out / "sheet.html")
    shown = {a["data-metric"]: a["data-value"] for _, a in parsed.tags if "data-metric" in a}
    for key in ("gain", "gain_db", "f_low_hz", "f_high_hz", "zin_ohm", "zout_ohm", "swing_vpk",
                "thd_pct", "ic_drift_pct", "ic_a", "vce_v"):
        assert key in shown
        want = d.metrics[key]
        assert (shown[key] == "") if want is None else float(shown[key]) == want, key


def test_dc_voltages_to_probe_agree_with_ngspice(tmp_path, ce_sheet):
    from optimiser.device import device_from_transistor
    from tests.reference.spice import SpiceDesign, require_ngspice, run_op_ac

    require_ngspice()
    sheets = [ce_sheet[:3]]
    for topo in ("cb", "cc"):
        d, req = evaluated(topo)
        _page_only(tmp_path / topo, d, req, Q)
        sheets.append((d, req, tmp_path / topo))
    for d, req, out in sheets:
        parsed = _parse_html(out / "sheet.html")
        volts = {a["data-node"]: float(a["data-volts"]) for _, a in parsed.tags
                 if "data-node" in a}
        assert set(volts) == {"base", "emitter", "collector"}
        ref = run_op_ac([SpiceDesign(d.topology, d.values(), device_from_transistor(Q))],
                        supply_v=req.supply_v, source_ohm=req.source_ohm,
                        load_ohm=req.load_ohm, mid_hz=req.mid_hz, sweep=None,
                        workdir=tmp_path)[0]
        # Same device model on both sides; the sheet prints 6 significant digits.
        for node, key in (("base", "vb"), ("emitter", "ve"), ("collector", "vc")):
            assert volts[node] == pytest.approx(ref[key], rel=1e-3, abs=1e-3), (d.topology, node)


def test_probe_spread_covers_every_stage_inside_the_tolerance_box(ce_sheet):
    d, req, out, _ = ce_sheet
    parsed = _parse_html(out / "sheet.html")
    probes = {a["data-node"]: a for _, a in parsed.tags if "data-node" in a}
    assert all(float(probes[n]["data-volts"]) > 0 for n in probes)
    vb = spread_mod.tolerance_vertices(d)
    ev = evaluate(req, vb, Q, band_edges=False, large_signal=False, corner_gain=False)
    got = {p.node: p for p in spread_mod.probes(d, req, Q, vertices_eval=ev, batch=vb)}
    # 300 random stages strictly inside the ±5 % box, evaluated by the engine at the
    # nominal point and the drift corners, must lie within the worst-case range.
    rng = np.random.default_rng(1)
    vals = d.values()
    sample = {r: v * (1 + rng.uniform(-0.05, 0.05, 300)) if r in ("R1", "R2", "RC", "RE",
                                                                    "RE_BYP") else v
              for r, v in vals.items()}
    batch = StageBatch.from_values("ce", **sample)
    e2 = evaluate(req, batch, Q, band_edges=False, large_signal=False, corner_gain=False)
    at = spread_mod.nodes_at_corners(req.supply_v, {r: batch.role(r)[:, None] for r in sample},
                                     e2.corners["ic_a"], e2.corners["vce_v"])
    for node, key in (("base", "vb_v"), ("emitter", "ve_v"), ("collector", "vc_v")):
        p = got[node]
        assert p.low < p.volts < p.high
        pool = np.concatenate([e2.metrics[key], at[node].ravel()])
        assert pool.min() >= p.low - 1e-9 and pool.max() <= p.high + 1e-9, node
        # and the range is not vacuous: the samples reach into its outer fifth.
        assert pool.max() - pool.min() > 0.6 * (p.high - p.low)


def test_node_voltages_at_the_corners_match_the_engines_vbe():
    d, req = evaluated("ce")
    b = StageBatch.from_values("ce", **d.values())
    ev = evaluate(req, b, Q, band_edges=False, large_signal=False, corner_gain=False)
    at = spread_mod.nodes_at_corners(req.supply_v, {r: b.role(r)[:, None] for r in d.values()},
                                     ev.corners["ic_a"], ev.corners["vce_v"])
    np.testing.assert_allclose(at["base"] - at["emitter"], ev.corners["vbe_v"], rtol=1e-6)


def test_parts_csv_has_one_row_per_role_and_the_transistor(ce_sheet):
    d, req, out, _ = ce_sheet
    rows = list(csv.DictReader(io.StringIO((out / "parts.csv").read_text(encoding="utf-8"))))
    assert tuple(rows[0].keys())[:6] == ("role", "value", "kind", "rating", "pieces", "location")
    assert tuple(rows[0].keys()) == COLUMNS
    from optimiser.stage import ROLES
    assert [r["role"] for r in rows] == [r for r in ROLES["ce"] if r in d.parts] + ["Q"]
    assert {r["role"] for r in rows} == set(d.parts) | {"Q"}
    by = {r["role"]: r for r in rows}
    assert by["RC"]["value"] == "4k7" and by["RC"]["location"] == "B2"
    assert by["C_OUT"]["rating"] == "25 V" and by["C_OUT"]["plus"] == "collector"
    assert by["R1"]["rating"] == "250 mW"                  # the stock default
    assert by["Q"]["location"] == "T1" and by["Q"]["kind"] == "npn"
    assert all(int(r["pieces"]) == req.builds for r in rows)


def test_parts_count_for_several_copies(tmp_path):
    from drawerfit.sheet.parts_csv import part_rows, pick_route

    d, _ = evaluated("ce")
    req = _request("ce", builds=4)
    rows = {r.role: r for r in part_rows(d, req, Q)}
    assert rows["R1"].pieces == 4 and rows["R1"].per_copy == 1
    route = pick_route(d, req, Q)
    assert [r["location"] for r in route] == sorted((r["location"] for r in route),
                                                    key=location_key)
    assert [r["location"] for r in route][:2] == ["A3", "A10"]   # natural order, not text


def test_cautions_on_the_sheet_are_those_of_the_design(ce_sheet):
    d, req, out, written = ce_sheet
    parsed = _parse_html(out / "sheet.html")
    kinds = [a["data-kind"] for t, a in parsed.tags if t == "li" and "data-kind" in a]
    expect = cautions(d, req, Q)
    assert kinds == [c.kind for c in written.cautions]
    assert sorted(kinds) == sorted(c.kind for c in expect)
    text = (out / "sheet.html").read_text(encoding="utf-8")
    assert "+ toward the collector" in text                 # C_OUT is electrolytic
    assert "verify them on the bench" in text


def test_a_hot_transistor_is_flagged_on_the_sheet(tmp_path):
    # 6k8/2k2 divider, 220 Ω emitter, 470 Ω collector from 12 V: V_TH ≈ 2.9 V, I_C ≈ 10 mA,
    # V_CE ≈ 5 V, so P_Q ≈ 50 mW; with pd = 0.08 W that is above half of pd, the "hot to
    # the touch" rule (common practice), while still within the rating.
    hot_q = Transistor("GP-N1", 100, 300, ft=250e6, cob=4e-12, pd=0.08, location="T1")
    parts = _parts("ce", "unbypassed")
    parts.update(R1=_pick("R1", 6.8e3, "6k8", "A1"), R2=_pick("R2", 2.2e3, "2k2", "A2"),
                 RC=_pick("RC", 470.0, "470", "B1"), RE=_pick("RE", 220.0, "220", "C1"))
    req = _request("ce", gain=None)
    d = Design("ce", hot_q.label, parts, {}, True)
    ev = evaluate(req, StageBatch.from_values("ce", **d.values()), hot_q, ratings_of(d))
    d.metrics = ev.metrics_of(0)
    p = d.metrics["pd_q_w"]
    hot = [c for c in cautions(d, req, hot_q, corners={k: v[0] for k, v in ev.corners.items()})
           if c.kind == "hot"]
    assert (p > 0.04) == bool(hot)
    assert bool(hot)
    page = _page_only(tmp_path, d, req, hot_q)
    assert 'data-kind="hot"' in page and "runs hot" in page


def test_terminal_lists_cautions_and_files(ce_sheet):
    from rich.console import Console

    _, _, out, written = ce_sheet
    con = Console(record=True, width=200)
    echo_sheet(written, con)
    text = con.export_text()
    for c in written.cautions:
        assert c.text[:40] in text
    for p in written:
        assert str(p) in text


def test_matplotlib_draws_off_screen():
    import matplotlib

    import drawerfit.sheet.plots  # noqa: F401

    assert matplotlib.get_backend().lower() == "agg"


def test_the_drift_corners_come_from_the_designs_own_row(tmp_path):
    # An evaluation of several candidates (as the search has it): the sheet must take the
    # corners of the row whose values are the design's, not row 0.
    from drawerfit.sheet.writer import _matching_row

    d, req = evaluated("ce")
    vals = d.values()
    batch = StageBatch.from_values("ce", **{r: np.array([v * 1.2, v]) if r == "RC" else v
                                            for r, v in vals.items()})
    ev = evaluate(req, batch, Q, band_edges=False, large_signal=False)
    assert _matching_row(ev, d) == 1
    other = Design("ce", Q.label, {**d.parts, "RC": _pick("RC", 1.0, "1R0", "Z9")}, d.metrics, True)
    assert _matching_row(ev, other) is None


def test_drift_plot_adds_the_yield_histogram_when_computed(tmp_path):
    from types import SimpleNamespace

    from PIL import Image

    from drawerfit.sheet.plots import plot_drift
    from drawerfit.sheet.writer import _yield_samples

    d, req = evaluated("ce")
    ev = evaluate(req, StageBatch.from_values("ce", **d.values()), Q, band_edges=False,
                  large_signal=False)
    corners = {k: v[0] for k, v in ev.corners.items()}
    rng = np.random.default_rng(0)
    yr = SimpleNamespace(yield_pct=87.5, samples={"gain": rng.normal(10, 0.3, 500)})
    samples, pct = _yield_samples(yr)
    assert pct == 87.5 and set(samples) == {"gain", "gain_db"}
    np.testing.assert_allclose(samples["gain_db"], 20 * np.log10(yr.samples["gain"]))
    two = plot_drift(tmp_path / "two.png", d.metrics, corners, req)
    three = plot_drift(tmp_path / "three.png", d.metrics, corners, req, samples, pct)
    for p in (two, three):
        assert p.read_bytes()[:8] == PNG_SIGNATURE
    assert Image.open(three).size[0] > Image.open(two).size[0]
    assert _yield_samples(None) == (None, None)


def test_a_series_pair_is_named_piece_by_piece(tmp_path):
    from drawerfit.sheet.parts_csv import part_rows

    parts = _parts("ce", "partly bypassed")
    parts["RC"] = RolePick("RC", 4.4e3, "4k4", (Piece(2.2e3, 2, 9, "B7", "resistor"),),
                           "series")
    d = Design("ce", Q.label, parts, {"vb_v": 2.0, "ve_v": 1.35, "vc_v": 7.0}, True)
    lines = _svg_lines(write_schematic(tmp_path / "s.svg", d, _request("ce")))
    assert "4k4 = 2k2 + 2k2" in lines
    row = {r.role: r for r in part_rows(d, _request("ce", builds=3), Q)}["RC"]
    assert row.value == "4k4 (2k2 + 2k2)" and row.per_copy == 2 and row.pieces == 6


def test_open_load_and_ideal_source_are_drawn_without_those_parts(tmp_path):
    d, _ = evaluated("cc")
    req = Request("cc", 12.0, temp_c=(0.0, 50.0))           # no load, source_ohm 0
    ev = evaluate(req, StageBatch.from_values("cc", **d.values()), Q, ratings_of(d))
    d.metrics = ev.metrics_of(0)
    written = write_sheet(tmp_path, d, req, Q)
    lines = _svg_lines(tmp_path / "schematic.svg")
    assert "load" not in lines and "source R" not in lines and "out" in lines
    assert (tmp_path / "response.png").read_bytes()[:8] == PNG_SIGNATURE
    assert [c.kind for c in written.cautions][-1] == "verify"
