"""The stock file: reading with row-level checks, writing it back."""

from __future__ import annotations

import pytest

from inventory.errors import InputError
from inventory.parts import Capacitor, Resistor, Transistor
from inventory.tabular import COLUMNS, read_stock_csv, write_stock_csv


def _write(tmp_path, text: str, name: str = "stock.csv", encoding: str = "utf-8"):
    p = tmp_path / name
    p.write_bytes(text.encode(encoding))
    return p


def _errors(exc: InputError) -> list[InputError]:
    return list(getattr(exc, "errors", [exc]))


def test_defaults_from_interface_md(tmp_path):
    p = _write(tmp_path, "kind,value,qty,hfe_min,hfe_max\nresistor,4k7,3,,\n"
                         "capacitor,100n,2,,\nnpn,T-1,1,100,300\n")
    r, c, q = (row.part for row in read_stock_csv(p))
    assert r == Resistor(value=4700.0, qty=3, tolerance=0.05, power_w=0.25)
    assert c == Capacitor(value=100e-9, qty=2, tolerance=0.20, voltage_v=50.0,
                          dielectric="ceramic")
    assert (q.vbe, q.ic_ref, q.vaf, q.vce_sat) == (0.65, 1e-3, 100.0, 0.2)
    assert (q.hfe_min, q.hfe_max, q.ft, q.cob) == (100.0, 300.0, None, None)


def test_header_case_blank_lines_and_bom(tmp_path):
    text = "\ufeffKIND, Value ,Qty,Location\n\nresistor,1k0,5,A1\n\n\ncapacitor,4n7,1,\n"
    rows = read_stock_csv(_write(tmp_path, text))
    assert [r.line for r in rows] == [3, 6]
    assert rows[0].part.location == "A1"


def test_three_digit_code_is_for_capacitors(tmp_path):
    """Common practice (and docs/values.md): three bare digits on a capacitor are pF code."""
    rows = read_stock_csv(_write(tmp_path, "kind,value,qty\ncapacitor,104,1\ncapacitor,100,1\n"
                                           "resistor,100,1\n"))
    assert [r.part.value for r in rows] == pytest.approx([100e-9, 10e-12, 100.0])


@pytest.mark.parametrize("row, field, words", [
    ("transformer,1k,1", "kind", "unknown kind"),
    ("resistor,4k7k,1", "value", "4k7k"),
    ("resistor,4k7,-2", "qty", "negative"),
    ("resistor,4k7,2.5", "qty", "whole"),
    ("resistor,4k7,lots", "qty", "not a number"),
    ("resistor,4k7,", "qty", "empty"),
    ("capacitor,47,1", "value", "47"),            # a bare number on a capacitor is ambiguous
    ("resistor,4k7,1,7", "tolerance", ""),
    ("npn,T-9,4,", "hfe_min", "hfe_min and hfe_max"),
    ("resistor,nan,1", "value", ""),
    ("resistor,1e999,1", "value", ""),
    ("resistor,4k7,99999999999", "qty", "too large"),
    ("resistor,=1+1,1", "value", ""),
])
def test_bad_row_is_named_with_line_and_column(tmp_path, row, field, words):
    text = "kind,value,qty,tolerance\nresistor,1k0,1,\n" + row + "\n"
    with pytest.raises(InputError) as info:
        read_stock_csv(_write(tmp_path, text))
    errs = _errors(info.value)
    assert any(e.line == 3 and e.field == field for e in errs), [str(e) for e in errs]
    assert all(str(tmp_path / "stock.csv") in str(e) for e in errs)
    assert words.lower() in str(info.value).lower()


def test_every_bad_row_is_reported(tmp_path):
    text = "kind,value,qty\nresistor,1k0,1\nresistor,xx,1\nresistor,1k0,-1\ndiode,1,1\n"
    with pytest.raises(InputError) as info:
        read_stock_csv(_write(tmp_path, text))
    assert sorted((e.line, e.field) for e in _errors(info.value)) == [
        (3, "value"), (4, "qty"), (5, "kind")]


def test_unknown_and_missing_columns(tmp_path):
    with pytest.raises(InputError, match="unknown column 'colour'") as info:
        read_stock_csv(_write(tmp_path, "kind,value,qty,colour\nresistor,1k,1,red\n"))
    assert info.value.line == 1
    with pytest.raises(InputError, match="missing column 'qty'"):
        read_stock_csv(_write(tmp_path, "kind,value\nresistor,1k\n"))
    with pytest.raises(InputError, match="appears twice"):
        read_stock_csv(_write(tmp_path, "kind,value,qty,QTY\nresistor,1k,1,1\n"))


def test_transistor_label_with_two_descriptions_is_a_conflict(tmp_path):
    text = ("kind,value,qty,hfe_min,hfe_max\nnpn,T-1,2,100,300\nresistor,1k,1,,\n"
            "npn,T-1,3,100,400\n")
    with pytest.raises(InputError, match="described differently on line 2") as info:
        read_stock_csv(_write(tmp_path, text))
    assert info.value.line == 4


def test_transistor_figures_must_make_sense(tmp_path):
    text = "kind,value,qty,hfe_min,hfe_max,hfe_typ,ft\nnpn,T-1,2,300,100,,\nnpn,T-2,1,100,200,500,\n"
    with pytest.raises(InputError) as info:
        read_stock_csv(_write(tmp_path, text))
    assert sorted((e.line, e.field) for e in _errors(info.value)) == [(2, "hfe_max"),
                                                                       (3, "hfe_typ")]


def test_ratings_that_do_not_apply_are_refused(tmp_path):
    with pytest.raises(InputError) as info:
        read_stock_csv(_write(tmp_path, "kind,value,qty,voltage\nresistor,1k,1,50\n"))
    assert info.value.field == "voltage" and info.value.line == 2


def test_not_utf8_and_stray_quote_are_one_clear_error(tmp_path):
    with pytest.raises(InputError, match="UTF-8"):
        read_stock_csv(_write(tmp_path, "kind,value,qty\nresistor,1kΩ,1\n", encoding="utf-16"))
    with pytest.raises(InputError, match="CSV"):
        read_stock_csv(_write(tmp_path, 'kind,value,qty\nresistor,"1k,1\n'))
    with pytest.raises(InputError, match="fields"):
        read_stock_csv(_write(tmp_path, "kind,value,qty\nresistor,1,000,1\n"))
    with pytest.raises(InputError, match="empty"):
        read_stock_csv(_write(tmp_path, ""))
    with pytest.raises(InputError, match="no such file"):
        read_stock_csv(tmp_path / "absent.csv")


def _parts():
    return [
        Resistor(value=4700.0, qty=10, location="A1"),
        Resistor(value=1.0e6, qty=3, tolerance=0.01, power_w=0.5, location="A2", min_qty=5),
        Resistor(value=4990.0, qty=2, tolerance=0.001, location=""),
        Resistor(value=0.47, qty=1, location="R-box"),
        Capacitor(value=22e-12, qty=20, tolerance=0.1, voltage_v=100, dielectric="c0g"),
        Capacitor(value=4.7e-9, qty=1, location="=HYPERLINK(\"x\")"),
        Capacitor(value=470e-6, qty=4, voltage_v=16, dielectric="electrolytic", location="B3"),
        Capacitor(value=1.234e-9, qty=1),
        Transistor(label="GP-N1", hfe_min=110, hfe_max=220, qty=12, vaf=90, ft=250e6,
                   cob=4e-12, vceo=40, ic_max=0.2, pd=0.5, location="C1"),
        Transistor(label="-P2", polarity="pnp", hfe_min=80, hfe_max=250, hfe_typ=150, qty=0,
                   vbe=0.7, ic_ref=2e-3),
    ]


def test_write_then_read_gives_the_same_parts(tmp_path):
    path = tmp_path / "out.csv"
    write_stock_csv(path, _parts())
    rows = read_stock_csv(path)
    back = [r.part if r.min_qty is None else
            type(r.part)(**{**r.part.__dict__, "min_qty": r.min_qty}) for r in rows]
    assert back == _parts()
    header = path.read_text(encoding="utf-8").splitlines()[0]
    assert header == ",".join(COLUMNS)


def test_formula_like_cells_are_neutralised_on_export(tmp_path):
    """Cells starting = + - @ are written with a leading quote so a spreadsheet shows them
    as text (common practice against CSV formula injection)."""
    path = tmp_path / "out.csv"
    write_stock_csv(path, _parts())
    text = path.read_text(encoding="utf-8")
    assert "'=HYPERLINK" in text and ",'-P2," in text
    for line in text.splitlines()[1:]:
        for cell in line.split(","):
            assert not cell.startswith(("=", "+", "-", "@")), line
