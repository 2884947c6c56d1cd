"""The stock file (CSV) read and written through pandas, with row-level checks.

The columns are those of docs/stock.md ("The stock file"); names are matched without
regard to case.  Reading checks every row and reports every bad one with its
line number as an editor counts it (the header is line 1), the column and the
reason, and raises before anything is handed to the store: an import is all
rows or none.

Cells that a spreadsheet would run as a formula (starting with ``=``, ``+``,
``-`` or ``@``) are written with a leading single quote, and that quote is
taken off again when read, so exported files are safe to open and still import
to the same stock.
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from pathlib import Path

from inventory import values
from inventory.errors import InputError, InputErrors
from inventory.parts import (
    DEFAULT_CAPACITOR_TOLERANCE,
    DEFAULT_CAPACITOR_VOLTAGE_V,
    DEFAULT_RESISTOR_POWER_W,
    DEFAULT_RESISTOR_TOLERANCE,
    Capacitor,
    Resistor,
    Transistor,
)

__all__ = [
    "COLUMNS",
    "StockRow",
    "read_stock_csv",
    "write_stock_csv",
    "part_key",
    "same_transistor",
    "transistor_differences",
    "figure_text",
    "file_digest",
    "neutralise_cell",
    "merge_rows",
    "part_cells",
    "part_from_cells",
]

#: Every column of the stock file, in the order ``stock export`` writes them.
COLUMNS: tuple[str, ...] = (
    "kind", "value", "qty", "tolerance", "power", "voltage", "dielectric", "location",
    "min_qty", "hfe_min", "hfe_max", "hfe_typ", "vbe", "ic_ref", "vaf", "vce_sat",
    "vceo", "ic_max", "pd", "ft", "cob",
)
REQUIRED: tuple[str, ...] = ("kind", "value", "qty")
TRANSISTOR_KINDS = ("npn", "pnp")
KINDS = ("resistor", "capacitor", *TRANSISTOR_KINDS)

#: Transistor figures: column -> (unit suffix accepted, default, must be > 0).
_TRANSISTOR_FIGURES: dict[str, tuple[str, float | None]] = {
    "hfe_min": ("", None),
    "hfe_max": ("", None),
    "hfe_typ": ("", None),
    "vbe": ("V", 0.65),
    "ic_ref": ("A", 1e-3),
    "vaf": ("V", 100.0),
    "vce_sat": ("V", 0.2),
    "vceo": ("V", None),
    "ic_max": ("A", None),
    "pd": ("W", None),
    "ft": ("Hz", None),
    "cob": ("F", None),
}
_RC_ONLY = ("tolerance",)
_R_ONLY = ("power",)
_C_ONLY = ("voltage", "dielectric")

#: Largest quantity a row may hold (the store's integer column).
MAX_QTY = 2**31 - 1
_QTY_RE = re.compile(r"^\+?[0-9]+$")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


@dataclass(frozen=True)
class StockRow:
    """One good row of a stock file.

    ``part`` carries the quantity; ``min_qty`` is None when the file has no
    ``min_qty`` cell for the row.
    """

    line: int
    part: Resistor | Capacitor | Transistor
    min_qty: int | None = None


# ----------------------------------------------------------------- keys

def _k(x: float | None) -> float | None:
    """A float rounded to 12 significant figures, for identity comparisons."""
    if x is None:
        return None
    return float(f"{x:.12g}")


def part_key(part) -> tuple:
    """What makes two stock rows the same item (docs/stock.md: same kind, value, ratings, location).

    Transistor types are the same item when they carry the same label.
    """
    if isinstance(part, Transistor):
        return ("transistor", part.label)
    if isinstance(part, Resistor):
        return ("resistor", _k(part.value), _k(part.tolerance), _k(part.power_w), "", "",
                part.location)
    return ("capacitor", _k(part.value), _k(part.tolerance), _k(part.voltage_v),
            part.dielectric.lower(), part.location)


def same_transistor(a: Transistor, b: Transistor) -> bool:
    """True when two transistor descriptions agree in every figure (quantity aside)."""
    return not transistor_differences(a, b)


def figure_text(column: str, x: float | None) -> str:
    """A transistor figure as the stock file writes it: ``ft`` and ``cob`` as a
    technician writes them (``300M``, ``3p5``, via :func:`inventory.values.format_value`)
    when that reads back to the same number, every other figure as a plain number."""
    if x is None:
        return ""
    kind = {"ft": "resistor", "cob": "capacitor"}.get(column)
    if kind is not None:
        text = values.format_value(x, kind)
        try:
            if _number(text, _TRANSISTOR_FIGURES[column][0]) == x:
                return text
        except InputError:
            pass
    return _plain(x)


def transistor_differences(a: Transistor, b: Transistor) -> list[tuple[str, str, str]]:
    """The figures in which two descriptions of a transistor type differ:
    ``(column, text in a, text in b)``; the polarity is the column ``kind``."""
    out = []
    if a.polarity != b.polarity:
        out.append(("kind", a.polarity, b.polarity))
    for n in _TRANSISTOR_FIGURES:
        x, y = getattr(a, n), getattr(b, n)
        if _k(x) != _k(y):
            out.append((n, figure_text(n, x) or "empty", figure_text(n, y) or "empty"))
    return out


def file_digest(path: str | Path) -> str:
    """SHA-256 (hex) of a file's bytes: what says that a file was read before."""
    import hashlib

    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror}", file=str(path)) from None


# --------------------------------------------------------------- reading

def _unquote(cell: str) -> str:
    """Take off the quote that export puts before formula-like text."""
    if len(cell) >= 2 and cell[0] == "'" and cell[1] in _FORMULA_START:
        return cell[1:]
    return cell


def _decode(path: Path) -> str:
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError("no such file", file=str(path)) from None
    except IsADirectoryError:
        raise InputError("is a folder, not a CSV file", file=str(path)) from None
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror}", file=str(path)) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(f"not UTF-8 text (byte {exc.start}); save the file as UTF-8 CSV",
                         file=str(path), line=line) from None
    if "\x00" in text:
        line = text[: text.index("\x00")].count("\n") + 1
        raise InputError("contains NUL bytes; this is not a CSV text file", file=str(path),
                         line=line)
    return text


def _record_lines(text: str, file: str) -> tuple[list[str], list[int]]:
    """The header and the starting line of every non-blank data record.

    Also checks that no record has more fields than the header (pandas would
    otherwise shift such a row silently).
    """
    reader = csv.reader(io.StringIO(text))
    header: list[str] | None = None
    lines: list[int] = []
    prev = 0
    try:
        for rec in reader:
            start = prev + 1
            prev = reader.line_num
            if not rec or (len(rec) == 1 and not rec[0].strip()):
                continue
            if header is None:
                header = rec
                continue
            if len(rec) > len(header):
                raise InputError(f"{len(rec)} fields but the header has {len(header)}; "
                                 "a value containing a comma must be quoted",
                                 file=file, line=start)
            lines.append(start)
    except csv.Error as exc:
        raise InputError(f"not a readable CSV file ({exc})", file=file, line=prev + 1) from None
    if header is None:
        raise InputError("empty file: expected a header row such as kind,value,qty", file=file)
    return header, lines


def _frame(text: str, file: str):
    import pandas as pd  # imported here: most commands never read a CSV

    try:
        return pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False,
                           index_col=False, skip_blank_lines=True)
    except pd.errors.EmptyDataError:
        raise InputError("empty file: expected a header row such as kind,value,qty",
                         file=file) from None
    except (pd.errors.ParserError, ValueError) as exc:
        msg = str(exc).strip().splitlines()[-1] if str(exc).strip() else type(exc).__name__
        m = re.search(r"(?:line|row) (\d+)", msg)
        line = int(m.group(1)) + (0 if "line" in msg else 1) if m else None
        msg = re.sub(r"^Error tokenizing data\. C error: ", "", msg)
        raise InputError(f"not a readable CSV file ({msg}); check for a stray quote",
                         file=file, line=line) from None


def _number(text: str, unit: str) -> float:
    """A plain number or a value with an SI prefix and an optional unit suffix."""
    t = text.strip()
    try:
        x = float(t)
    except ValueError:
        x = values.parse_value(t)
    if not math.isfinite(x):
        raise InputError(f"{text!r} is not a finite number")
    return float(x)


def _row_part(cells: dict[str, str], has_min_qty: bool):
    """Build one part from a row's cells; raise InputError(field=…) on the first problem
    of each field (collected by the caller)."""
    problems: list[InputError] = []

    def fail(field: str, message: str) -> None:
        problems.append(InputError(message, field=field))

    kind = cells.get("kind", "").strip().lower()
    if not kind:
        fail("kind", "empty; expected resistor, capacitor, npn or pnp")
        return None, None, problems
    if kind not in KINDS:
        fail("kind", f"unknown kind {cells['kind'].strip()!r}; expected resistor, capacitor, npn or pnp")
        return None, None, problems

    qty_text = cells.get("qty", "").strip()
    qty = 0
    if not qty_text:
        fail("qty", "empty; expected a whole number of pieces, 0 or more")
    elif not _QTY_RE.match(qty_text):
        if re.match(r"^\s*-", qty_text):
            fail("qty", f"{qty_text!r} is negative; expected a whole number, 0 or more")
        else:
            try:
                float(qty_text)
                fail("qty", f"{qty_text!r} is not a whole number of pieces")
            except ValueError:
                fail("qty", f"{qty_text!r} is not a number of pieces")
    else:
        qty = int(qty_text)
        if qty > MAX_QTY:
            fail("qty", f"{qty_text} is too large (at most {MAX_QTY})")
            qty = 0

    min_qty: int | None = None
    mq = cells.get("min_qty", "").strip() if has_min_qty else ""
    if mq:
        if _QTY_RE.match(mq) and int(mq) <= MAX_QTY:
            min_qty = int(mq)
        else:
            fail("min_qty", f"{mq!r} is not a whole number, 0 or more")

    location = cells.get("location", "").strip()
    value_text = cells.get("value", "").strip()

    def not_for(cols: Iterable[str], what: str) -> None:
        for c in cols:
            if cells.get(c, "").strip():
                fail(c, f"does not apply to {what}; leave it empty")

    if kind in TRANSISTOR_KINDS:
        not_for((*_RC_ONLY, *_R_ONLY, *_C_ONLY), "transistors")
        if not value_text:
            fail("value", "empty; for a transistor write the label of its type")
        figures: dict[str, float | None] = {}
        for col, (unit, default) in _TRANSISTOR_FIGURES.items():
            text = cells.get(col, "").strip()
            if not text:
                figures[col] = default
                if col in ("hfe_min", "hfe_max"):
                    fail(col, "a transistor needs hfe_min and hfe_max")
                continue
            try:
                x = _number(text, unit)
            except InputError as exc:
                fail(col, exc.message)
                continue
            if x <= 0:
                fail(col, f"{text!r} must be greater than zero")
                continue
            figures[col] = x
        lo, hi, typ = figures.get("hfe_min"), figures.get("hfe_max"), figures.get("hfe_typ")
        if lo is not None and hi is not None:
            if lo > hi:
                fail("hfe_max", f"hfe_max {hi:g} is below hfe_min {lo:g}")
            elif typ is not None and not (lo <= typ <= hi):
                fail("hfe_typ", f"hfe_typ {typ:g} lies outside hfe_min..hfe_max ({lo:g}..{hi:g})")
        if problems:
            return None, min_qty, problems
        part = Transistor(label=value_text, polarity=kind, qty=qty, location=location,
                          **figures)  # type: ignore[arg-type]
        return part, min_qty, problems

    not_for(_TRANSISTOR_FIGURES, f"{kind}s")
    not_for(_C_ONLY if kind == "resistor" else _R_ONLY, f"{kind}s")
    value = None
    tol_from_value = None
    if not value_text:
        fail("value", f"empty; expected a {kind} value such as "
                      f"{'4k7' if kind == 'resistor' else '100n'}")
    else:
        try:
            value, tol_from_value = values.parse_value_tolerance(value_text, kind)
            if not math.isfinite(value) or value <= 0:
                raise InputError(f"{value_text!r} must be a finite value above zero")
        except InputError as exc:
            fail("value", exc.message)
            value = None

    tol_text = cells.get("tolerance", "").strip()
    tolerance = tol_from_value if tol_from_value is not None else (
        DEFAULT_RESISTOR_TOLERANCE if kind == "resistor" else DEFAULT_CAPACITOR_TOLERANCE)
    if tol_text:
        try:
            tolerance = values.parse_tolerance(tol_text)
            if tol_from_value is not None and abs(tolerance - tol_from_value) > 1e-12:
                fail("tolerance", f"{tol_text!r} disagrees with the tolerance letter of the "
                                  f"value {value_text!r}")
        except InputError as exc:
            fail("tolerance", exc.message)

    if kind == "resistor":
        power = _rating(cells, "power", values.parse_power, DEFAULT_RESISTOR_POWER_W,
                        "a power rating", fail)
        if problems:
            return None, min_qty, problems
        return (Resistor(value=value, qty=qty, tolerance=tolerance, power_w=power,
                         location=location), min_qty, problems)

    voltage = _rating(cells, "voltage", values.parse_voltage, DEFAULT_CAPACITOR_VOLTAGE_V,
                      "a voltage rating", fail)
    dielectric = cells.get("dielectric", "").strip().lower() or "ceramic"
    if problems:
        return None, min_qty, problems
    return (Capacitor(value=value, qty=qty, tolerance=tolerance, voltage_v=voltage,
                      dielectric=dielectric, location=location), min_qty, problems)


def part_from_cells(cells: dict[str, str]):
    """One part from column -> text, checked exactly like a stock-file row.

    Returns ``(part, min_qty)``; raises InputError (field = the column) or
    InputErrors listing every problem.
    """
    cells = {k.lower(): ("" if v is None else str(v)) for k, v in cells.items()}
    unknown = sorted(set(cells) - set(COLUMNS))
    if unknown:
        raise InputError(f"unknown column {unknown[0]!r}")
    part, min_qty, problems = _row_part(cells, "min_qty" in cells)
    if problems:
        raise problems[0] if len(problems) == 1 else InputErrors(problems)
    return part, min_qty


def read_stock_csv(path: str | Path, *, ignore_columns: Sequence[str] = ()) -> list[StockRow]:
    """Read and check a stock file.

    Parameters
    ----------
    path : str or Path
        The CSV file (UTF-8, a byte-order mark is allowed).
    ignore_columns : sequence of str
        Extra column names that are accepted and ignored (``packs``, ``cost``
        in an order file).

    Returns
    -------
    list of StockRow
        One per data row, in file order.  Rows that describe the same item are
        not merged here (see :func:`merge_rows`).

    Raises
    ------
    InputError, InputErrors
        Every problem found, each naming the file, line and column.
    """
    path = Path(path)
    file = str(path)
    text = _decode(path)
    header, lines = _record_lines(text, file)
    names = [h.strip().lower() for h in header]
    errors: list[InputError] = []
    seen: set[str] = set()
    ignore = {c.lower() for c in ignore_columns}
    for raw, name in zip(header, names, strict=True):
        if not name:
            errors.append(InputError("a column has no name in the header", file=file, line=1))
        elif name in seen:
            errors.append(InputError(f"column {raw.strip()!r} appears twice", file=file, line=1))
        elif name not in COLUMNS and name not in ignore:
            errors.append(InputError(
                f"unknown column {raw.strip()!r}; the columns are {', '.join(COLUMNS)}",
                file=file, line=1))
        seen.add(name)
    for need in REQUIRED:
        if need not in names:
            errors.append(InputError(f"missing column {need!r} (needed: kind, value, qty)",
                                     file=file, line=1))
    if errors:
        raise errors[0] if len(errors) == 1 else InputErrors(errors)

    frame = _frame(text, file)
    frame.columns = names
    # Rows of nothing but empty cells are blank lines too.
    if len(frame) != len(lines):  # pragma: no cover - alignment guard
        lines = [i + 2 for i in range(len(frame))]
    has_min_qty = "min_qty" in names
    rows: list[StockRow] = []
    known = [n for n in names if n in COLUMNS]
    for i, rec in enumerate(frame[known].to_dict("records")):
        line = lines[i]
        cells = {n: _unquote(str(rec[n])) for n in known}
        if not any(c.strip() for c in cells.values()):
            continue
        part, min_qty, problems = _row_part(cells, has_min_qty)
        for p in problems:
            errors.append(p.located(file=file, line=line))
        if part is not None and not problems:
            rows.append(StockRow(line=line, part=part, min_qty=min_qty))
    errors.extend(_duplicate_conflicts(rows, file))
    if errors:
        raise errors[0] if len(errors) == 1 else InputErrors(errors)
    return rows


def _duplicate_conflicts(rows: list[StockRow], file: str) -> list[InputError]:
    """Rows that name the same item but disagree (a transistor label with other figures,
    or two different restock levels)."""
    errors: list[InputError] = []
    first: dict[tuple, StockRow] = {}
    for row in rows:
        key = part_key(row.part)
        other = first.get(key)
        if other is None:
            first[key] = row
            continue
        if isinstance(row.part, Transistor) and not same_transistor(row.part, other.part):
            errors.append(InputError(
                f"transistor {row.part.label!r} is described differently on line "
                f"{other.line}; one label, one set of figures", file=file, line=row.line,
                field="value"))
        elif (row.min_qty is not None and other.min_qty is not None
              and row.min_qty != other.min_qty):
            errors.append(InputError(
                f"min_qty {row.min_qty} differs from {other.min_qty} on line {other.line} "
                "for the same item", file=file, line=row.line, field="min_qty"))
    return errors


def merge_rows(rows: Iterable[StockRow]) -> list[StockRow]:
    """Rows naming the same item merged into one, their quantities added."""
    merged: dict[tuple, StockRow] = {}
    for row in rows:
        key = part_key(row.part)
        if key in merged:
            old = merged[key]
            merged[key] = replace(old, part=replace(old.part, qty=old.part.qty + row.part.qty),
                                  min_qty=old.min_qty if old.min_qty is not None else row.min_qty)
        else:
            merged[key] = row
    return list(merged.values())


# --------------------------------------------------------------- writing

def neutralise_cell(text: str) -> str:
    """Prefix text that a spreadsheet would run as a formula with a single quote."""
    if text and text[0] in _FORMULA_START:
        return "'" + text
    return text


def _plain(x: float | None) -> str:
    """A float as the shortest text that reads back to the same float."""
    if x is None:
        return ""
    for digits in (6, 9, 12, 15):
        t = f"{x:.{digits}g}"
        if float(t) == x:
            return t
    return repr(float(x))


def _exact_value(value: float, kind: str) -> str:
    """The value as a technician writes it, when that reads back exactly; else a longer form."""
    try:
        text = values.format_value(value, kind)
        if values.parse_value(text, kind) == value:
            return text
    except InputError:
        pass
    for exp, prefix in ((12, "T"), (9, "G"), (6, "M"), (3, "k"), (0, ""), (-3, "m"),
                        (-6, "u"), (-9, "n"), (-12, "p")):
        if value >= 10.0**exp or exp == -12:
            mant = value / 10.0**exp
            for digits in (6, 9, 12, 15, 17):
                t = f"{mant:.{digits}g}{prefix}"
                if kind == "capacitor" and not prefix:
                    t += "F"
                try:
                    if values.parse_value(t, kind) == value:
                        return t
                except InputError:
                    break
            break
    return repr(float(value))


def _exact_tolerance(tol: float) -> str:
    t = f"{_plain(tol * 100)}%"
    try:
        if values.parse_tolerance(t) == tol:
            return t
    except InputError:
        pass
    return _plain(tol)


def part_cells(part, min_qty: int | None = None) -> dict[str, str]:
    """One stock-file row (column -> text) describing ``part``."""
    cells = dict.fromkeys(COLUMNS, "")
    cells["kind"] = part.kind
    cells["qty"] = str(int(part.qty))
    cells["location"] = neutralise_cell(part.location)
    mq = part.min_qty if min_qty is None else min_qty
    cells["min_qty"] = str(int(mq)) if mq else ""
    if isinstance(part, Transistor):
        cells["value"] = neutralise_cell(part.label)
        for col in _TRANSISTOR_FIGURES:
            cells[col] = figure_text(col, getattr(part, col))
        return cells
    cells["value"] = _exact_value(part.value, part.kind)
    cells["tolerance"] = _exact_tolerance(part.tolerance)
    if isinstance(part, Resistor):
        cells["power"] = _plain(part.power_w)
    else:
        cells["voltage"] = _plain(part.voltage_v)
        cells["dielectric"] = neutralise_cell(part.dielectric)
    return cells


def write_stock_csv(path: str | Path, parts: Iterable, *,
                    extra: Sequence[dict[str, str]] | None = None) -> None:
    """Write parts as a stock file that :func:`read_stock_csv` reads back to the same items.

    Parameters
    ----------
    path : str or Path
        Where to write (UTF-8, no byte-order mark).
    parts : iterable of Resistor, Capacitor or Transistor
        The rows, written in the order given.
    extra : sequence of dict, optional
        Extra columns per row (same length as ``parts``), appended after the
        standard ones (e.g. ``packs`` in an order file).
    """
    import pandas as pd  # imported here: most commands never write a CSV

    records = [part_cells(p) for p in parts]
    columns = list(COLUMNS)
    if extra:
        for rec, more in zip(records, extra, strict=True):
            rec.update(more)
            for k in more:
                if k not in columns:
                    columns.append(k)
    frame = pd.DataFrame(records, columns=columns, dtype=str).fillna("")
    try:
        frame.to_csv(Path(path), index=False, lineterminator="\n")
    except OSError as exc:
        raise InputError(f"cannot write: {exc.strerror}", file=str(path)) from None


def _rating(cells: dict, column: str, parse, default: float, what: str, fail) -> float:
    """A rating column (power, voltage): its default when empty, else a finite value
    above zero; a bad cell is reported through ``fail(column, message)``."""
    text = cells.get(column, "").strip()
    if not text:
        return default
    try:
        value = parse(text)
        if not math.isfinite(value) or value <= 0:
            raise InputError(f"{text!r} must be {what} above zero")
        return value
    except InputError as exc:
        fail(column, exc.message)
        return default
