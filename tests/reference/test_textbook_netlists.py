"""The ngspice figures of the textbook checks, rerun from the netlists in the repository.

test_textbook_bias.py and test_textbook_ac.py compare the engine with figures that
ngspice [NGSPICE] gives for textbook worked examples [BN, MB, SS].  Each of those
circuits is a netlist in tests/reference/netlists/textbook/, with a header naming its
source (keys of tests/reference/SOURCES.md), the circuit and the model (TEMP = TNOM =
27 °C, BF = the book's β, IS for V_BE = 0.70 V at the example's current, no VAF), and
a ``.control`` block that prints each figure by name.  This module runs every netlist
as it is (``ngspice -b``, through tests/reference/spice.py) and asserts the figure the
engine tests carry, within the digits it was written with: rel 1e-3 for four
significant digits, 1e-4 for five.  Without ngspice the reruns skip with the reason
(a failure under CI=true); the header checks run everywhere.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from .spice import require_ngspice, run_netlist_file

pytestmark = pytest.mark.reference

HERE = Path(__file__).resolve().parent
NETLISTS = HERE / "netlists" / "textbook"

#: netlist, printed quantity, figure in the engine test, relative tolerance, source
FIGURES = [
    # test_textbook_bias.py
    ("bn-ch4-voltage-divider.cir", "ib", 6.045e-6, 1e-3, "[BN] Ch. 4 voltage-divider bias"),
    ("bn-ch4-voltage-divider.cir", "ic", 0.8463e-3, 1e-3, "[BN] Ch. 4 voltage-divider bias"),
    ("bn-ch4-voltage-divider.cir", "vce", 12.258, 1e-4, "[BN] Ch. 4 voltage-divider bias"),
    ("bn-ch4-voltage-divider.cir", "s_vbe", -0.6383e-3, 1e-3, "[BN] Ch. 4 S(V_BE)"),
    ("mb-voltage-divider.cir", "vb", 1.7839, 1e-4, "[MB] Transistor Biasing, VDB"),
    ("mb-voltage-divider.cir", "ve", 1.0839, 1e-4, "[MB] Transistor Biasing, VDB"),
    ("mb-voltage-divider.cir", "vc", 6.1365, 1e-4, "[MB] Transistor Biasing, VDB"),
    ("ss-divider-bias.cir", "ie_80k", 0.9308e-3, 1e-3, "[SS] Ch. 5 bias design"),
    ("ss-divider-bias.cir", "ie_8k", 0.9956e-3, 1e-3, "[SS] Ch. 5 bias design"),
    ("bn-ch5-emitter-bias.cir", "ib", 35.89e-6, 1e-3, "[BN] Ch. 5 CE emitter bias"),
    ("bn-ch5-emitter-bias.cir", "ie", 4.3426e-3, 1e-4, "[BN] Ch. 5 CE emitter bias"),
    ("bn-ch5-emitter-follower.cir", "ib", 20.42e-6, 1e-3, "[BN] Ch. 5 emitter follower"),
    ("bn-ch5-emitter-follower.cir", "ie", 2.0628e-3, 1e-4, "[BN] Ch. 5 emitter follower"),
    # test_textbook_ac.py
    ("mb-voltage-divider.cir", "av", 109.8, 1e-3, "[MB] Voltage Amplifiers, bypassed"),
    ("mb-swamped.cir", "av", 12.86, 1e-3, "[MB] Voltage Amplifiers, swamped"),
    ("bn-ch5-emitter-bias.cir", "av", -3.855, 1e-3, "[BN] Ch. 5 CE emitter bias"),
    ("bn-ch5-emitter-bias.cir", "zin", 59.77e3, 1e-3, "[BN] Ch. 5 CE emitter bias"),
    ("bn-ch5-common-base.cir", "zin", 19.54, 1e-3, "[BN] Ch. 5 common base"),
    ("bn-ch5-common-base.cir", "av", 245.9, 1e-3, "[BN] Ch. 5 common base"),
    ("bn-ch5-emitter-follower.cir", "av", 0.99621, 1e-4, "[BN] Ch. 5 emitter follower"),
    ("bn-ch5-emitter-follower.cir", "zin", 132.72e3, 1e-4, "[BN] Ch. 5 emitter follower"),
    ("bn-ch5-emitter-follower.cir", "zout", 12.49, 1e-3, "[BN] Ch. 5 emitter follower"),
    ("bn-ch9-low-frequency.cir", "f_ls", 6.735, 1e-3, "[BN] Ch. 9 low-frequency response"),
    ("bn-ch9-low-frequency.cir", "f_lc", 25.670, 1e-4, "[BN] Ch. 9 low-frequency response"),
    ("bn-ch9-low-frequency.cir", "f_le", 321.06, 1e-4, "[BN] Ch. 9 low-frequency response"),
    ("bn-ch9-low-frequency.cir", "f_all", 328.0, 1e-3, "[BN] Ch. 9 low-frequency response"),
    ("bn-ch9-low-frequency.cir", "avs", -49.78, 1e-3, "[BN] Ch. 9 low-frequency response"),
]

@pytest.fixture(scope="module")
def rerun(tmp_path_factory):
    """Figures printed by a netlist, each netlist run once per module."""
    require_ngspice()
    _results: dict[str, dict[str, float]] = {}

    def get(name: str) -> dict[str, float]:
        if name not in _results:
            _results[name] = run_netlist_file(NETLISTS / name,
                                              tmp_path_factory.mktemp("textbook"))
        return _results[name]

    return get


@pytest.mark.parametrize("netlist, quantity, figure, rel, source", FIGURES,
                         ids=[f"{n[:-4]}:{q}" for n, q, *_ in FIGURES])
def test_netlist_reproduces_the_recorded_figure(rerun, netlist, quantity, figure, rel, source):
    printed = rerun(netlist)
    assert quantity in printed, f"{netlist} printed no {quantity}: {sorted(printed)}"
    assert printed[quantity] == pytest.approx(figure, rel=rel), (
        f"{source}: ngspice on {netlist} gives {quantity} = {printed[quantity]:.7g}, "
        f"the engine test carries {figure:g}")


def _keys_of_sources() -> set[str]:
    text = (HERE / "SOURCES.md").read_text(encoding="utf-8")
    return set(re.findall(r"^- \*\*\[([A-Z0-9-]+)\]\*\*", text, re.M))


def _netlist_files() -> list[Path]:
    return sorted(NETLISTS.glob("*.cir"))


def test_every_netlist_is_in_the_table_and_every_row_has_its_netlist():
    on_disk = {p.name for p in _netlist_files()}
    in_table = {n for n, *_ in FIGURES}
    assert on_disk, "no netlists found"
    assert on_disk == in_table


@pytest.mark.parametrize("path", _netlist_files(), ids=lambda p: p.name)
def test_netlist_header_names_its_source_and_model(path):
    """Each header cites a key of SOURCES.md and states the model of the module docstring."""
    lines = path.read_text(encoding="ascii").splitlines()
    header = "\n".join(line for line in lines if line.startswith("*"))
    cited = set(re.findall(r"\[([A-Z0-9-]+)\]", header))
    assert cited & {"BN", "MB", "SS"}, f"{path.name} names no book"
    assert cited <= _keys_of_sources(), f"{path.name} cites keys not in SOURCES.md"
    assert "TEMP = TNOM = 27 C" in header and "no VAF" in header
    assert ".options TEMP=27 TNOM=27" in lines
    model = [line for line in lines if line.lower().startswith(".model")]
    assert model == [".model QB NPN(IS={ic07/exp(0.70/vt)} BF={beta})"]


def test_engine_tests_point_at_netlists_that_exist():
    """The comments of the engine-vs-figure checks name netlists of this folder."""
    named = set()
    for module in ("test_textbook_bias.py", "test_textbook_ac.py"):
        named |= set(re.findall(r"netlists/textbook/([\w.-]+\.cir)",
                                (HERE / module).read_text(encoding="utf-8")))
    assert named == {p.name for p in _netlist_files()}
