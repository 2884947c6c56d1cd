"""The terminal view of a two-transistor analysis on an 80-column console: no line is
wider than the terminal and no figure is broken over two lines (a technician reads
the operating points off one row per transistor)."""

from __future__ import annotations

import io
import re
from pathlib import Path

import pytest
from rich.cells import cell_len
from rich.console import Console

from drawerfit.render.analysis import show_pair_analysis
from optimiser.circuit_file import load_circuit
from optimiser.pair_evaluate import evaluate_pair
from optimiser.pair_report import pair_cautions, pair_report

EXAMPLES = Path(__file__).resolve().parents[2] / "examples" / "bench"
FIGURE = re.compile(r"-?[\d.]+ (m|µ|k)?(V|A|W)|-?[\d.]+ %")


@pytest.mark.parametrize("name", ["preamp-buffer.toml", "cascode-check.toml"])
def test_fits_80_columns(name):
    c = load_circuit(EXAMPLES / name)
    ev = evaluate_pair(c.request, c.batch(), c.transistors, c.ratings)
    report = pair_report(ev, 0, c, pair_cautions(ev, 0, c))
    con = Console(width=80, record=True, file=io.StringIO(), color_system=None)
    show_pair_analysis(report, ev, c, console=con)
    lines = con.export_text().splitlines()
    assert max(cell_len(s) for s in lines) <= 80
    rows = [s for s in lines if re.match(r"^│ S[12] ", s)]
    assert len(rows) == 2, "one operating-point row per transistor"
    for s in rows:
        cells = [x.strip() for x in s.strip("│").split("│")]
        assert all(FIGURE.fullmatch(x) for x in cells[1:]), s
