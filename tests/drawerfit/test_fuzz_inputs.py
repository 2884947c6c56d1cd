"""Hostile request and circuit files: Hypothesis-made TOML through the real CLI.

`drawerfit analyse FILE --json` and `drawerfit design FILE --json` are run in-process
(Click's runner on ``drawerfit.cli.cli``) on files made by mutating a good circuit or
request: wrong types, huge numbers, nan/inf, zero and negative values, unknown keys and
roles, malformed values, broken TOML, a BOM, latin-1 or UTF-16 bytes, empty files.

Every outcome is either exit 0 with JSON on stdout, or exit 2 with one
``drawerfit: FILE...`` line per problem on stderr (naming the key when one is at fault),
never exit 1 and never a traceback; the store's full contents (``Store.dump()``) are the
same after every run.  The plain tests at the end pin the bugs the fuzzing found.
"""

from __future__ import annotations

import json
import os
import re

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from drawerfit.cli import cli
from inventory.store import open_store
from tests.encodings import encode_as

#: Examples per run; DRAWERFIT_FUZZ_EXAMPLES raises it for a long hunt.
FUZZ_EXAMPLES = int(os.environ.get("DRAWERFIT_FUZZ_EXAMPLES", "150"))

STOCK = """kind,value,qty,location,hfe_min,hfe_max,ft,cob,vceo,ic_max,pd
resistor,1k0,10,A1,,,,,,,
resistor,10k,10,A2,,,,,,,
resistor,47k,10,A3,,,,,,,
capacitor,1u,10,B1,,,,,,,
capacitor,10u,10,B2,,,,,,,
npn,GP-N1,5,C1,100,300,250M,4p,40,0.1,0.5
"""

# A good circuit, one key per line so that a mutation replaces exactly one value.
CIRCUIT = {
    "": [("topology", '"ce"'), ("supply_v", "12.0"), ("load_ohm", '"10k"'),
         ("source_ohm", '"600"'), ("gain_db", "20.0"), ("f_low_max_hz", "50"),
         ("temp_c", "[0, 50]")],
    "parts": [("R1", '"47k"'), ("R2", '"10k"'), ("RC", '"4k7"'), ("RE", '"220"'),
              ("RE_BYP", '"820"'), ("C_BYP", '"47u"'), ("C_IN", '"1u"'), ("C_OUT", '"1u"')],
    "transistor": [("hfe_min", "100"), ("hfe_max", "300"), ("ft", '"250M"'), ("cob", '"4p"')],
    "tolerances": [("R1", '"1%"')],
}
# A good request that the tiny store can answer quickly.
REQUEST = {
    "": [("topology", '"cc"'), ("supply_v", "12.0"), ("load_ohm", '"10k"'),
         ("source_ohm", '"600"'), ("gain", "0.9"), ("gain_tol_db", "2.0"),
         ("f_low_max_hz", "100")],
}

# Hostile TOML values (as written in the file).
HOSTILE = ['"abc"', '"4k7k"', '""', '" "', '"=1+1"', '"+SUM(A1)"', '"@x"', "true", "false",
           "[1, 2]", "[]", "[[1], [2]]", "{a = 1}", "{}", "1e308", "-1e308", "1e400", "-1e400",
           "nan", "+nan", "-nan", "inf", "-inf", '"nan"', '"inf"', '"1e999"', "0", "-0", "0.0",
           "-1", "-12.5", "1e-300", "5e-324", "2.5", "9999999999999999999",
           "-9223372036854775808", "0x10", "1979-05-27", "07:32:00", "1979-05-27T07:32:00Z",
           '"1k\\n2k"', '"\\u2028"', '"\\u0000"', '"ce"', '"cc"', '"xx"', '"any"', '"GP-N1"',
           '"#1"', '"#4"', '"#6"', '"#0"', '"#99999999999999999999"', '"4k7"', '"100n"',
           '"1%"', '"0%"', '"150%"', '"250M"', '"4p"', '"12V"', '"12 kV"', '"1 MEG"',
           '"１２"', '"٣"', '"½"', '"µ"', '"10kΩ"', "[50, 0]", "[0, 50, 100]", '["a", "b"]',
           "[nan, 1]", "[-100, 500]", "1", "12", "100", "1000"]
UNKNOWN_KEYS = ["bogus", "Supply_V", "supply-v", "RX", "R 1", "Q", "C_B", "parts", "label",
                "polarity", "vbe", "builds", "seed", "yield_samples", "min_yield_pct",
                "mains", "allow_combos", "transistor", "tolerances", "input_vpk",
                "thd_max_pct", "zin_min_ohm", "ic_drift_max_pct", "mid_hz",
                "f_high_min_hz", "gain", "gain_db", "temp_c"]
# Values for added keys that stay cheap to evaluate (no huge Monte Carlo runs).
SAFE_FOR = {"yield_samples": ["0", "-1", "2.5", "nan", '"x"', "[1]", "20"],
            "builds": ["0", "-1", "2.5", "1e400", '"2"', "true", "3"]}


def _render(doc: dict[str, list[tuple[str, str]]]) -> str:
    out = []
    for table, items in doc.items():
        if table:
            out.append(f"[{table}]")
        out += [f"{k} = {v}" for k, v in items]
    return "\n".join(out) + "\n"


@st.composite
def toml_files(draw, base: dict) -> bytes:
    """A good file with a few hostile edits, maybe mangled at the byte level."""
    doc = {t: list(items) for t, items in base.items()}
    tables = list(doc)
    for _ in range(draw(st.integers(0, 3))):
        table = draw(st.sampled_from(tables))
        items = doc[table]
        op = draw(st.sampled_from(["value", "value", "value", "drop", "add", "dup"]))
        if op == "value" and items:
            i = draw(st.integers(0, len(items) - 1))
            items[i] = (items[i][0], draw(st.sampled_from(HOSTILE)))
        elif op == "drop" and items:
            items.pop(draw(st.integers(0, len(items) - 1)))
        elif op == "add":
            key = draw(st.sampled_from(UNKNOWN_KEYS))
            if any(k == key for k, _ in items) or key in doc:
                continue
            value = draw(st.sampled_from(SAFE_FOR.get(key, HOSTILE)))
            items.append((key if re.fullmatch(r"[A-Za-z0-9_-]+", key) else f'"{key}"', value))
        elif op == "dup" and items:     # a repeated key: invalid TOML
            items.append(items[draw(st.integers(0, len(items) - 1))])
    text = _render(doc)
    mangle = draw(st.sampled_from(["none"] * 12 + ["bom", "latin1", "utf16", "truncate", "junk",
                                                   "empty", "crlf", "nul"]))
    if mangle == "truncate":
        text = text[: draw(st.integers(0, len(text)))]
    elif mangle == "junk":
        at = draw(st.integers(0, len(text)))
        text = text[:at] + draw(st.sampled_from(['"', "[", "=", "]]", "\x00", "é", "\\", "'''",
                                                 "x = 1\nx = 2\n"])) + text[at:]
    elif mangle == "empty":
        text = draw(st.sampled_from(["", "\n", "   \n\t\n", "# only a comment\n"]))
    elif mangle == "crlf":
        text = text.replace("\n", "\r\n")
    elif mangle == "nul":
        text = "\x00" + text
    return encode_as(text, mangle, "# Kühlschrank\n")


def _no_nan(word: str):
    raise AssertionError(f"{word} in the JSON output (not valid JSON)")


def _check_outcome(result, path, seen: dict) -> None:
    """Exit 0 with JSON, or exit 2 with one `drawerfit: FILE` line per problem."""
    assert result.exit_code in (0, 2), (result.exit_code, result.output, result.exception)
    assert "Traceback" not in result.stderr and "Traceback" not in result.stdout
    if result.exit_code == 0:
        seen["ok"] += 1
        json.loads(result.stdout, parse_constant=_no_nan)   # the shape is tested elsewhere
        return
    seen["refused"] += 1
    lines = result.stderr.strip("\n").split("\n")
    assert lines and all(line.startswith(f"drawerfit: {path}") for line in lines), lines
    assert result.stdout == "", result.stdout


@pytest.fixture(scope="module")
def tiny_store(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("fuzz_inputs")
    db = str(tmp / "stock.sqlite")
    csv = tmp / "stock.csv"
    csv.write_text(STOCK)
    store = open_store(db)
    store.import_csv(csv)
    yield tmp, db, store
    store.close()


def test_hostile_circuit_files_through_analyse(tiny_store, record_property):
    """`analyse FILE --json`: exit 0 or 2 (one line per problem), never 1, store unchanged."""
    tmp, db, store = tiny_store
    runner = CliRunner()
    seen = {"ok": 0, "refused": 0}
    before = store.dump()

    @settings(max_examples=FUZZ_EXAMPLES, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
    @given(data=toml_files(CIRCUIT))
    def check(data: bytes) -> None:
        path = tmp / "circuit.toml"
        path.write_bytes(data)
        result = runner.invoke(cli, ["--db", db, "analyse", str(path), "--json"])
        _check_outcome(result, path, seen)
        assert store.dump() == before

    check()
    record_property("fuzzed", seen)              # figures for the closing note (--junitxml)
    # both outcomes must have been exercised, or the fuzzer proved nothing
    assert seen["refused"] > 0 and seen["ok"] > 0, seen


def test_hostile_request_files_through_design(tiny_store, record_property):
    """`design FILE --json` against a tiny store: the same promises."""
    tmp, db, store = tiny_store
    runner = CliRunner()
    seen = {"ok": 0, "refused": 0}
    before = store.dump()

    @settings(max_examples=max(8, FUZZ_EXAMPLES // 5), deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
    @given(data=toml_files(REQUEST))
    def check(data: bytes) -> None:
        path = tmp / "request.toml"
        path.write_bytes(data)
        result = runner.invoke(cli, ["--db", db, "design", str(path), "--json", "--top", "1"])
        _check_outcome(result, path, seen)
        assert store.dump() == before

    check()
    record_property("fuzzed", seen)
    assert seen["refused"] > 0, seen


# ------------------------------------------------------------------ pinned findings

GOOD_CIRCUIT = _render(CIRCUIT)


def _analyse(tmp_path, text: str | bytes, db: str | None = None):
    p = tmp_path / "c.toml"
    p.write_bytes(text if isinstance(text, bytes) else text.encode())
    r = CliRunner().invoke(cli, ["--db", db or str(tmp_path / "s.db"), "analyse", str(p),
                                 "--json"])
    return r, p


def _one_problem(r, p, field: str | None = None) -> str:
    assert r.exit_code == 2, (r.output, r.exception)
    lines = r.stderr.strip("\n").split("\n")
    assert len(lines) == 1 and lines[0].startswith(f"drawerfit: {p}"), lines
    if field:
        assert f" {field}: " in lines[0], lines
    return lines[0]


def test_valid_circuit_exits_0(tmp_path):
    r, _ = _analyse(tmp_path, GOOD_CIRCUIT)
    assert r.exit_code == 0, r.output
    assert json.loads(r.stdout)["design"]["parts"]["R1"]["value"] == 47000.0


def test_bom_is_accepted(tmp_path):
    r, _ = _analyse(tmp_path, b"\xef\xbb\xbf" + GOOD_CIRCUIT.encode())
    assert r.exit_code == 0, r.output


@pytest.mark.parametrize("data", [GOOD_CIRCUIT.replace("[parts]", "# Kühl\n[parts]")
                                  .encode("latin-1"), GOOD_CIRCUIT.encode("utf-16")])
def test_not_utf8_is_one_line_not_a_traceback(tmp_path, data):
    r, p = _analyse(tmp_path, data)
    assert "not UTF-8" in _one_problem(r, p)


def test_a_directory_is_one_drawerfit_line(tmp_path):
    r = CliRunner().invoke(cli, ["--db", str(tmp_path / "s.db"), "analyse", str(tmp_path)])
    assert r.exit_code == 2 and r.stderr.startswith(f"drawerfit: {tmp_path}:"), r.output


@pytest.mark.parametrize("old, new, field", [
    ('R2 = "10k"', 'R2 = "1k\\n2k"', "parts.R2"),                   # line break in the value
    ('supply_v = 12.0', 'supply_v = "1\\r2"', "supply_v"),
    ('R2 = "10k"', 'R2 = "#99999999999999999999"', "parts.R2"),    # id beyond the store's ints
    ("hfe_max = 300", "hfe_max = 300\nhfe_typ = 1000", "transistor.hfe_typ"),
    ("hfe_max = 300", 'hfe_max = 300\nlabel = ""', "transistor.label"),
    ("hfe_max = 300", "hfe_max = 300\nlabel = [1]", "transistor.label"),
    ("hfe_min = 100", "hfe_min = nan", "transistor.hfe_min"),
])
def test_found_by_fuzzing(tmp_path, old, new, field):
    assert old in GOOD_CIRCUIT
    r, p = _analyse(tmp_path, GOOD_CIRCUIT.replace(old, new))
    line = _one_problem(r, p, field)
    if "nan" in new:
        assert "finite" in line


def test_nan_messages_say_finite(tmp_path):
    r, p = _analyse(tmp_path, GOOD_CIRCUIT.replace("hfe_min = 100", "hfe_min = nan"))
    assert "out of range" not in _one_problem(r, p)


@pytest.fixture
def design_store(tmp_path):
    db = str(tmp_path / "s.sqlite")
    csv = tmp_path / "stock.csv"
    csv.write_text(STOCK)
    s = open_store(db)
    s.import_csv(csv)
    s.close()
    return db


def _design(tmp_path, db, text):
    p = tmp_path / "req.toml"
    p.write_text(text)
    return CliRunner().invoke(cli, ["--db", db, "design", str(p), "--json", "--top", "1"]), p


@pytest.mark.parametrize("extra, field", [
    ('transistor = "NOPE"', "transistor"),                 # the file was not named
    ("[transistor]\nhfe_min = 100\nhfe_max = 300", "transistor"),   # "'inline' not in stock"
    ("load_ohm = 1e-300", "load_ohm"),
    ("source_ohm = 1e300", "source_ohm"),
])
def test_design_refusals_name_the_file(tmp_path, design_store, extra, field):
    text = 'topology = "cb"\nsupply_v = 12\ngain = 5\n' + extra + "\n"
    r, p = _design(tmp_path, design_store, text)
    _one_problem(r, p, field)


def test_common_base_with_extreme_load_and_source_is_refused_not_a_crash(tmp_path,
                                                                            design_store):
    # was a math domain error (log10 of a ratio that underflowed to 0) in the request check
    text = ('topology = "cb"\nsupply_v = 12\nload_ohm = 1e-300\nsource_ohm = 1e300\n'
            "gain = 5\n")
    r, p = _design(tmp_path, design_store, text)
    # both bad keys are reported, one line each
    assert r.exit_code == 2, (r.output, r.exception)
    lines = r.stderr.strip("\n").split("\n")
    assert len(lines) == 2 and all(x.startswith(f"drawerfit: {p}") for x in lines), lines
    assert ": load_ohm: " in lines[0] and ": source_ohm: " in lines[1]
