"""Hostile stock files: Hypothesis-made CSV bytes through `drawerfit stock import`.

Every input either imports (exit 0, the store still sound) or is refused with
exit 2, one `drawerfit: …` line per problem on stderr, no traceback, and the
store's full contents unchanged (compared table by table).
"""

from __future__ import annotations

import csv
import io
import os

from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from drawerfit.cli import cli
from inventory.store import open_store
from tests.encodings import encode_as

#: Examples per run; DRAWERFIT_FUZZ_EXAMPLES raises it for a long hunt.
FUZZ_EXAMPLES = int(os.environ.get("DRAWERFIT_FUZZ_EXAMPLES", "120"))

GOOD_VALUES = ["4k7", "100n", "104", "2R2", "1M0", "22K", "4u7", "470", "10", "GP-N1"]
HOSTILE = ["=1+1", "+SUM(A1)", "-2", "@cmd", "NaN", "nan", "inf", "-inf", "1e308", "1e999",
           "9" * 40, "", " ", "\"", "'", "''=1", "\t5", "0x10", "1_000", "٣", "½", "µ", "Ω",
           "4k7k", "-0", "+5", "5.0", "5,5", "None", "NULL", "NA", "#N/A", "true", "\u202e1k",
           "\x00", "1k\r\n2k", "ohm", "1 000", "１００", "1e-30", "0"]
KINDS = ["resistor", "capacitor", "npn", "pnp", "RESISTOR", " capacitor ", "diode", ""]
COLUMNS = ["kind", "value", "qty", "tolerance", "power", "voltage", "dielectric", "location",
           "min_qty", "hfe_min", "hfe_max", "ft", "cob", "Kind", "colour", ""]

cell = st.one_of(st.sampled_from(GOOD_VALUES + HOSTILE),
                 st.integers(-10**12, 10**12).map(str),
                 st.floats(allow_nan=True, allow_infinity=True).map(repr),
                 st.text(max_size=12))


GOOD_ROWS = [["resistor", "4k7", "5", "5%", "A1", "", ""],
             ["resistor", "2R2", "1", "1%", "", "", ""],
             ["capacitor", "104", "10", "10%", "B2", "", ""],
             ["capacitor", "22K", "3", "", "B3", "", ""],
             ["npn", "GP-N1", "2", "", "", "100", "300"],
             ["pnp", "FZ-P1", "0", "", "C9", "80", "200"]]
STD_HEADER = ["kind", "value", "qty", "tolerance", "location", "hfe_min", "hfe_max"]


@st.composite
def stock_files(draw) -> bytes:
    mode = draw(st.sampled_from(["clean", "one_bad", "chaos"]))
    if mode == "chaos":
        header = draw(st.one_of(st.just(STD_HEADER),
                                st.lists(st.sampled_from(COLUMNS), min_size=1, max_size=8)))
        rows = []
        for _ in range(draw(st.integers(0, 6))):
            row = []
            for name in header:
                if name.lower() == "kind" and draw(st.booleans()):
                    row.append(draw(st.sampled_from(KINDS)))
                elif name.lower() == "qty" and draw(st.booleans()):
                    row.append(str(draw(st.integers(-3, 50))))
                else:
                    row.append(draw(cell))
            rows.append(row)
    else:
        header = STD_HEADER
        rows = [list(r) for r in draw(st.lists(st.sampled_from(GOOD_ROWS), min_size=1,
                                               max_size=8))]
        for r in rows:
            r[2] = str(draw(st.integers(0, 40)))
        if mode == "one_bad":
            i = draw(st.integers(0, len(rows) - 1))
            j = draw(st.integers(0, len(header) - 1))
            rows[i][j] = draw(cell)
    buf = io.StringIO()
    csv.writer(buf, lineterminator=draw(st.sampled_from(["\n", "\r\n", "\r"]))).writerows(
        [header, *rows])
    text = buf.getvalue()
    mangle = "none" if mode == "clean" else draw(st.sampled_from(
        ["none", "none", "none", "bom", "quote", "truncate", "latin1", "utf16", "nul",
         "extra_field"]))
    if mangle == "quote" and text:
        at = draw(st.integers(0, len(text) - 1))
        text = text[:at] + '"' + text[at:]
    elif mangle == "truncate" and text:
        text = text[: draw(st.integers(0, len(text)))]
    elif mangle == "extra_field":
        text += "resistor,1k,1,,,,,,,,,,,,,,,,,,,,,,,,,\n"
    elif mangle == "nul":
        text = text + "\x00"
    return encode_as(text, mangle, "resistor,4k7,1,Kühlschrank\n")


def test_hostile_stock_files_are_refused_cleanly_or_imported(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("fuzz")
    db = str(tmp / "stock.sqlite")
    seed = tmp / "seed.csv"
    seed.write_text("kind,value,qty,hfe_min,hfe_max\nresistor,4k7,10,,\nnpn,GP-N1,3,100,300\n")
    store = open_store(db)
    store.import_csv(seed)
    runner = CliRunner()
    seen = {"ok": 0, "refused": 0}

    @settings(max_examples=FUZZ_EXAMPLES, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
    @given(data=stock_files())
    def check(data: bytes) -> None:
        path = tmp / "fuzz.csv"
        path.write_bytes(data)
        _judge(runner, store, seen, ["--db", db, "stock", "import", str(path)])

    try:
        check()
    finally:
        store.close()
    assert seen["refused"] > 0 and seen["ok"] > 0
    with open(tmp / "figures.txt", "w") as fh:      # for the closing note's figures
        fh.write(f"{seen}\n")


# ----------------------------------------------------------- build lists (TOML)

TOML_VALUES = ['"ce"', '"cc"', '"xx"', "12", "-5", "0", "1e400", "nan", "inf", '"12"', "true",
               "[1, 2]", "{a = 1}", '"=1+1"', '"4k7"', '"1%"', "3.5", "9999999999999",
               '"E24"', '"E7"', '""', "-inf", '"any"', '"GP-N1"']
REQUEST_KEYS = ["topology", "supply_v", "load_ohm", "gain_db", "f_low_max_hz", "builds",
                "transistor", "temp_c", "bogus_key"]
BUILD_KEYS = ["count", "identical", "name", "colour"]
PURCHASE_KEYS = ["series", "pack", "resistor_price", "line_cost", "capacitor_voltage", "nope"]


@st.composite
def build_lists(draw) -> bytes:
    out = []
    for _ in range(draw(st.integers(0, 2))):
        out.append("[[build]]")
        for key in draw(st.lists(st.sampled_from(BUILD_KEYS), max_size=3, unique=True)):
            out.append(f"{key} = {draw(st.sampled_from(TOML_VALUES))}")
        out.append("[build.request]")
        keys = draw(st.lists(st.sampled_from(REQUEST_KEYS), max_size=5, unique=True))
        if draw(st.booleans()):
            keys = ["topology", "supply_v", *[k for k in keys if k not in ("topology",
                                                                            "supply_v")]]
        for key in keys:
            out.append(f"{key} = {draw(st.sampled_from(TOML_VALUES))}")
    if draw(st.booleans()):
        out.append("[purchase]")
        for key in draw(st.lists(st.sampled_from(PURCHASE_KEYS), max_size=3, unique=True)):
            out.append(f"{key} = {draw(st.sampled_from(TOML_VALUES))}")
    text = "\n".join(out) + "\n"
    if draw(st.integers(0, 9)) == 0:
        text = text[: draw(st.integers(0, len(text)))] + draw(st.sampled_from(['"', "[", "=",
                                                                                "\x00", "é"]))
    return text.encode("utf-8")


def test_hostile_build_lists_never_touch_the_store(tmp_path_factory):
    """`plan --commit` with Hypothesis-made build lists: exit 0 or 2, never a traceback;
    whenever it exits 2 the store is exactly as before."""
    tmp = tmp_path_factory.mktemp("fuzz_toml")
    db = str(tmp / "stock.sqlite")
    seed = tmp / "seed.csv"
    seed.write_text("kind,value,qty,hfe_min,hfe_max\nresistor,4k7,10,,\nresistor,47k,4,,\n"
                    "resistor,10k,4,,\nresistor,1k0,4,,\ncapacitor,10u,4,,\n"
                    "npn,GP-N1,3,100,300\n")
    store = open_store(db)
    store.import_csv(seed)
    runner = CliRunner()
    seen = {"ok": 0, "refused": 0}

    @settings(max_examples=max(20, FUZZ_EXAMPLES // 3), deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow])
    @given(data=build_lists())
    def check(data: bytes) -> None:
        path = tmp / "list.toml"
        path.write_bytes(data)
        _judge(runner, store, seen, ["--db", db, "plan", str(path), "--commit", "--json",
                                     "--candidates", "3", "--time-limit", "5"])

    try:
        check()
    finally:
        store.close()
    assert seen["refused"] > 0
    with open(tmp / "figures.txt", "w") as fh:
        fh.write(f"{seen}\n")


def _judge(runner, store, seen: dict, args: list[str]) -> None:
    """Run one fuzzed command: exit 0 with a consistent store, or exit 2 with one
    ``drawerfit:`` line per problem and the store exactly as before."""
    before = store.dump()
    result = runner.invoke(cli, args)
    assert result.exit_code in (0, 2), (result.exit_code, result.output, result.exception)
    assert "Traceback" not in result.output
    if result.exit_code == 2:
        seen["refused"] += 1
        lines = result.stderr.strip().splitlines()
        assert lines and all(line.startswith("drawerfit: ") for line in lines), lines
        assert store.dump() == before
    else:
        seen["ok"] += 1
        assert store.check() == []
